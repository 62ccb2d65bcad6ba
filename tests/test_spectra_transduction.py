"""Referral to displacement and force, imprecision × back-action, SQL, photocurrent."""

import numpy as np
import pytest
from conftest import mode, scenario_with_coupling
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from scipy import constants
from scipy.optimize import minimize_scalar

from simulator.errors import InputError, OperatingPointError
from simulator.linear import referral as tr
from simulator.linear import spectra
from simulator.model.system import System
from simulator.model.units import HBAR, angular
from simulator.workflows.demo import demo_scenario

MASS, FM, GM = 1e-12, 2e6, 10.0


def _probe(*, g_hz=1e4, detuning_hz=0.0, external=1e6, efficiency=1.0, n_bath=0.0):
    """κ/2π = 1 MHz cavity read out at Δ = 0 by default: no dynamical back-action."""
    sc = scenario_with_coupling(
        g_hz=g_hz, linewidth_hz=1e6, external_linewidth_hz=external, detuning_hz=detuning_hz,
        modes=[mode(frequency_hz=FM, linewidth_hz=GM, effective_mass_kg=MASS,
                    bath_occupation=n_bath)])
    return sc.replace("detection.efficiency", efficiency)


def test_bare_susceptibility_and_resonant_drive():
    """χ = 1/(m(Ωm² + Γm²/4 − ω² − iΓm ω)) for the symmetric damping of the model.

    Damped harmonic oscillator (common practice); the Γm²/4 is the
    rotating-wave damping's frequency pull. At Δ = 0 the intracavity
    amplitude quadrature does not see the motion, so χ_eff = χ (no optical
    spring or damping; Aspelmeyer et al., RMP 86, 1391 (2014), Sec. VII.A).
    """
    sc = _probe()
    system = System(sc).require_stable()
    point, model = system.point, system.model
    f = np.array([0.0, 1e3, 1.99e6, 2e6, 2.01e6, 5e6])
    w, om, gm = angular(f), angular(FM), angular(GM)
    closed = 1.0 / (MASS * (om**2 + gm**2 / 4 - w**2 - 1j * gm * w))
    np.testing.assert_allclose(tr.susceptibility(model, point, 0, f, bare=True), closed,
                               rtol=1e-9)
    np.testing.assert_allclose(tr.susceptibility(model, point, 0, f), closed, rtol=1e-9)
    # on the red sideband the light damps the mode: |χ_eff(Ωm)| drops by Γm/Γeff
    red = _probe(detuning_hz=-FM)
    system = System(red).require_stable()
    p2, m2 = system.point, system.model
    assert abs(tr.susceptibility(m2, p2, 0, [FM])[0]) < 0.05 * abs(closed[3])


@pytest.mark.parametrize("scheme", ["heterodyne", "homodyne"])
def test_displacement_referral_recovers_the_true_motion(scheme):
    """Σ motion terms / transduction = the mode's own displacement spectrum.

    out = H⁰ξ + G x exactly (the output reads only cavity states), so the
    motion part of the budget divided by η|u·G|² must equal 2 x_zpf² S̄_qq
    from the state spectrum (two-sided; ×2 one-sided), an independent route.
    """
    sc = demo_scenario()
    system = System(sc).require_stable()
    point, model = system.point, system.model
    spec = (spectra.heterodyne_spectrum(sc) if scheme == "heterodyne"
            else spectra.homodyne_spectrum(sc, quadrature_angle=1.1))
    x = tr.to_displacement(spec, sc, "trampoline")
    motion = sum(v for k, v in x.contributions.items() if "motion" in k)
    x_zpf = point.modes[0].zero_point_amplitude_m
    s_qq = spectra.state_spectrum(model, spec.frequency_hz, ["trampoline.q"])[:, 0, 0].real
    sides = 2.0 if scheme == "homodyne" else 1.0
    np.testing.assert_allclose(motion, sides * 2 * x_zpf**2 * s_qq, rtol=1e-6,
                               atol=1e-9 * np.max(motion))
    assert x.units == "m^2/Hz" and x.budget_residual() < 1e-9
    assert x.calibration["transduction_at_mode_frequency_snu_per_m2_per_hz"] > 0


def test_heterodyne_referral_shows_the_unsymmetrised_quantum_spectrum():
    """Cross terms referred to displacement equal −ħ Im χ_eff(ν), exactly.

    So the referred heterodyne spectrum is imprecision + S̄_xx ∓ ħ Im χ: the
    quantum noise spectrum S_xx(∓ν) (Clerk et al., RMP 82, 1155 (2010),
    Sec. II.B). Checked on a lossy, detuned cavity.
    """
    sc = _probe(detuning_hz=-1.3e6, external=0.4e6, g_hz=5e4, n_bath=3.0)
    system = System(sc).require_stable()
    point, model = system.point, system.model
    f = np.array([-2.3e6, -2e6, -1.99e6, 1.99e6, 2e6, 2.4e6])
    x = tr.to_displacement(spectra.heterodyne_spectrum(sc, f), sc)
    cross = sum(v for k, v in x.contributions.items() if "×" in k)
    chi = tr.susceptibility(model, point, 0, f)
    np.testing.assert_allclose(cross, -HBAR * chi.imag, rtol=1e-7)


def test_zero_point_reference_integrates_to_the_zero_point_variance():
    """∫ ħ|Im χ| df over both signs = x_zpf² = ħ/(2mΩm) (ground state; Q = 2e5)."""
    sc = _probe()
    system = System(sc).require_stable()
    point, _ = system.point, system.model
    wide = np.logspace(-2, 8, 6000)
    near = GM * np.linspace(-200, 200, 4001)
    f = np.sort(np.concatenate([-wide, wide, FM + near, -FM + near]))
    x = tr.to_displacement(spectra.heterodyne_spectrum(sc, f), sc)
    area = np.trapezoid(x.reference["zero-point motion"], f)
    assert area == pytest.approx(point.modes[0].zero_point_amplitude_m ** 2, rel=1e-3)
    at = x.reference["standard quantum limit"][np.argmin(np.abs(f - FM))]
    # SQL on resonance ħ/(m Ωm Γm) (Clerk et al., RMP 82, 1155 (2010), Sec. VI)
    assert at == pytest.approx(HBAR / (MASS * angular(FM) * angular(GM)), rel=1e-4)


def test_imprecision_backaction_product_is_hbar_squared_over_four():
    """S_imp·S_FF = ħ²/4 for ideal phase homodyne, 2× per heterodyne arm, 1/η_tot lossy.

    Braginsky & Khalili, Quantum Measurement (1992); Clerk et al., RMP 82,
    1155 (2010), Sec. VI. Lossless resonant cavity, η = 1: equality at
    every frequency and no correlation.
    """
    f = np.array([1e3, 1e6, FM, 5e6])
    bound = tr.HBAR_SQUARED_OVER_4
    ideal = tr.imprecision_backaction(_probe(), f)
    np.testing.assert_allclose(ideal.product / bound, 1.0, rtol=1e-9)
    assert np.all(np.abs(ideal.correlation) ** 2 < 1e-12 * ideal.product)
    het = tr.imprecision_backaction(_probe(), f, scheme="heterodyne")
    np.testing.assert_allclose(het.product / bound, 2.0, rtol=1e-9)
    lossy = tr.imprecision_backaction(_probe(external=0.5e6, efficiency=0.8), f)
    np.testing.assert_allclose(lossy.product / bound, 1 / (0.8 * 0.5), rtol=1e-9)
    # back-action force S_FF = ħ²G²n̄κ/(κ²/4 + ω²), G = g0/x_zpf (Aspelmeyer et al.,
    # RMP 86, 1391 (2014), Sec. VI.A; from memory, checked here)
    system = System(_probe()).require_stable()
    point, _ = system.point, system.model
    g, kappa, w = angular(1e4), angular(1e6), angular(f)
    x_zpf = point.modes[0].zero_point_amplitude_m
    np.testing.assert_allclose(ideal.backaction,
                               HBAR**2 * g**2 * kappa / (x_zpf**2 * (kappa**2 / 4 + w**2)),
                               rtol=1e-9)


@settings(max_examples=15, deadline=None)
@given(st.floats(-3.0, 3.0), st.floats(0.0, np.pi), st.floats(0.1, 1.0), st.floats(0.2, 1.0))
def test_imprecision_backaction_bound_holds_with_correlations(detuning, theta, loss, eta):
    """S_imp·S_FF − |S_xF|² ≥ ħ²/(4 η κ_ex/κ) for any detuning and quadrature.

    Braginsky & Khalili (1992); Clerk et al., RMP 82, 1155 (2010), Sec. VI
    (the bound with the cross-correlation; the 1/η_tot scaling for loss is
    checked by the equality case above).
    """
    sc = _probe(detuning_hz=detuning * 1e6, external=loss * 1e6, efficiency=eta, g_hz=2e4)
    try:
        mn = tr.imprecision_backaction(sc, np.linspace(1e4, 4e6, 9), quadrature_angle=theta)
    except OperatingPointError:
        assume(False)
    signal = np.isfinite(mn.imprecision)  # the amplitude quadrature at Δ = 0 sees no motion
    lhs = mn.product[signal] - np.abs(mn.correlation[signal]) ** 2
    assert np.all(lhs >= tr.HBAR_SQUARED_OVER_4 / (eta * loss) * (1 - 1e-7))


def _added_noise_at_resonance(log_power, route):
    sc = _probe().replace("drive.power_w", 10.0**log_power)
    f = np.array([FM])
    if route == "budget":
        x = tr.to_displacement(spectra.homodyne_spectrum(sc, f), sc)
        bath = sum(v for k, v in x.contributions.items() if "thermal" in k)
        return float((x.total - bath)[0]) / 2.0  # one-sided -> two-sided
    system = System(sc).require_stable()
    point, model = system.point, system.model
    chi = tr.susceptibility(model, point, 0, f)
    return float(tr.imprecision_backaction(sc, f).added_noise(chi)[0])


def test_added_noise_touches_the_sql_at_the_optimum_power():
    """min over power of S_add(Ωm) = ħ|χ(Ωm)| (Clerk et al., RMP 82, 1155 (2010), Sec. VI.B).

    S_add from the budget (everything but the mechanical bath, referred to x)
    and from S_imp + |χ|²S_FF agree at every power; the minimum equals the SQL.
    """
    sc = _probe()
    system = System(sc).require_stable()
    point, model = system.point, system.model
    sql = HBAR * abs(tr.susceptibility(model, point, 0, [FM])[0])
    for lp in (-9.0, -7.0):
        assert _added_noise_at_resonance(lp, "budget") == pytest.approx(
            _added_noise_at_resonance(lp, "formula"), rel=1e-9)
    best = minimize_scalar(lambda lp: _added_noise_at_resonance(lp, "budget") / sql,
                           bounds=(-12.0, -6.0), method="bounded", options={"xatol": 1e-5})
    assert best.fun == pytest.approx(1.0, abs=1e-6)
    assert _added_noise_at_resonance(best.x + 1.0, "budget") > 1.5 * sql


def test_force_referral_divides_by_the_susceptibility():
    sc = demo_scenario()
    system = System(sc).require_stable()
    point, model = system.point, system.model
    spec = spectra.heterodyne_spectrum(sc)
    x = tr.to_displacement(spec, sc)
    force = tr.to_force(spec, sc, 0)
    chi2 = np.abs(tr.susceptibility(model, point, 0, spec.frequency_hz)) ** 2
    np.testing.assert_allclose(force.total, x.total / chi2, rtol=1e-12)
    np.testing.assert_allclose(force.reference["standard quantum limit"],
                               HBAR / np.sqrt(chi2), rtol=1e-12)
    assert force.units == "N^2/Hz" and force.budget_residual() < 1e-9
    with pytest.raises(InputError, match="mode"):
        tr.to_force(spec, sc, "no-such-mode")


def test_photocurrent_and_voltage_conversion():
    """Shot-noise level 2eI_dc with I_dc = e η_d P_LO λ/(hc) (Schottky 1918)."""
    sc = demo_scenario()
    hom = spectra.homodyne_spectrum(sc, np.linspace(0, 3e6, 101))
    cur = tr.to_photocurrent(hom, sc, lo_power_w=1e-3, quantum_efficiency=0.9)
    i_dc = constants.e * 0.9 * 1e-3 * 1550e-9 / (constants.h * constants.c)
    assert cur.calibration["lo_photocurrent_a"] == pytest.approx(i_dc, rel=1e-12)
    np.testing.assert_allclose(cur.total, 2 * constants.e * i_dc * hom.total, rtol=1e-12)
    assert cur.units == "A^2/Hz" and cur.sided == "one-sided"
    volt = tr.to_voltage(cur, transimpedance_ohm=1e4)
    np.testing.assert_allclose(volt.total, 1e8 * cur.total, rtol=1e-12)
    assert volt.calibration["shot_noise_v2_per_hz"] == pytest.approx(
        1e8 * 2 * constants.e * i_dc)
    het = spectra.heterodyne_spectrum(sc, np.linspace(-2e6, 2e6, 401))
    below = tr.to_photocurrent(het, sc, lo_power_w=1e-3, quantum_efficiency=0.9,
                               intermediate_frequency_hz=5e6)
    above = tr.to_photocurrent(het, sc, lo_power_w=1e-3, quantum_efficiency=0.9,
                               intermediate_frequency_hz=5e6, lo_side="above")
    # the anti-Stokes peak (ν = +1.5 MHz) lands at f_IF + ν below, f_IF − ν above
    assert below.frequency_hz[np.argmax(below.total)] == pytest.approx(6.5e6, abs=2e4)
    assert above.frequency_hz[np.argmax(above.total)] == pytest.approx(3.5e6, abs=2e4)
    assert np.all(np.diff(above.frequency_hz) > 0)
    for bad in ({}, {"intermediate_frequency_hz": 1e6}):
        with pytest.raises(InputError, match="intermediate_frequency_hz"):
            tr.to_photocurrent(het, sc, lo_power_w=1e-3, quantum_efficiency=0.9, **bad)
    with pytest.raises(InputError, match="lo_power_w"):
        tr.to_photocurrent(hom, sc, lo_power_w=-1.0, quantum_efficiency=0.9)
    with pytest.raises(InputError, match="A\\^2/Hz"):
        tr.to_voltage(hom, transimpedance_ohm=1e3)


def test_photocurrent_refuses_a_microwave_receiver():
    """A microwave receiver (amplifier and IQ mixer) has no photodetector: its record's
    volts are the digitiser spectrum's (record_budget.in_volts), not a photocurrent."""
    from simulator.scenario.loader import load_scenario

    sc = load_scenario("scenarios/drum_microwave_mK.toml")
    het = spectra.heterodyne_spectrum(sc, np.linspace(-1e6, 1e6, 11))
    with pytest.raises(InputError, match='receiver = "microwave".*in_volts'):
        tr.to_photocurrent(het, sc, lo_power_w=1e-3, quantum_efficiency=0.9,
                           intermediate_frequency_hz=5e6)
