"""Linearised master equation with several drive tones: one Hilbert factor per tone field.

The linear engine keeps one fluctuation field per tone, in that tone's own
rotating frame (docs/physics.md §13; exact for tones on different cavity
modes, the stated approximation for tones on one mode). The master equation
here is the same model in a truncated Fock space: a factor per tone field
a_k, then one per mechanical mode b_j (ħ = 1, rates in units of the widest
cavity linewidth)::

    H = Σ_k −Δk a_k†a_k + Σ_j Ωj b_j†b_j − Σ_kj g_kj (a_k + a_k†)(b_j + b_j†)

with Δk the tone's effective detuning and g_kj = g0_cj √n_k. Each tone field
has the damping of its cavity mode c: √κex,c a_k (vacuum),
√(κ0,c (n_c + 1)) a_k and √(κ0,c n_c) a_k† (internal loss, thermal), as the
linear model gives every tone field its own vacuum and bath inputs; each mode
√(Γj (nj + 1)) b_j and √(Γj nj) b_j†. The Lindblad equation is then exactly
the linear model's Langevin equations, so its steady state is the Lyapunov
one up to truncation (checked in tests/test_master_tones.py), and in weak
coupling the mechanical occupation is the summed-rates closed form
n = [Γ n_th + Σk A+,k (n_c,k + 1) + Σk A−,k n_c,k] / (Γ + Σk (A−,k − A+,k))
(Marquardt, Chen, Clerk & Girvin, Phys. Rev. Lett. 99, 093902 (2007);
Wilson-Rae, Nooshi, Zwerger & Kippenberg, Phys. Rev. Lett. 99, 093901 (2007)).

The full nonlinear model is not built for several tones: in one frame the
tones beat, and a Hamiltonian periodic at the tones' spacing is beyond the
stationary solvers of :mod:`simulator.master.steady`.
"""

import dataclasses
import math

import numpy as np

from simulator.errors import InputError
from simulator.master.hilbert import (
    DEFAULT_TOLERANCE,
    MAX_DIMENSION,
    TAIL_LEVELS,
    displaced_thermal_cutoff,
)
from simulator.model.units import angular


@dataclasses.dataclass(frozen=True, kw_only=True)
class ToneFieldsState:
    """Steady state of the several-tone linearised master equation.

    ``names`` are the tone fields then the mechanical modes; ``occupations``
    ⟨c†c⟩ of each factor (fluctuations: the model has no mean fields);
    ``tail_populations`` the weight of the top :data:`TAIL_LEVELS` levels.
    """

    names: tuple
    cutoffs: tuple
    occupations: tuple
    tail_populations: tuple

    def occupation(self, name):
        """Occupation of the factor ``name`` (a tone or a mechanical mode)."""
        return self.occupations[self.names.index(name)]


def tone_field_occupations(system):
    """Occupation of every tone field and mechanical mode in the linear model (Lyapunov)."""
    model = system.model
    v = model.covariance()
    names, out = [], []
    for k, tone in enumerate(system.point.tones):
        x = model.index("cavity.X" if k == 0 else f"{tone.name}.X")
        names.append(tone.name)
        out.append((v[x, x] + v[x + 1, x + 1] - 1) / 2)
    for mode in system.point.modes:
        q = model.index(f"{mode.name}.q")
        names.append(mode.name)
        out.append((v[q, q] + v[q + 1, q + 1] - 1) / 2)
    return tuple(names), tuple(float(n) for n in out)


def tone_fields_steady_state(system, *, cutoffs=None, tolerance=DEFAULT_TOLERANCE,
                             max_dimension=MAX_DIMENSION):
    """Steady state of the linearised master equation with every tone (module doc).

    Parameters
    ----------
    system : System or Scenario
        With ``[[tones]]``.
    cutoffs : sequence of int, optional
        Fock dimensions, tone fields (drive first) then mechanical modes;
        default from the linear engine's occupations (top levels below
        ``tolerance``/4 for a thermal state).
    tolerance : float
        Largest population allowed in the top levels of any factor.
    max_dimension : int

    Raises
    ------
    InputError
        Without several tones, for a back-action-evading pair, above
        ``max_dimension``, or when a factor's top levels hold more than
        ``tolerance`` (the cutoff named).
    """
    from simulator.master.liouvillian import LindbladSolver, csr
    from simulator.model.system import as_system

    system = as_system(system, several_tones=True).require_stable()
    point = system.point
    if not point.several_tones:
        raise InputError("tone_fields_steady_state needs [[tones]]; for the drive alone use "
                         "simulator.master.steady.master_steady_state")
    if system.scenario.detection.backaction_evading:  # one field for the pair, not per tone
        system.require_one_tone("simulator.master.tone_fields.tone_fields_steady_state")
    names, expected = tone_field_occupations(system)
    dims = (tuple(int(c) for c in cutoffs) if cutoffs is not None else
            tuple(displaced_thermal_cutoff(0.0, max(n, 0.0), tolerance / 4) for n in expected))
    if len(dims) != len(names):
        raise InputError(f"cutoffs {list(dims)}: expected {len(names)} dimensions, one per "
                         f"factor ({', '.join(names)})")
    if math.prod(dims) > max_dimension:
        raise InputError(f"the several-tone master equation needs {math.prod(dims)} states "
                         f"(cutoffs {dict(zip(names, dims, strict=True))}), above "
                         f"max_dimension = {max_dimension}; use the linear steady state "
                         "(simulator.linear.steady_state), which it reproduces")
    h, collapse, ops = _hamiltonian(point, dims)
    rho, _ = LindbladSolver(h, collapse).steady_state()
    diag = np.real(np.diag(rho)).reshape(dims)
    occupations, tails = [], []
    for k, op in enumerate(ops):
        number = csr(op.dag() * op)
        occupations.append(float(np.real(np.sum(number.multiply(rho.T)))))  # Tr(n ρ)
        populations = diag.sum(axis=tuple(i for i in range(len(dims)) if i != k))
        tails.append(float(max(populations[-TAIL_LEVELS:].sum(), 0.0)))
    bad = [(n, d, t) for n, d, t in zip(names, dims, tails, strict=True) if t > tolerance]
    if bad:
        n, d, t = bad[0]
        raise InputError(f"several-tone master equation: factor {n} holds {t:.2g} in its top "
                         f"{TAIL_LEVELS} of {d} levels (tolerance {tolerance:g}); raise its "
                         "cutoff")
    return ToneFieldsState(names=names, cutoffs=dims, occupations=tuple(occupations),
                           tail_populations=tuple(tails))


def _hamiltonian(point, dims):
    """H, collapse operators and annihilators (tone fields, then modes), rates / r."""
    import qutip

    r = float(angular(max(c.linewidth_hz for c in point.cavity_modes)))
    eye = [qutip.qeye(n) for n in dims]

    def on(i):
        return qutip.tensor(*[qutip.destroy(n) if k == i else eye[k]
                              for k, n in enumerate(dims)])

    tones = point.tones
    fields = [on(k) for k in range(len(tones))]
    modes = [on(len(tones) + j) for j in range(len(point.modes))]
    h, collapse = 0 * fields[0], []
    for tone, a in zip(tones, fields, strict=True):
        cav = point.cavity_modes[tone.cavity_mode]
        kappa, kappa_ex = angular([cav.linewidth_hz, cav.external_linewidth_hz]) / r
        kappa_in = max(kappa - kappa_ex, 0.0)
        h += -float(angular(tone.detuning_effective_hz)) / r * a.dag() * a
        collapse.append(np.sqrt(kappa_ex) * a)
        if kappa_in > 0:
            collapse.append(np.sqrt(kappa_in * (cav.bath_occupation + 1)) * a)
            if cav.bath_occupation > 0:
                collapse.append(np.sqrt(kappa_in * cav.bath_occupation) * a.dag())
        for j, b in enumerate(modes):
            g = float(angular(tone.coupling_rates_hz[j])) / r
            if g:
                h -= g * (a + a.dag()) * (b + b.dag())
    for mode, b in zip(point.modes, modes, strict=True):
        om, gm = angular([mode.frequency_hz, mode.linewidth_hz]) / r
        h += om * b.dag() * b
        collapse.append(np.sqrt(gm * (mode.bath_occupation + 1)) * b)
        if mode.bath_occupation > 0:
            collapse.append(np.sqrt(gm * mode.bath_occupation) * b.dag())
    return h, collapse, fields + modes
