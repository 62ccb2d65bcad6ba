"""Master-equation engine against the linear engine, and its solvers against each other.

The linearised master equation (displaced frame, collapse operators √κ_ex a,
√(κ_in(n_c+1)) a, √(κ_in n_c) a†, √(Γm(n_th+1)) b, √(Γm n_th) b†) has the
same Gaussian steady state and the same output spectrum as the linear engine's
Lyapunov and transfer-function results: for a quadratic Hamiltonian with
linear damping the quantum Langevin equations are exactly the linear
state-space model (Gardiner and Collett, Phys. Rev. A 31, 3761 (1985);
Aspelmeyer, Kippenberg, Marquardt, Rev. Mod. Phys. 86, 1391 (2014), Sec. VII).
Only the Fock truncation separates them, so the tests demand agreement to a
tolerance set by the truncation tolerance.
"""

import numpy as np
import pytest
from conftest import mode, scenario_with_coupling

from simulator.errors import InputError
from simulator.linear.spectra import FLOOR, HETERODYNE_AXIS, SHOT_NOISE_UNITS, photon_flux_density
from simulator.linear.steady_state import steady_state
from simulator.master.hilbert import build_model, displaced_thermal_cutoff
from simulator.master.liouvillian import LindbladSolver
from simulator.master.spectra import master_heterodyne_spectrum, output_flux_density
from simulator.master.steady import master_steady_state
from simulator.model.system import System

# Weak-coupling scenarios (g/κ ≤ 0.1), small occupations so the Fock spaces stay small.
WEAK = {
    "red sideband, thermal cavity bath": dict(
        g_hz=0.05e6, detuning_hz=-5e6, cavity_bath_occupation=0.2,
        modes=[mode(frequency_hz=5e6, linewidth_hz=1e4, coupling_hz=1e3, bath_occupation=1.0)]),
    "blue side, stable": dict(
        g_hz=0.02e6, detuning_hz=3e6,
        modes=[mode(frequency_hz=2e6, linewidth_hz=5e4, coupling_hz=1e3, bath_occupation=0.3)]),
    "resonant drive, unresolved sidebands": dict(
        g_hz=0.03e6, detuning_hz=0.0, external_linewidth_hz=0.8e6,
        modes=[mode(frequency_hz=0.4e6, linewidth_hz=2e4, coupling_hz=1e3,
                    bath_occupation=0.5)]),
}
TOLERANCE = 1e-5  # truncation tolerance used for the comparisons


@pytest.fixture(scope="module", params=list(WEAK))
def weak_case(request):
    scenario = scenario_with_coupling(**WEAK[request.param])
    return scenario, master_steady_state(scenario, "linearised", tolerance=TOLERANCE)


def test_linearised_occupations_match_lyapunov(weak_case):
    scenario, master = weak_case
    linear = steady_state(scenario)
    assert master.cavity.occupation == pytest.approx(linear.cavity_occupation, rel=2e-3)
    for ms, ls in zip(master.modes, linear.modes, strict=True):
        assert ms.occupation == pytest.approx(ls.occupation, rel=2e-3)
        assert ms.tail_population <= TOLERANCE
    assert master.cavity.amplitude == pytest.approx(0.0, abs=1e-8)  # a Gaussian, zero mean


def test_linearised_spectrum_matches_transfer_functions(weak_case):
    scenario, master = weak_case
    mech = scenario.mechanics[0].frequency_hz
    kappa = scenario.cavity.linewidth_hz
    f = np.array([-mech - kappa / 4, -mech, -mech / 2, 0.0, mech / 3, mech, mech + kappa / 3])
    spectrum = master_heterodyne_spectrum(scenario, f, steady=master)
    flux = photon_flux_density(System(scenario).model, f)
    eta = scenario.detection.efficiency
    master_flux = (spectrum.total - 1.0) / eta
    assert np.max(np.abs(master_flux - flux)) <= 3e-3 * np.max(flux)
    # same result type and conventions as the linear engine
    assert spectrum.axis == HETERODYNE_AXIS and spectrum.units == SHOT_NOISE_UNITS
    assert spectrum.sided == "two-sided" and spectrum.budget_residual() < 1e-12
    assert np.all(spectrum.contributions[FLOOR] == 1.0)


def test_gmres_direct_and_qutip_agree_on_the_steady_state():
    import qutip

    scenario = scenario_with_coupling(**WEAK["red sideband, thermal cavity bath"])
    model = build_model(scenario, "linearised", cutoffs=[4, 8])
    reference = qutip.steadystate(model.hamiltonian, list(model.collapse)).full()
    for method in ("gmres", "direct"):
        rho, info = LindbladSolver(model.hamiltonian, model.collapse,
                                   method=method).steady_state()
        assert info.method == method
        assert np.max(np.abs(rho - reference)) < 1e-9


def test_spectrum_sign_matches_qutip_spectrum():
    """Independent check of the frequency sign: qutip.spectrum(H, w, c_ops, a†, a)
    computes ∫dτ e^{−iωτ}⟨a†(τ) a(0)⟩ = ∫dt e^{iωt}⟨a†(0) a(t)⟩ (stationarity),
    which is N_out/κ_ex (QuTiP 5 documentation of qutip.spectrum). On the red
    sideband the anti-Stokes line (ν > 0) must be the strong one."""
    import qutip
    from threadpoolctl import threadpool_limits

    scenario = scenario_with_coupling(
        g_hz=0.1e6, detuning_hz=-2e6,
        modes=[mode(frequency_hz=2e6, linewidth_hz=5e4, coupling_hz=1e3, bath_occupation=0.5)])
    steady = master_steady_state(scenario, "linearised", cutoffs=[3, 6], adapt=False,
                                 tolerance=0.05)
    model = steady.model
    f = np.array([-2.1e6, -2e6, 0.0, 2e6, 2.1e6])
    flux, _ = output_flux_density(steady, f)
    a = model.annihilators[0]
    w = 2 * np.pi * f / model.rate_unit_rad_s
    with threadpool_limits(limits=1, user_api="blas"):  # tiny dense algebra: one thread
        ref = qutip.spectrum(model.hamiltonian, w, list(model.collapse), a.dag(), a)
    assert flux / model.external_rate == pytest.approx(ref, rel=1e-6)
    assert flux[3] > 5 * flux[1]  # anti-Stokes (ν = +Ωm) above Stokes on the red side


def test_direct_and_gmres_spectra_agree():
    scenario = scenario_with_coupling(**WEAK["blue side, stable"])
    steady = master_steady_state(scenario, "linearised", cutoffs=[3, 6], adapt=False,
                                 tolerance=0.05)
    f = np.array([-2e6, -1e5, 0.0, 2e6])  # ν = 0 included: the σ term keeps it regular
    gm, steps = output_flux_density(steady, f, method="gmres")
    direct, none = output_flux_density(steady, f, method="direct")
    assert steps > 0 and none == 0
    np.testing.assert_allclose(gm, direct, rtol=1e-7)


def test_truncation_guard_stops_on_a_small_cutoff():
    scenario = scenario_with_coupling(**WEAK["red sideband, thermal cavity bath"])
    with pytest.raises(InputError) as caught:
        master_steady_state(scenario, "linearised", cutoffs={"m0": 4}, adapt=False)
    text = str(caught.value)
    assert "m0" in text and "cutoff 4" in text and "population" in text


def test_truncation_guard_raises_the_cutoff_until_it_passes():
    scenario = scenario_with_coupling(**WEAK["red sideband, thermal cavity bath"])
    steady = master_steady_state(scenario, "linearised", cutoffs={"m0": 4}, tolerance=1e-4)
    assert steady.rounds > 1 and steady.modes[0].cutoff > 4
    assert steady.modes[0].tail_population <= 1e-4
    assert steady.modes[0].occupation == pytest.approx(
        steady_state(scenario).modes[0].occupation, rel=1e-2)


def test_too_large_a_system_is_refused_with_the_mode_named():
    scenario = scenario_with_coupling(
        g_hz=0.05e6, detuning_hz=-5e6,
        modes=[mode(frequency_hz=5e6, linewidth_hz=1e3, coupling_hz=1e3,
                    bath_occupation=3000.0)])
    with pytest.raises(InputError, match=r"m0 is expected to hold .* quanta"):
        master_steady_state(scenario, "linearised")
    with pytest.raises(InputError, match="raising the cutoffs"):
        master_steady_state(
            scenario_with_coupling(**WEAK["red sideband, thermal cavity bath"]),
            "linearised", cutoffs={"m0": 4}, max_dimension=40)


def test_thermal_cutoff_closed_form():
    """Thermal state: p(m ≥ k) = (n/(n+1))^k (Bose–Einstein, common practice)."""
    n, tail = 2.0, 1e-4
    k = displaced_thermal_cutoff(0.0, n, tail) - 2
    assert (n / (n + 1)) ** k <= tail < (n / (n + 1)) ** (k - 1)
    # a coherent state of 4 quanta: Poisson distribution (Glauber, Phys. Rev. 131,
    # 2766 (1963)); its tail P(m ≥ k) = poisson.sf(k − 1) first drops below 1e-4 at k
    from scipy.stats import poisson

    k = displaced_thermal_cutoff(4.0, 0.0, tail) - 2
    assert poisson.sf(k - 1, 4.0) <= tail < poisson.sf(k - 2, 4.0)


def test_bad_options_are_input_errors():
    scenario = scenario_with_coupling(**WEAK["blue side, stable"])
    for kwargs in ({"cutoffs": [3]}, {"cutoffs": {"nope": 3}}, {"cutoffs": [3, 1.5]},
                   {"tolerance": 2.0}, {"frame": "sideways"}, {"method": "magic"}):
        with pytest.raises(InputError):
            master_steady_state(scenario, "linearised", **kwargs)
    with pytest.raises(InputError):
        master_steady_state(scenario, "quadratic")


def test_classical_laser_noise_is_refused_not_ignored():
    """The master engine has no classical noise inputs: a scenario with laser
    noise or a tone is refused with the tables named, never compared silently
    with a noise-free model."""
    from simulator.scenario.loader import scenario_from_dict

    data = scenario_with_coupling(**WEAK["blue side, stable"]).to_dict()
    data["drive"]["intensity_noise"] = {"relative_intensity_noise_per_hz": 1e-14}
    noisy = scenario_from_dict(data, source="<test>")
    for kind in ("full", "linearised"):
        with pytest.raises(InputError, match=r"\[drive.phase_noise\].*linear engine"):
            master_steady_state(noisy, kind)
