"""The engine under the feasibility bounds: which record, on which grid, and how V responds.

:mod:`simulator.analysis.feasibility` and
:mod:`simulator.analysis.joint_feasibility` quote bounds; this module holds
what they compute them with: the checked, stable System a bound is for, the
record's sample rate (the digitiser's, the automatic one, or ∞ for the
continuous record), a frequency grid resolving every line of the (sampled)
record, the Fisher blocks of the system's own record
(:func:`simulator.analysis.information.fisher_blocks`), and the first-order
response of the stationary covariance to a parameter step
(:class:`_CovarianceResponse`), which turns the information about the
parameters into a bound on a mode's occupation.
"""

import math

import numpy as np

from simulator.analysis.information import SteppedModels, fisher_blocks
from simulator.errors import InputError
from simulator.model.optomechanics import mode_states


def _system(item, stage):
    """The System of ``item`` (a System, or a scenario built into one), checked stable;
    ``stage`` names the public function for the several-tones refusal."""
    from simulator.model.system import as_system

    # the detected tone in the drive's place; a clear error for an unstable point
    return as_system(item, several_tones="detected").require_stable()


def _sample_rate(system, sample_rate_hz=None):
    """The record's sample rate: the caller's, ``digitizer.sample_rate_hz`` or the automatic one.

    ``math.inf`` stands for the continuous record (no digitiser: no sinc², no
    aliasing, no band limit), the limit the bound approaches as fs grows.
    """
    from simulator.model.sample_rate import record_sample_rate

    if sample_rate_hz is None:
        return record_sample_rate(system.scenario, system.chain)
    if not (isinstance(sample_rate_hz, (int, float)) and sample_rate_hz > 0
            and not math.isnan(sample_rate_hz)):
        raise InputError(f"sample_rate_hz = {sample_rate_hz!r}; expected a positive rate in Hz "
                         "(or math.inf for the continuous record)")
    return float(sample_rate_hz)


def _finite(fs):
    """The rate to sample at, or None for the continuous record (fs = ∞)."""
    return None if math.isinf(fs) else fs


def _grid(system, sample_rate_hz):
    """Angular frequencies ω ≥ 0 resolving every line of the (sampled) record.

    Up to π fs for samples; for the continuous record up to the farthest line
    plus twenty of the broadest half-widths.
    """
    return _grid_of_form(system.chain.channel_form(_finite(sample_rate_hz)), sample_rate_hz)


def _grid_of_form(form, sample_rate_hz):
    """:func:`_grid` of a record's (sampled) :class:`~simulator.model.poles.PoleForm`."""
    from simulator.analysis.information import record_grid

    if math.isfinite(sample_rate_hz):
        return record_grid(form, np.pi * sample_rate_hz)
    centres, widths = form.lines()
    return record_grid(form, float(np.max(np.abs(centres)) + 20.0 * np.max(widths)))


def _fisher(system, paths, omega, sample_rate_hz, stepped=None, report=None):
    """:func:`simulator.analysis.information.fisher_blocks` for the system's own record."""
    chain = system.chain
    stepped = stepped or SteppedModels(system)
    carrier = chain.carrier_rad_s if chain.receiver == "if" else None
    return fisher_blocks(stepped.record_model, system.scenario, paths, omega,
                         carrier_rad_s=carrier, sample_rate_hz=_finite(sample_rate_hz),
                         steps_of=stepped.steps, report=report)


class _CovarianceResponse:
    """Derivatives of the stationary covariance V by the linear response of A V + V Aᵀ + D = 0.

    A parameter step changes A and D = B N Bᵀ (the operating point
    re-solved); to first order A ∂V + ∂V Aᵀ = −(∂A V + V ∂Aᵀ + ∂D), a
    Lyapunov equation with the same A, solved with one real Schur form of A
    for every parameter (Bartels and Stewart, Commun. ACM 15, 820 (1972)).
    """

    def __init__(self, system, covariance=None, stepped=None):
        import scipy.linalg

        self.stepped = stepped or SteppedModels(system)
        self.model = system.model
        self.scenario = system.scenario
        self.v = self.model.covariance() if covariance is None else covariance
        self.schur, self.basis = scipy.linalg.schur(self.model.A)
        self._dv = {}

    def occupation(self, mode):
        """Exact occupation n = (⟨q²⟩ + ⟨p²⟩ − 1)/2 of one mode."""
        from simulator.linear.steady_state import occupation

        return occupation(self.v, mode_states(mode))

    def occupation_derivative(self, path, mode):
        """∂n/∂(parameter at path) of one mode."""
        if path not in self._dv:
            self._dv[path] = self._covariance_derivative(path)
        dv, s = self._dv[path], mode_states(mode).start
        return float((dv[s, s] + dv[s + 1, s + 1]) / 2.0)

    def _covariance_derivative(self, path):
        from scipy.linalg.lapack import dtrsyl

        up, down, span = self.stepped.steps(path)
        mu, md = self.stepped.system_of(up).model, self.stepped.system_of(down).model
        if mu.A.shape != self.model.A.shape or md.A.shape != self.model.A.shape:
            return (mu.covariance() - md.covariance()) / span  # the model changed shape
        da = (mu.A - md.A) / span
        rhs = -(da @ self.v + self.v @ da.T + (mu.diffusion - md.diffusion) / span)
        u = self.basis
        x, scale, info = dtrsyl(self.schur, self.schur, u.T @ rhs @ u, tranb="T")
        if info < 0:
            raise ValueError(f"the Sylvester solver rejected argument {-info}")
        dv = u @ (x / scale) @ u.T
        return 0.5 * (dv + dv.T)
