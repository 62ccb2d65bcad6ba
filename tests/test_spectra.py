"""Analytic output spectra: normalisation, conventions and the noise budget.

Each test checks the spectra against an independent route (the Lyapunov
covariance, a time-domain correlation function, the plain H N H† of the
state-space model) or a published law, named beside it.
"""

import numpy as np
import pytest
import scipy.linalg
from conftest import make_scenario, mode, scenario_with_coupling
from hypothesis import HealthCheck, assume, given, reject, settings
from hypothesis import strategies as st
from scipy import constants

from simulator.errors import InputError, OperatingPointError, ScenarioError
from simulator.linear import budget, spectra
from simulator.linear.sidebands import cavity_filter, sideband_summary
from simulator.linear.steady_state import effective_mechanics
from simulator.model.system import System
from simulator.model.units import angular
from simulator.workflows.demo import demo_scenario

U_HET = np.array([1.0, 1.0j]) / np.sqrt(2.0)


def _two_modes(**kw):
    return scenario_with_coupling(
        g_hz=3e4, detuning_hz=-20e6, modes=[mode("a", frequency_hz=20e6, linewidth_hz=50.0),
                                           mode("b", frequency_hz=23e6, linewidth_hz=20.0)],
        **kw)


def test_heterodyne_total_is_one_plus_eta_normal_ordered_flux():
    """S(ν) = 1 + η(u H N H† u† − ½) with S from StateSpace.output_spectrum.

    Weinstein et al., PRX 4, 041003 (2014): heterodyne in shot-noise
    units is 1 plus η times the normal-ordered output spectrum.
    """
    sc = demo_scenario()
    spec = spectra.heterodyne_spectrum(sc)
    system = System(sc).require_stable()
    _, model = system.point, system.model
    s = model.output_spectrum(angular(spec.frequency_hz))
    s_zz = np.einsum("p,wpq,q->w", U_HET, s, U_HET.conj()).real
    eta = sc.detection.efficiency
    # the budget sums H⁰ and Hᵐ computed separately: equal to rounding (~1e-11)
    np.testing.assert_allclose(spec.total, 1.0 + eta * (s_zz - 0.5), rtol=0, atol=1e-9)
    assert spec.sided == "two-sided" and spec.units.startswith("shot-noise units")
    assert spec.budget_residual() < 1e-12
    # the floor is exactly the vacuum: the uncoupled input-output map is unitary
    np.testing.assert_allclose(spec.contributions[spectra.FLOOR], 1.0, atol=1e-12)


def test_homodyne_total_matches_quadrature_spectrum():
    """One-sided homodyne S(f) = 1 + η(2 S̄_θθ − 1), S̄_θθ from H N H†."""
    sc = demo_scenario()
    theta = 0.7
    spec = spectra.homodyne_spectrum(sc, quadrature_angle=theta)
    assert spec.sided == "one-sided" and np.all(spec.frequency_hz >= 0)
    system = System(sc).require_stable()
    _, model = system.point, system.model
    u = np.array([np.cos(theta), np.sin(theta)])
    s = model.output_spectrum(angular(spec.frequency_hz))
    s_tt = np.einsum("p,wpq,q->w", u, s, u).real
    eta = sc.detection.efficiency
    np.testing.assert_allclose(spec.total, 1.0 + eta * (2 * s_tt - 1.0), atol=1e-12)
    assert spec.budget_residual() < 1e-12


def test_vacuum_in_vacuum_out():
    """No drive, zero-temperature baths, lossy cavity: N_out = 0 and S = 1 everywhere.

    Input-output theory (Gardiner & Collett, PRA 31, 3761 (1985)): a passive
    linear system fed vacuum emits vacuum.
    """
    sc = make_scenario(drive={"power_w": 0.0}, mechanics={"bath_occupation": 0.0},
                       cavity={"external_linewidth_hz": 0.3e6})
    het = spectra.heterodyne_spectrum(sc)
    hom = spectra.homodyne_spectrum(sc, quadrature_angle=0.3)
    np.testing.assert_allclose(het.total, 1.0, atol=1e-13)
    np.testing.assert_allclose(hom.total, 1.0, atol=1e-13)
    system = System(sc).require_stable()
    _, model = system.point, system.model
    assert np.max(np.abs(spectra.photon_flux_density(model, het.frequency_hz))) < 1e-14


@pytest.mark.parametrize("make", [demo_scenario, _two_modes], ids=["demo", "two-modes"])
def test_parseval_state_spectra_integrate_to_lyapunov_variances(make):
    """∫ S_ii df = V_ii (Parseval / Wiener–Khinchin), to < 0.1 %.

    Integrated by the trapezoid rule on the adaptive grid out to 10⁴ times the
    fastest rate, plus the exact 1/f² tail beyond it; the covariance comes
    from the Lyapunov equation (scipy), an independent route.
    """
    sc = make()
    system = System(sc).require_stable()
    _, model = system.point, system.model
    rates = np.abs(np.linalg.eigvals(model.A)) / (2 * np.pi)
    f = spectra.adaptive_grid(model, span_hz=1e4 * rates.max())
    s = spectra.state_spectrum(model, f)
    diag = np.real(np.einsum("wii->wi", s))
    integral = np.trapezoid(diag, f, axis=0)
    integral += diag[0] * abs(f[0]) + diag[-1] * f[-1]  # ∫ c/f² beyond the edges
    v = np.diag(model.covariance())
    np.testing.assert_allclose(integral, v, rtol=1e-3)


def test_anti_stokes_is_above_the_drive_by_a_time_domain_route():
    """Fourier-sign check: ⟨a†(0)a(t)⟩ from the Lyapunov covariance and expm(At).

    Quantum regression: ⟨x_i(0)x_j(t)⟩ = [Σ₀ e^(Aᵀt)]_ij for t > 0 with
    Σ₀ = V + (i/2)J. Its numerical transform ∫ e^(iωt)⟨a†(0)a(t)⟩ dt, times
    κ_ex (vacuum at the port), must equal N_out(ω) at ω = +Ωm and −Ωm
    separately: with the kernel of numpy's FFT (e^(−iωt)) the two would swap
    (docs/physics.md §12, "The FFT sign trap").
    """
    sc = scenario_with_coupling(g_hz=1.5e5, linewidth_hz=1e6, external_linewidth_hz=0.6e6,
                                detuning_hz=-2e6,
                                modes=[mode(frequency_hz=2e6, linewidth_hz=2e3,
                                            bath_occupation=2.0)])
    system = System(sc).require_stable()
    point, model = system.point, system.model
    v = model.covariance()
    n = len(model.states)
    j = np.zeros((n, n))
    for k in range(0, n, 2):
        j[k, k + 1], j[k + 1, k] = 1.0, -1.0
    sigma0 = v + 0.5j * j
    lam = np.linalg.eigvals(model.A)
    dt = 0.02 / np.max(np.abs(lam))
    steps = int(40.0 / np.min(-lam.real) / dt)
    step = scipy.linalg.expm(model.A.T * dt)
    a = np.zeros(n, dtype=complex)
    a[:2] = U_HET
    corr = np.empty(steps + 1, dtype=complex)
    m = sigma0.copy()
    for k in range(steps + 1):
        corr[k] = a.conj() @ m @ a
        m = m @ step
    t = dt * np.arange(steps + 1)
    freq = np.array(effective_mechanics(model, 1)[0])
    f = np.concatenate([freq, -freq])
    kernel = np.exp(1j * np.outer(angular(f), t))
    # simpson on a uniform grid: ∫₀^∞, then S = 2 Re
    w = np.ones(steps + 1)
    w[1:-1:2], w[2:-1:2] = 4.0, 2.0
    half = kernel @ (w * corr) * dt / 3.0
    s_time = 2.0 * half.real * angular(point.external_linewidth_hz)
    s_freq = spectra.photon_flux_density(model, f)
    np.testing.assert_allclose(s_time, s_freq, rtol=1e-5)
    anti_stokes, stokes = s_freq / cavity_filter(point, 0, f)
    assert stokes > 1.3 * anti_stokes  # n + 1 vs n, distinct enough to catch a flip


def test_detailed_balance_of_a_bare_thermal_oscillator():
    """S(−Ω)/S(+Ω) = exp(−ħΩ/kT) for an oscillator at temperature T.

    Clerk, Devoret, Girvin, Marquardt, Schoelkopf, RMP 82, 1155 (2010),
    Sec. II.B (section from memory). Probed on resonance (Δ = 0, no optical
    damping) at cooperativity 4e-8, so back-action heating is below 1e-7
    quanta; the cavity filter is removed point by point. ħΩ/kT ≈ 1.2.
    """
    fm, temp = 5e9, 0.2
    sc = scenario_with_coupling(
        g_hz=1e3, linewidth_hz=1e9, external_linewidth_hz=1e9, detuning_hz=0.0,
        modes=[mode(frequency_hz=fm, linewidth_hz=1e5, coupling_hz=1e3,
                    bath_temperature_k=temp)])
    system = System(sc).require_stable()
    point, model = system.point, system.model
    boltzmann = np.exp(-constants.h * fm / (constants.k * temp))
    f = np.array([fm, -fm])
    anti_stokes, stokes = spectra.photon_flux_density(model, f) / cavity_filter(point, 0, f)
    assert anti_stokes / stokes == pytest.approx(boltzmann, rel=3e-4)
    summary = sideband_summary(sc)[0]
    assert summary.ratio == pytest.approx(boltzmann, rel=2e-3)


def test_normal_mode_splitting_at_strong_coupling():
    """Two peaks separated by ≈ 2g when g ≫ κ/4 at Δ = −Ωm.

    Normal modes λ = −(κ+Γm)/4 ± i√(g² − ((κ−Γm)/4)²) (Dobrindt, Wilson-Rae,
    Kippenberg, PRL 101, 263602 (2008); Gröblacher et al., Nature 460, 724
    (2009)). Here g = 1 MHz, κ = 0.5 MHz: splitting 2√(g² − (κ/4)²) within 1 %;
    the pair sits g²/(2Ωm) below Ωm, the shift from the counter-rotating
    coupling (second-order perturbation theory, common practice).
    """
    g, kappa, fm = 1e6, 0.5e6, 20e6
    sc = scenario_with_coupling(g_hz=g, linewidth_hz=kappa, detuning_hz=-fm,
                                modes=[mode(frequency_hz=fm, linewidth_hz=10.0,
                                            bath_occupation=10.0)])
    spec = spectra.heterodyne_spectrum(sc, np.linspace(fm - 4 * g, fm + 4 * g, 40001))
    y = spec.total
    peaks = np.flatnonzero((y[1:-1] > y[:-2]) & (y[1:-1] > y[2:])) + 1
    assert len(peaks) == 2
    split = np.diff(spec.frequency_hz[peaks])[0]
    assert split == pytest.approx(2 * np.sqrt(g**2 - (kappa / 4) ** 2), rel=0.01)
    # centred on Ωm less the counter-rotating (Stokes) shift g²/(2Ωm)
    assert np.mean(spec.frequency_hz[peaks]) == pytest.approx(fm - g**2 / (2 * fm),
                                                              abs=0.005 * g)


def test_adaptive_grid_resolves_a_one_hertz_peak_beside_a_megahertz_cavity():
    """Every resonance gets many points per linewidth, without a user resolution."""
    sc = make_scenario(mechanics={"linewidth_hz": 1.0, "coupling_hz": 1.0},
                       drive={"power_w": 1e-9})
    system = System(sc).require_stable()
    _, model = system.point, system.model
    f = spectra.adaptive_grid(model)
    lam = np.linalg.eigvals(model.A)
    for centre, half in zip(-lam.imag / (2 * np.pi), -lam.real / (2 * np.pi), strict=True):
        assert np.count_nonzero(np.abs(f - centre) < half) >= 100
    assert f.min() < -20e6 - 1e6 and f.max() > 20e6 + 1e6
    assert np.all(np.diff(f) > 0)
    one = spectra.adaptive_grid(model, one_sided=True)
    assert one.min() == 0.0 and np.all(np.diff(one) > 0)


def test_large_grid_is_chunked_and_agrees_with_small_grid():
    """2·10⁵ points through the chunked path equal the same points evaluated alone."""
    sc = demo_scenario()
    f = np.linspace(-3e6, 3e6, 200_001)
    big = spectra.heterodyne_spectrum(sc, f)
    small = spectra.heterodyne_spectrum(sc, f[::9973])
    np.testing.assert_allclose(big.total[::9973], small.total, rtol=1e-13)
    assert big.budget_residual() < 1e-12


def test_bad_input_and_unstable_scenarios_raise_clear_errors():
    sc = demo_scenario()
    with pytest.raises(InputError, match="negative"):
        spectra.homodyne_spectrum(sc, [-1.0, 2.0])
    with pytest.raises(InputError, match="efficiency"):
        spectra.heterodyne_spectrum(sc, [1.0], efficiency=1.5)
    with pytest.raises(InputError, match="frequency grid"):
        spectra.heterodyne_spectrum(sc, [[1.0]])
    blue = scenario_with_coupling(g_hz=3e5, detuning_hz=+20e6,
                                  modes=[mode(frequency_hz=20e6, linewidth_hz=10.0)])
    with pytest.raises(OperatingPointError, match="unstable"):
        spectra.heterodyne_spectrum(blue)


@st.composite
def _random_scenarios(draw):
    kappa = draw(st.floats(1e5, 1e7))
    modes = []
    for k in range(draw(st.integers(1, 3))):
        modes.append(mode(f"m{k}", frequency_hz=draw(st.floats(1e5, 5e7)),
                          linewidth_hz=draw(st.floats(1.0, 1e4)),
                          bath_occupation=draw(st.one_of(st.just(0.0),
                                                         st.floats(1e-3, 1e3))),
                          coupling_hz=draw(st.floats(1.0, 1e3))))
    try:
        return scenario_with_coupling(
            g_hz=draw(st.floats(1e2, 0.5 * kappa)), linewidth_hz=kappa,
            external_linewidth_hz=kappa * draw(st.floats(0.05, 1.0)),
            detuning_hz=draw(st.floats(-3.0, 3.0)) * modes[0]["frequency_hz"],
            cavity_bath_occupation=draw(st.floats(0.0, 2.0)), modes=modes)
    except ScenarioError:  # a drive beyond the loader's physical limits (over 1 kW)
        reject()


@settings(max_examples=20, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(_random_scenarios(), st.floats(0.0, np.pi))
def test_budget_sums_and_spectra_are_physical_on_random_scenarios(sc, theta):
    """Contributions sum to the total; N_out ≥ 0 so S_het ≥ 1; S_hom ≥ 0.

    N_out(ω) is the Fourier transform of the positive-definite ⟨a†(0)a(t)⟩
    (Bochner's theorem), hence non-negative (common practice).
    """
    system = System(sc)
    model = system.model
    assume(system.stable)
    assume(-np.max(np.linalg.eigvals(model.A).real) > 1e-6 * np.max(np.abs(model.A)))
    het = spectra.heterodyne_spectrum(system)
    hom = spectra.homodyne_spectrum(system, quadrature_angle=theta)
    assert het.budget_residual() < 1e-10
    assert hom.budget_residual() < 1e-10
    scale = np.max(het.total)
    assert np.min(het.total) > 1.0 - 1e-12 * scale
    assert np.min(hom.total) >= -1e-12 * np.max(hom.total)


def test_solve_fallback_near_an_exceptional_point_agrees(monkeypatch):
    """Where A is close to defective the budget uses batched solves; same numbers."""
    sc = demo_scenario()
    f = spectra.adaptive_grid(System(sc).require_stable().model)[::7]
    fast = spectra.heterodyne_spectrum(sc, f)
    original = budget.Resolvent.__init__

    def pretend_defective(self, a):
        original(self, a)
        self.well_conditioned = False

    monkeypatch.setattr(budget.Resolvent, "__init__", pretend_defective)
    slow = spectra.heterodyne_spectrum(sc, f)
    np.testing.assert_allclose(slow.total, fast.total, atol=1e-10)
    for name, curve in fast.contributions.items():
        np.testing.assert_allclose(slow.contributions[name], curve, atol=1e-10)
