"""Heterodyne output spectra from the master equation, one linear solve per frequency.

The output field is a_out = a_in − √κ_ex a; with the external port in vacuum
apart from the coherent drive, its normal-ordered photon-flux density is

    N_out(ω) = κ_ex ∫dt e^{iωt} ⟨δa†(0) δa(t)⟩,       δa = a − ⟨a⟩,

and by the quantum regression theorem ⟨δa†(0) δa(t)⟩ = Tr[δa e^{Lt}(ρ δa†)]
for t ≥ 0, while C(−t) = C(t)*. Hence

    N_out(ω) = 2 κ_ex Re Tr[δa x(ω)],      (−iω − L) x(ω) = ρ δa†,

one linear solve per frequency with the steady state ρ reused (no time
integration of correlation functions). ω > 0 is light above the drive
(anti-Stokes), as in the linear engine; the coherent carrier (a delta at
ν = 0) is left out of the density and its photon flux
|√Φ − √κ_ex ⟨a⟩|² is reported in the provenance. The detected spectrum in
shot-noise units is S(ν) = 1 + η N_out(ν), two-sided in the optical offset ν,
exactly the convention of :func:`simulator.linear.spectra.heterodyne_spectrum`.

References
----------
Lax, Phys. Rev. 129, 2342 (1963) (quantum regression theorem).
Gardiner and Collett, Phys. Rev. A 31, 3761 (1985) (input-output theory).
"""

import numpy as np

from simulator.errors import InputError
from simulator.linear.spectra import FLOOR, HETERODYNE_AXIS, SHOT_NOISE_UNITS, adaptive_grid
from simulator.linear.spectrum import Spectrum
from simulator.master.hilbert import DEFAULT_TOLERANCE
from simulator.master.liouvillian import LindbladSolver, csr
from simulator.master.steady import expect, master_steady_state
from simulator.model.system import as_system
from simulator.model.units import angular

MASTER_FLUX = "output photon flux (master equation)"
DEFAULT_POINTS = 200


def output_flux_density(steady, frequency_hz, *, method="gmres"):
    """N_out(ν): normal-ordered output photon-flux density (photons/s per Hz).

    Parameters
    ----------
    steady : simulator.master.steady.MasterSteadyState
    frequency_hz : array_like
        Optical offsets ν from the drive (Hz), two-sided.
    method : {"gmres", "direct"}
        Linear solver (see :class:`~simulator.master.liouvillian.LindbladSolver`).

    Returns
    -------
    flux : ndarray
        N_out at each ν; ∫ N_out dν is the photon flux of the fluctuations.
    steps : int
        Total GMRES steps (0 for the direct solver).
    """
    model = steady.model
    f = np.asarray(frequency_hz, dtype=float)
    omega = angular(f) / model.rate_unit_rad_s
    solver = LindbladSolver(model.hamiltonian, model.collapse, method=method)
    rho = steady.density_matrix
    a = csr(model.annihilators[0])
    delta = a - expect(a, rho) * _identity(a.shape[0])
    b = (delta @ rho).conj().T  # ρ δa† (ρ is Hermitian)
    out = np.empty(f.size)
    steps, x = 0, None
    order = np.argsort(omega, kind="stable")
    for i in order:  # neighbouring frequencies give GMRES a warm start
        x, info = solver.solve(b, float(omega[i]), guess=x)
        out[i] = 2.0 * model.external_rate * expect(delta, x).real
        steps += info.steps
    return out, steps


def master_heterodyne_spectrum(system, frequency_hz=None, *, kind="full", efficiency=None,
                               steady=None, method="gmres", tolerance=DEFAULT_TOLERANCE,
                               **steady_options):
    """Heterodyne spectrum of the output field from the master equation.

    Parameters
    ----------
    system : simulator.model.system.System
        Or a scenario, built into one.
    frequency_hz : array_like, optional
        Optical offsets ν from the drive (Hz). Default: :data:`DEFAULT_POINTS`
        points laid by :func:`simulator.linear.spectra.adaptive_grid` around the
        linear model's resonances.
    kind : {"full", "linearised"}
        Model (ignored when ``steady`` is given).
    efficiency : float, optional
        Detection efficiency η; default ``scenario.detection.efficiency``.
    steady : MasterSteadyState, optional
        Reuse a steady state already computed.
    method : {"gmres", "direct"}
    tolerance : float
        Truncation tolerance (see :func:`~simulator.master.steady.master_steady_state`).
    **steady_options
        Passed to :func:`~simulator.master.steady.master_steady_state`.

    Returns
    -------
    simulator.linear.spectrum.Spectrum
        Two-sided density in shot-noise units, S(ν) = 1 + η N_out(ν), with
        the budget split into the shot-noise floor and the output photon flux.
    """
    system = as_system(system, stage="simulator.master.spectra.master_heterodyne_spectrum")
    scenario = system.scenario
    if scenario.detection.scheme != "heterodyne":
        raise InputError(f"detection.scheme = {scenario.detection.scheme!r}; the "
                         "master-equation engine computes heterodyne spectra only (use the "
                         "linear engine for homodyne)")
    eta = scenario.detection.efficiency if efficiency is None else efficiency
    if not 0.0 <= eta <= 1.0:
        raise InputError(f"detection efficiency = {eta!r}; expected a number in [0, 1]")
    if steady is None:
        steady = master_steady_state(system, kind, method=method, tolerance=tolerance,
                                     **steady_options)
    f = default_grid(steady.model.system) if frequency_hz is None else \
        np.asarray(frequency_hz, dtype=float)
    if f.ndim != 1 or f.size == 0 or not np.all(np.isfinite(f)):
        raise InputError(f"frequency grid of shape {f.shape}; expected a non-empty "
                         "one-dimensional array of finite frequencies in Hz")
    flux, steps = output_flux_density(steady, f, method=method)
    return Spectrum(
        frequency_hz=f, axis=HETERODYNE_AXIS, sided="two-sided", units=SHOT_NOISE_UNITS,
        total=1.0 + eta * flux, quantity="heterodyne output",
        contributions={FLOOR: np.ones_like(f), MASTER_FLUX: eta * flux},
        calibration={"detection_efficiency": float(eta)},
        provenance=_provenance(scenario, steady, eta, steps, method))


def default_grid(system, points=DEFAULT_POINTS):
    """About ``points`` offsets (Hz) around the resonances of the system's linear model."""
    grid = adaptive_grid(system.model, coarse_points=points // 4,
                         points_per_decade=8, closest=3e-2)
    if grid.size > points:
        grid = grid[np.unique(np.linspace(0, grid.size - 1, points).round().astype(int))]
    return grid


def carrier_flux(steady):
    """Photon flux (1/s) of the coherent output carrier |√Φ − √κ_ex ⟨a⟩|² (full model)."""
    model = steady.model
    if model.kind != "full":
        return None
    kappa_ex = model.external_rate * model.rate_unit_rad_s
    out = model.input_amplitude - np.sqrt(kappa_ex) * steady.cavity.amplitude
    return float(abs(out) ** 2)


def _provenance(scenario, steady, eta, steps, method):
    from simulator import __version__

    model = steady.model
    return {"scenario": scenario.scenario.name, "engine": "master-equation",
            "model": model.kind, "scheme": "heterodyne", "detection_efficiency": eta,
            "cutoffs": dict(zip(model.names, model.cutoffs, strict=True)),
            "truncation_tolerance": steady.tolerance, "solver": method,
            "solver_steps": steps, "software_version": __version__,
            "carrier_photon_flux_per_s": carrier_flux(steady),
            "scenario_toml": scenario.to_toml()}


def _identity(d):
    import scipy.sparse

    return scipy.sparse.identity(d, dtype=complex, format="csr")
