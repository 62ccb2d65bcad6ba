"""Stability verdict and exact steady state of the linear model.

* Stability: the eigenvalue verdict is compared with the Routh–Hurwitz
  criterion (E. J. Routh, A Treatise on the Stability of a Given State of
  Motion (1877); A. Hurwitz, Math. Ann. 46, 273 (1895)) evaluated EXACTLY in
  rational arithmetic on the characteristic polynomial, itself built without
  eigenvalues by the Faddeev–LeVerrier recursion (common practice; e.g.
  Gantmacher, The Theory of Matrices (1959)). np.poly(A) would take
  the eigenvalues first, so it is only used as a cross-check of the recursion.
* Instabilities (docs/physics.md §8; Aspelmeyer, Kippenberg, Marquardt, Rev. Mod.
  Phys. 86, 1391 (2014), static bistability and dynamical back-action):
  parametric on the blue side when Γm + Γopt < 0; static on the red side when det A < 0, with
  det A = (κ²/4 + Δ²)(Ωm² + Γm²/4) + 4g²ΩmΔ for one mode.
* Steady state: a second method integrates dV/dt = AV + VAᵀ + BNBᵀ, both with
  scipy's solve_ivp and with the exact matrix-exponential solution (C. F. Van
  Loan, IEEE Trans. Autom. Control 23, 395 (1978)) extended by doubling.
* Properties (hypothesis): the Robertson–Schrödinger uncertainty relation
  V + iJ/2 ⪰ 0 for quadratures with [x_j, p_j] = i (R. Simon, N. Mukunda,
  B. Dutta, Phys. Rev. A 49, 1567 (1994)), non-negative occupations, an
  uncoupled mode at its bath occupation, the vacuum with no drive at T = 0.
"""

import math
from fractions import Fraction

import numpy as np
import pytest
import scipy.linalg
from conftest import (
    bistable_window,
    make_scenario,
    mode,
    scenario_for_cubic,
    scenario_with_coupling,
)
from exact_stability import characteristic_polynomial, routh_hurwitz_stable
from hypothesis import assume, event, given, settings
from hypothesis import strategies as st
from scipy.integrate import solve_ivp

from simulator.errors import OperatingPointError
from simulator.linear.steady_state import steady_state
from simulator.model.operating_point import operating_point
from simulator.model.optomechanics import linear_model
from simulator.model.stability import stability
from simulator.model.system import System

TWO_PI = 2 * math.pi


# -- Routh–Hurwitz in exact arithmetic -------------------------------------------

def test_routh_hurwitz_helper_on_known_polynomials():
    # (s+1)(s+2)(s+3) stable; (s−1)(s+2)(s+3) not; s²+s+1 stable; s⁴ + ... check.
    assert routh_hurwitz_stable([Fraction(x) for x in (1, 6, 11, 6)]) is True
    assert routh_hurwitz_stable([Fraction(x) for x in (1, 4, 1, -6)]) is False
    assert routh_hurwitz_stable([Fraction(x) for x in (1, 1, 1)]) is True
    a = np.array([[-1.0, 5.0, 0, 0], [-5.0, -1.0, 0.3, 0], [0, 0, 0.2, 7.0], [0.1, 0, -7.0, 0.2]])
    exact = [float(c) for c in characteristic_polynomial(a)]
    np.testing.assert_allclose(exact, np.poly(a), rtol=1e-10, atol=1e-12)
    assert routh_hurwitz_stable(characteristic_polynomial(a)) == bool(
        np.all(np.linalg.eigvals(a).real < 0))


@settings(max_examples=60, deadline=None)
@given(om_ratio=st.floats(0.1, 30.0),
       delta_ratio=st.one_of(st.floats(-3.0, -0.05), st.floats(0.05, 3.0)),
       ratio=st.floats(0.02, 4.0), log_gamma=st.floats(-6.0, -2.0),
       second=st.booleans(), second_ratio=st.floats(1.3, 3.0))
def test_stability_verdict_agrees_with_routh_hurwitz(om_ratio, delta_ratio, ratio, log_gamma,
                                                     second, second_ratio):
    # Choose g so that |Γopt| = ratio·Γm (weak-coupling estimate), which puts
    # blue-detuned cases on both sides of the threshold Γm + Γopt = 0.
    kappa, om = 1e6, om_ratio * 1e6
    gm, delta = 10**log_gamma * om, delta_ratio * om
    per_g2 = kappa / (kappa**2 / 4 + (delta + om) ** 2) - kappa / (kappa**2 / 4
                                                                   + (delta - om) ** 2)
    g = math.sqrt(ratio * gm / abs(per_g2))
    assume(g < 0.2 * kappa)
    modes = [mode("a", frequency_hz=om, linewidth_hz=gm, coupling_hz=100.0)]
    if second:
        modes.append(mode("b", frequency_hz=second_ratio * om, linewidth_hz=gm,
                          coupling_hz=60.0))
    s = scenario_with_coupling(g_hz=g, detuning_hz=delta, modes=modes)
    model = System(s).model
    lam = np.linalg.eigvals(model.A)
    assume(abs(lam.real.max()) > 1e-9 * np.abs(model.A).max())  # not marginal
    exact = routh_hurwitz_stable(characteristic_polynomial(model.A))
    assume(exact is not None)
    verdict = stability(model, operating_point(s))
    assert verdict.stable == exact
    assert verdict.growth_rate_hz == pytest.approx(lam.real.max() / TWO_PI, rel=1e-6,
                                                   abs=1e-9 * om)
    margin = 1 + math.copysign(ratio, per_g2)  # (Γm + Γopt)/Γm in weak coupling
    event(f"{'blue' if delta > 0 else 'red'} {'stable' if exact else 'unstable'}")
    if not second and abs(margin) > 0.2 and g < 0.02 * kappa:
        assert verdict.stable == (margin > 0)
    if not verdict.stable:
        assert verdict.cause
        if delta > 0:
            assert "blue" in verdict.cause and "Γm + Γopt < 0" in verdict.cause


@pytest.mark.parametrize("excess", [1.5, 3.0])
def test_blue_growth_rate_matches_antidamping(excess):
    # Amplitude growth rate −(Γm + Γopt)/2 in weak coupling (AKM RMP, dynamical back-action).
    kappa, om, gm, delta = 1e6, 5e6, 20.0, 5e6
    per_g2 = kappa / (kappa**2 / 4 + (delta + om) ** 2) - kappa / (kappa**2 / 4
                                                                   + (delta - om) ** 2)
    g = math.sqrt(excess * gm / -per_g2)
    s = scenario_with_coupling(g_hz=g, detuning_hz=delta,
                               modes=[mode(frequency_hz=om, linewidth_hz=gm)])
    verdict = stability(System(s).model, operating_point(s))
    assert not verdict.stable and "blue" in verdict.cause
    assert verdict.growth_rate_hz == pytest.approx(-(gm + per_g2 * g**2) / 2, rel=1e-3)
    with pytest.raises(OperatingPointError) as info:
        steady_state(s)
    assert f"{verdict.growth_rate_hz:.6g} Hz" in str(info.value)


def det_closed_form(point):
    """(κ²/4 + Δ²)(Ωm² + Γm²/4) + 4g²ΩmΔ, angular units (docs/physics.md §8)."""
    k, d = TWO_PI * point.cavity_linewidth_hz, TWO_PI * point.detuning_effective_hz
    m = point.modes[0]
    om, gm, g = (TWO_PI * x for x in (m.frequency_hz, m.linewidth_hz, m.coupling_rate_hz))
    return (k**2 / 4 + d**2) * (om**2 + gm**2 / 4) + 4 * g**2 * om * d


@pytest.mark.parametrize("d", [-4.0, -8.0])
def test_middle_branch_is_statically_unstable(d):
    # The middle solution of a bistable response has det A < 0: a real
    # eigenvalue crosses zero (static instability, red side).
    lo, hi = bistable_window(d)
    p_mid = math.sqrt(lo * hi)  # lo > 0: g(x) = x((x + d)² + 1) > 0 for x > 0
    for branch in ("lowest", "middle", "highest"):
        s = scenario_for_cubic(d=d, p=p_mid, om_ratio=3.0).replace("drive.bistable_branch",
                                                                    branch)
        point = operating_point(s)
        model = linear_model(s, point)
        det = np.linalg.det(model.A)
        assert det == pytest.approx(det_closed_form(point), rel=1e-6)
        verdict = stability(model, point)
        if branch == "middle":
            assert det < 0 and not verdict.stable
            assert "static" in verdict.cause
            top = verdict.eigenvalues_hz[0]
            assert top.imag == 0 or abs(top.imag) < 1e-9 * abs(top)
            assert top.real > 0
        else:
            assert det > 0


# -- second method: integrate the covariance equation -----------------------------

def covariance_by_doubling(model):
    """V(∞) of dV/dt = AV + VAᵀ + D from V(0) = 0, without a Lyapunov solver.

    Van Loan: expm([[−A, D], [0, Aᵀ]] t) = [[·, F12], [0, F22]] gives
    Φ = e^{At} = F22ᵀ and V(t) = Φ F12. Then V(2t) = V(t) + Φ V(t) Φᵀ and
    Φ(2t) = Φ(t)², repeated until Φ has decayed.
    """
    a, d = model.A, model.diffusion
    n = len(a)
    t = 1.0 / np.abs(a).max()
    big = np.block([[-a, d], [np.zeros((n, n)), a.T]]) * t
    f = scipy.linalg.expm(big)
    phi = f[n:, n:].T
    v = phi @ f[:n, n:]
    for _ in range(200):
        if np.abs(phi).max() < 1e-30:
            return 0.5 * (v + v.T)
        v = v + phi @ v @ phi.T
        phi = phi @ phi
    raise AssertionError("covariance did not converge")


def demo_like():
    return scenario_with_coupling(g_hz=3e4, linewidth_hz=4e5, detuning_hz=-1.5e6, modes=[
        mode("trampoline", frequency_hz=1.5e6, linewidth_hz=0.5, bath_occupation=5e4)])


@pytest.mark.parametrize("build", [
    demo_like,
    lambda: scenario_with_coupling(g_hz=3e5, detuning_hz=-20e6, modes=[mode()]),
    lambda: scenario_with_coupling(g_hz=2e4, detuning_hz=-2e6, cavity_bath_occupation=2.0,
                                   modes=[mode("a", frequency_hz=2e6, linewidth_hz=30.0),
                                          mode("b", frequency_hz=3.1e6, linewidth_hz=3.0,
                                               coupling_hz=40.0, bath_occupation=1e3)]),
], ids=["demo-like", "strong-coupling", "two-modes-thermal-cavity"])
def test_covariance_matches_matrix_exponential_doubling(build):
    s = build()
    exact = steady_state(s)
    v = covariance_by_doubling(System(s).model)
    np.testing.assert_allclose(exact.covariance, v, rtol=1e-7,
                               atol=1e-9 * np.abs(v).max())


def test_covariance_matches_time_integration():
    # solve_ivp from V(0) = vacuum until every mode has relaxed for 30 e-folds.
    s = scenario_with_coupling(g_hz=1e5, detuning_hz=-1e6, modes=[
        mode("a", frequency_hz=1.5e6, linewidth_hz=4e4, bath_occupation=20.0)])
    model = System(s).model
    a, d = model.A, model.diffusion
    n = len(a)
    slowest = -np.linalg.eigvals(a).real.max()

    def rhs(_, y):
        v = y.reshape(n, n)
        return (a @ v + v @ a.T + d).ravel()

    sol = solve_ivp(rhs, (0.0, 30.0 / slowest), (0.5 * np.eye(n)).ravel(), method="DOP853",
                    rtol=1e-10, atol=1e-12)
    assert sol.success
    v = sol.y[:, -1].reshape(n, n)
    np.testing.assert_allclose(steady_state(s).covariance, v, rtol=1e-6, atol=1e-9)


def test_lyapunov_residual_and_symmetry():
    s = demo_like()
    model = System(s).model
    v = steady_state(s).covariance
    assert np.array_equal(v, v.T)
    residual = model.A @ v + v @ model.A.T + model.diffusion
    assert np.abs(residual).max() < 1e-9 * np.abs(model.A).max() * np.abs(v).max()


# -- properties over random stable scenarios --------------------------------------

def symplectic_form(n_pairs):
    """J with J[2k, 2k+1] = 1 = −J[2k+1, 2k]: commutators of (X, Y, q1, p1, ...)."""
    return np.kron(np.eye(n_pairs), np.array([[0.0, 1.0], [-1.0, 0.0]]))


@st.composite
def random_scenarios(draw):
    n_modes = draw(st.integers(1, 3))
    kappa = 10 ** draw(st.floats(4.0, 7.0))
    modes = []
    for j in range(n_modes):
        om = kappa * 10 ** draw(st.floats(-1.0, 1.5))
        entry = mode(f"m{j}", frequency_hz=om, linewidth_hz=om * 10 ** draw(st.floats(-7, -2)),
                     coupling_hz=draw(st.sampled_from([0.0, 50.0, 300.0])) if j else 100.0)
        if draw(st.booleans()):
            entry.pop("bath_occupation")
            entry["bath_temperature_k"] = draw(st.floats(0.0, 300.0))
        else:
            entry["bath_occupation"] = draw(st.floats(0.0, 1e4))
        modes.append(entry)
    return scenario_with_coupling(
        g_hz=kappa * 10 ** draw(st.floats(-3.0, -0.3)), linewidth_hz=kappa,
        external_linewidth_hz=kappa * draw(st.floats(0.05, 1.0)),
        detuning_hz=kappa * draw(st.floats(-5.0, 0.5)),
        cavity_bath_occupation=draw(st.sampled_from([0.0, 0.0, 0.3, 3.0])), modes=modes)


@settings(max_examples=40, deadline=None)
@given(s=random_scenarios())
def test_steady_state_properties(s):
    system = System(s)
    assume(system.stable)
    st_ = steady_state(system)
    v = st_.covariance
    # The Lyapunov solve is backward stable; its forward error grows with the ratio of
    # the drift's size to its slowest decay rate (the condition of the Lyapunov
    # operator; Higham, Accuracy and Stability of Numerical Algorithms, 2nd ed. (2002),
    # Sec. 16.3, citation from memory): a 1 mHz mode beside a 10 kHz cavity is at 1e7.
    decay = -np.max(np.linalg.eigvals(system.model.A).real)
    condition = np.abs(system.model.A).max() / decay
    tol = max(1.0, np.abs(v).max()) * max(1e-9, 100 * np.finfo(float).eps * condition)
    uncertainty = v + 0.5j * symplectic_form(len(v) // 2)
    assert np.linalg.eigvalsh(uncertainty).min() > -tol
    assert st_.cavity_occupation > -tol
    for m, mp in zip(st_.modes, system.point.modes, strict=True):
        assert m.occupation > -tol
        if mp.coupling_rate_hz == 0.0:
            assert m.occupation == pytest.approx(mp.bath_occupation, abs=tol)
    assert [m.name for m in st_.modes] == [m.name for m in s.mechanics]


@settings(max_examples=15, deadline=None)
@given(s=random_scenarios())
def test_no_drive_at_zero_temperature_is_vacuum(s):
    s = s.replace("drive.power_w", 0.0).replace("cavity.bath_occupation", 0.0)
    for j in range(len(s.mechanics)):
        s = s.replace(f"mechanics[{j}].bath_temperature_k", 0.0)
    st_ = steady_state(s)
    assert abs(st_.cavity_occupation) < 1e-12
    assert all(abs(m.occupation) < 1e-12 for m in st_.modes)
    np.testing.assert_allclose(st_.covariance, 0.5 * np.eye(len(st_.covariance)), atol=1e-12)


def test_no_drive_leaves_each_mode_at_its_bath():
    s = make_scenario(drive={"power_w": 0.0}, cavity={"bath_occupation": 4.0}, mechanics=[
        mode("a", frequency_hz=1e6, bath_occupation=None, bath_temperature_k=0.02),
        mode("b", frequency_hz=7e6, bath_occupation=321.0)])
    st_ = steady_state(s)
    point = operating_point(s)
    for m, mp in zip(st_.modes, point.modes, strict=True):
        assert m.occupation == pytest.approx(mp.bath_occupation, rel=1e-9)
    # Cavity: loss-weighted thermal occupation (κ_in/κ) n_bath = 0.5 × 4.
    assert st_.cavity_occupation == pytest.approx(2.0, rel=1e-9)


# -- multi-mode -------------------------------------------------------------------

@pytest.mark.parametrize("order", [("low", "high"), ("high", "low")])
def test_two_modes_keep_their_own_effective_values(order):
    # Well separated modes in weak coupling each get their own Γopt and δΩm
    # (AKM RMP, dynamical back-action, applied mode by mode).
    kappa, delta = 1e6, -3e6
    spec = {"low": dict(frequency_hz=2e6, linewidth_hz=5.0, coupling_hz=100.0),
            "high": dict(frequency_hz=3e6, linewidth_hz=8.0, coupling_hz=150.0)}
    modes = [mode(name, **spec[name]) for name in order]
    g_first = 2e3
    s = scenario_with_coupling(g_hz=g_first, detuning_hz=delta, modes=modes)
    st_ = steady_state(s)
    photons = (g_first / modes[0]["coupling_hz"]) ** 2
    for m in st_.modes:
        p = spec[m.name]
        g = p["coupling_hz"] * math.sqrt(photons)
        om = p["frequency_hz"]
        a_minus = g**2 * kappa / (kappa**2 / 4 + (delta + om) ** 2)
        a_plus = g**2 * kappa / (kappa**2 / 4 + (delta - om) ** 2)
        assert m.optical_damping_hz == pytest.approx(a_minus - a_plus, rel=1e-9)
        assert m.effective_linewidth_hz - p["linewidth_hz"] == pytest.approx(
            a_minus - a_plus, rel=2e-3)
        assert m.effective_frequency_hz == pytest.approx(om + m.optical_spring_hz, rel=1e-9)
        assert abs(m.effective_frequency_hz - om) < 0.01 * om
    assert [m.name for m in st_.modes] == list(order)


def test_a_stationary_covariance_with_nearly_cancelling_eigenvalues_is_solved_quietly():
    """A 0.1 Hz laser linewidth beside a 10¹³ Hz detuning: two eigenvalues of A sum to
    10⁻¹⁰ of its largest entry, and SciPy's Bartels–Stewart solver warns and perturbs the
    equation. The covariance is checked by its own residual instead (it is 10⁻²¹ of the
    standard deviations here), and no warning reaches the user."""
    import warnings
    from pathlib import Path

    from simulator.model.system import System
    from simulator.scenario.loader import load_scenario

    path = Path(__file__).resolve().parents[1] / "scenarios" / "membrane_phase_noise.toml"
    scenario = (load_scenario(path).replace("drive.detuning_hz", -1.2589747958598691e13)
                .replace("drive.phase_noise.peak_width_hz", 2.07e9))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        model = System(scenario).model
        v = model.covariance()
    residual = model.A @ v + v @ model.A.T + model.diffusion
    sd = np.sqrt(np.diag(v))
    assert np.abs(residual / np.outer(sd, sd)).max() / np.abs(model.A).max() < 1e-12
