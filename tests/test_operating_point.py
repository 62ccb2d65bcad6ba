"""Operating point: photon number, static shift, bistability, per-mode quantities.

Reference values are computed here from the textbook relations, independently
of ``simulator.model.operating_point``:

* driven cavity: n̄ = κ_ex Φ / (κ²/4 + Δ²), Φ = P/(hf) (common practice;
  Aspelmeyer, Kippenberg, Marquardt, Rev. Mod. Phys. 86, 1391 (2014),
  driven-cavity steady state with the photon flux written out);
* static radiation-pressure shift per photon s = Σ 2 g0² Ωm/(Ωm² + Γm²/4)
  for the symmetric damping the engine uses (docs/physics.md §4, §7; AKM RMP Sec. V.A,
  section number from memory, gives 2 g0²/Ωm for Γm → 0);
* bistability: the real positive roots of the self-consistency cubic, found
  by bracketing between the cubic's own critical points and scipy's brentq.
"""

import math

import numpy as np
import pytest
import scipy.constants as sc
from conftest import (
    bistable_window,
    make_scenario,
    mode,
    scenario_for_cubic,
    scenario_with_coupling,
)
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq

from simulator.errors import ScenarioError
from simulator.model.operating_point import bath_occupation, operating_point
from simulator.model.units import bose_einstein
from simulator.workflows.inspection import inspect_scenario

TWO_PI = 2 * math.pi


def flux_of(scenario):
    """Drive photon flux Φ = P/(hf) (1/s)."""
    return scenario.drive.power_w / (sc.h * scenario.drive.carrier_frequency_hz)


def shift_per_photon(scenario):
    """s = Σ 2 g0² Ωm/(Ωm² + Γm²/4) in rad/s per photon, from the scenario."""
    total = 0.0
    for m in scenario.mechanics:
        g0, om, gm = (TWO_PI * x for x in (m.coupling_hz, m.frequency_hz, m.linewidth_hz))
        total += 2 * g0**2 * om / (om**2 + gm**2 / 4)
    return total


def cubic_roots(kappa, kappa_ex, flux, delta0, s):
    """Positive roots of f(n) = n(κ²/4 + (Δ0 + s n)²) − κ_ex Φ, by bracketing.

    f is a cubic with f(0) < 0 and f(n_max) ≥ 0 at n_max = κ_ex Φ/(κ²/4); its
    critical points split [0, n_max] into monotone pieces, so each sign change
    between consecutive break points holds exactly one root. Returns the roots
    and the smallest |f| at a critical point relative to κ_ex Φ (how close the
    case is to a tangent, where the count is ill-conditioned).
    """
    target = kappa_ex * flux

    def f(n):
        return n * (kappa**2 / 4 + (delta0 + s * n) ** 2) - target

    n_max = target / (kappa**2 / 4)
    crit = np.roots([3 * s**2, 4 * delta0 * s, kappa**2 / 4 + delta0**2])
    crit = sorted(c.real for c in crit if abs(c.imag) < 1e-12 * abs(c) and 0 < c.real < n_max)
    points = [0.0, *crit, n_max]
    roots = []
    for a, b in zip(points[:-1], points[1:], strict=True):
        fa, fb = f(a), f(b)
        if fa == 0:
            roots.append(a)
        elif fa * fb < 0:
            roots.append(brentq(f, a, b, xtol=1e-300, rtol=1e-15, maxiter=500))
    if f(n_max) == 0:
        roots.append(n_max)
    margin = min((abs(f(c)) / target for c in crit), default=math.inf)
    return roots, margin


# -- no mechanical shift: closed form -------------------------------------------

@pytest.mark.parametrize("detuning_hz", [-3e6, -0.5e6, 0.0, 0.25e6, 7e6])
@pytest.mark.parametrize("kex_fraction", [0.1, 0.5, 1.0])
def test_photon_number_closed_form_without_coupling(detuning_hz, kex_fraction):
    s = make_scenario(drive={"power_w": 3e-3, "detuning_hz": detuning_hz,
                             "wavelength_m": 1550e-9},
                      cavity={"linewidth_hz": 2e6, "external_linewidth_hz": 2e6 * kex_fraction},
                      mechanics={"coupling_hz": 0.0})
    k, kex, d = TWO_PI * 2e6, TWO_PI * 2e6 * kex_fraction, TWO_PI * detuning_hz
    flux = 3e-3 * 1550e-9 / (sc.h * sc.c)  # Φ = Pλ/(hc)
    p = operating_point(s)
    assert p.photon_number == pytest.approx(kex * flux / (k**2 / 4 + d**2), rel=1e-12)
    assert p.input_photon_flux == pytest.approx(flux, rel=1e-12)
    assert p.branches == (p.photon_number,) and not p.bistable
    assert p.detuning_effective_hz == p.detuning_bare_hz == detuning_hz
    assert p.static_shift_hz == 0.0


def test_zero_power():
    s = make_scenario(drive={"power_w": 0.0})
    p = operating_point(s)
    assert p.photon_number == 0.0 and p.branches == (0.0,) and not p.bistable
    assert p.detuning_effective_hz == p.detuning_bare_hz
    assert p.modes[0].coupling_rate_hz == 0.0 and p.modes[0].cooperativity == 0.0


# -- self-consistency and bistability -------------------------------------------

@settings(max_examples=150, deadline=None)
@given(d=st.floats(-12.0, 3.0), log_p=st.floats(-3.0, 4.5),
       log_kappa=st.floats(4.0, 7.5), kex_fraction=st.floats(0.01, 1.0),
       om_ratio=st.floats(0.05, 50.0), log_gamma=st.floats(-8.0, -1.0))
def test_branches_agree_with_independent_root_count(d, log_p, log_kappa, kex_fraction,
                                                    om_ratio, log_gamma):
    try:
        s = scenario_for_cubic(d=d, p=10**log_p, kappa_hz=10**log_kappa,
                               kex_fraction=kex_fraction, om_ratio=om_ratio,
                               gamma_ratio=10**log_gamma)
    except ScenarioError as exc:  # a drive above the 1 kW limit of drive.power_w
        assume(exc.key != "drive.power_w")
        raise
    k, kex = TWO_PI * s.cavity.linewidth_hz, TWO_PI * s.cavity.external_linewidth_hz
    delta0, shift, flux = TWO_PI * s.drive.detuning_hz, shift_per_photon(s), flux_of(s)
    expected, margin = cubic_roots(k, kex, flux, delta0, shift)
    assume(margin > 1e-6)  # not at a tangent, where counting roots is ill-posed
    p = operating_point(s)
    assert len(p.branches) == len(expected)
    assert p.bistable == (len(expected) == 3)
    np.testing.assert_allclose(p.branches, expected, rtol=1e-8)
    for n in p.branches:  # n̄ (κ²/4 + Δ(n̄)²) = κ_ex Φ on every branch
        assert n * (k**2 / 4 + (delta0 + shift * n) ** 2) == pytest.approx(kex * flux,
                                                                           rel=1e-9)
    if d > -math.sqrt(3):
        # Kerr-type threshold: three solutions need Δ0 < −√3 κ/2 (common
        # practice; from the discriminant of the cubic's derivative).
        assert not p.bistable


@pytest.mark.parametrize("d", [-3.0, -6.0, -10.0])
def test_branch_selection_inside_bistable_window(d):
    lo, hi = bistable_window(d)
    p_mid = math.sqrt(lo * hi)  # lo > 0: g(x) = x((x + d)² + 1) > 0 for x > 0
    points = {b: operating_point(scenario_for_cubic(d=d, p=p_mid).replace(
        "drive.bistable_branch", b)) for b in ("lowest", "middle", "highest")}
    branches = points["lowest"].branches
    assert len(branches) == 3 and branches[0] < branches[1] < branches[2]
    for i, b in enumerate(("lowest", "middle", "highest")):
        pt = points[b]
        assert pt.bistable and pt.branch == b and pt.photon_number == branches[i]
        s = scenario_for_cubic(d=d, p=p_mid)
        expected_shift = shift_per_photon(s) * branches[i] / TWO_PI
        assert pt.static_shift_hz == pytest.approx(expected_shift, rel=1e-9)
    report = inspect_scenario(scenario_for_cubic(d=d, p=p_mid))
    assert any("bistable" in w for w in report.warnings)
    # Just outside the window on either side there is one solution.
    for p_out in (0.5 * lo, 2 * hi):
        assert not operating_point(scenario_for_cubic(d=d, p=p_out)).bistable


@pytest.mark.parametrize("d, p", [(-1.0, 0.3), (-6.0, 40.0), (-6.0, 1e3), (2.0, 50.0)])
def test_effective_detuning_reference(d, p):
    # Given the effective detuning, n̄ follows from the linear closed form, and
    # the bare detuning Δ0 = Δ − s n̄ must reproduce that n̄ as one of its branches.
    s_eff = scenario_for_cubic(d=d, p=p, detuning_reference="effective")
    pt = operating_point(s_eff)
    k, kex = TWO_PI * s_eff.cavity.linewidth_hz, TWO_PI * s_eff.cavity.external_linewidth_hz
    delta = TWO_PI * s_eff.drive.detuning_hz
    n = kex * flux_of(s_eff) / (k**2 / 4 + delta**2)
    assert pt.photon_number == pytest.approx(n, rel=1e-12)
    assert pt.detuning_effective_hz == s_eff.drive.detuning_hz
    bare_hz = (delta - shift_per_photon(s_eff) * n) / TWO_PI
    assert pt.detuning_bare_hz == pytest.approx(bare_hz, rel=1e-12)
    s_bare = s_eff.replace("drive.detuning_reference", "bare").replace(
        "drive.detuning_hz", pt.detuning_bare_hz)
    branches = operating_point(s_bare).branches
    assert min(abs(b / n - 1) for b in branches) < 1e-8


# -- multi-mode static shift ------------------------------------------------------

def test_static_shift_sums_over_modes():
    modes = [mode("a", frequency_hz=3e6, linewidth_hz=2e3, coupling_hz=300.0),
             mode("b", frequency_hz=11e6, linewidth_hz=50.0, coupling_hz=120.0)]
    s = scenario_with_coupling(g_hz=2e4, detuning_hz=-4e6, modes=modes)
    pt = operating_point(s)
    per_mode = []
    for m in modes:
        g0, om, gm = (TWO_PI * m[k] for k in ("coupling_hz", "frequency_hz", "linewidth_hz"))
        per_mode.append(2 * g0**2 * om / (om**2 + gm**2 / 4) * pt.photon_number / TWO_PI)
    assert pt.static_shift_hz == pytest.approx(sum(per_mode), rel=1e-12)
    singles = [operating_point(scenario_with_coupling(
        g_hz=2e4 * m["coupling_hz"] / 300.0, detuning_hz=-4e6, modes=[m])).static_shift_hz
        for m in modes]
    assert pt.static_shift_hz == pytest.approx(sum(singles), rel=1e-12)
    assert [m.name for m in pt.modes] == ["a", "b"]
    for m, mp in zip(modes, pt.modes, strict=True):
        assert mp.coupling_rate_hz == pytest.approx(
            m["coupling_hz"] * math.sqrt(pt.photon_number), rel=1e-12)


# -- per-mode quantities ----------------------------------------------------------

def test_mode_point_quantities():
    s = scenario_with_coupling(g_hz=5e4, linewidth_hz=2e6, detuning_hz=-8e6, modes=[
        mode(frequency_hz=8e6, linewidth_hz=40.0, coupling_hz=250.0, bath_occupation=None,
             bath_temperature_k=0.8, effective_mass_kg=3e-13)])
    mp = operating_point(s).modes[0]
    n_th = 1 / math.expm1(sc.h * 8e6 / (sc.k * 0.8))
    assert mp.coupling_rate_hz == pytest.approx(5e4, rel=1e-12)
    assert mp.zero_point_amplitude_m == pytest.approx(
        math.sqrt(sc.hbar / (2 * 3e-13 * TWO_PI * 8e6)), rel=1e-12)  # x_zpf = √(ħ/2mΩm)
    assert mp.bath_occupation == pytest.approx(n_th, rel=1e-12)
    cooperativity = 4 * 5e4**2 / (2e6 * 40.0)  # C = 4g²/(κΓm)
    assert mp.cooperativity == pytest.approx(cooperativity, rel=1e-12)
    assert mp.quantum_cooperativity == pytest.approx(cooperativity / n_th, rel=1e-12)
    assert mp.sideband_resolution == pytest.approx(4.0, rel=1e-15)
    zero = operating_point(s.replace("mechanics[0].bath_temperature_k", 0.0)).modes[0]
    assert zero.bath_occupation == 0.0 and zero.quantum_cooperativity == math.inf


# -- Bose–Einstein ----------------------------------------------------------------

@pytest.mark.parametrize("ratio", [1e2, 1e4, 1e6])
def test_bose_einstein_classical_limit(ratio):
    # kT ≫ hf: n = kT/hf − 1/2 + hf/(12 kT) + ... (common practice: the
    # Laurent series of 1/(eˣ − 1) = 1/x − 1/2 + x/12 − ...).
    f = 5e6
    t = ratio * sc.h * f / sc.k
    n = bose_einstein(f, t)
    assert abs(n - (ratio - 0.5)) < 1.1 / (12 * ratio)
    assert abs(n - (ratio - 0.5 + 1 / (12 * ratio))) < 1e-9 * ratio


@pytest.mark.parametrize("x", [10.0, 30.0, 200.0])
def test_bose_einstein_quantum_limit(x):
    # kT ≪ hf: n = e^(−x)/(1 − e^(−x)) → e^(−hf/kT) (common practice).
    f = 6e9
    t = sc.h * f / (sc.k * x)
    n = bose_einstein(f, t)
    assert n == pytest.approx(math.exp(-x), rel=2 * math.exp(-x) + 1e-13)


def test_bose_einstein_zero_temperature_and_arrays():
    assert bose_einstein(1e6, 0.0) == 0.0
    n = bose_einstein(np.array([1e6, 1e9]), np.array([0.0, 1.0]))
    assert n[0] == 0.0 and n[1] == pytest.approx(1 / math.expm1(sc.h * 1e9 / sc.k), rel=1e-12)


def test_bath_occupation_by_temperature_or_value():
    by_value = make_scenario(mechanics={"bath_occupation": 42.5}).mechanics[0]
    assert bath_occupation(by_value) == 42.5
    by_t = make_scenario(mechanics={"bath_occupation": None,
                                    "bath_temperature_k": 0.01}).mechanics[0]
    assert bath_occupation(by_t) == pytest.approx(
        1 / math.expm1(sc.h * 20e6 / (sc.k * 0.01)), rel=1e-12)
