"""Sideband summary and the quantum sideband asymmetry in the noise budget."""

import numpy as np
import pytest
from conftest import mode, scenario_with_coupling

from simulator.linear import spectra
from simulator.linear.sidebands import cavity_filter, sideband_summary
from simulator.model.system import System
from simulator.workflows.demo import demo_scenario


def _weak(n_bath, *, external=1e6, g_hz=1e4):
    """Resolved sideband (Ωm/κ = 5), Δ = −Ωm, g/κ = 0.01: weak coupling."""
    return scenario_with_coupling(
        g_hz=g_hz, linewidth_hz=1e6, external_linewidth_hz=external, detuning_hz=-5e6,
        modes=[mode(frequency_hz=5e6, linewidth_hz=10.0, bath_occupation=n_bath)])


@pytest.mark.parametrize("n_bath", [0.0, 3.0, 300.0])
def test_sideband_areas_are_n_and_n_plus_one_in_weak_coupling(n_bath):
    """Cavity-corrected areas: anti-Stokes n_f, Stokes n_f + 1, n_f from Lyapunov.

    Safavi-Naeini et al., PRL 108, 033602 (2012); Weinstein et al., PRX 4,
    041003 (2014). Weak coupling g/κ = 0.01, where the rate picture holds to
    better than 1 % (docs/physics.md §11).
    """
    s = sideband_summary(_weak(n_bath))[0]
    n = s.steady_state_occupation
    assert s.anti_stokes.area_quanta == pytest.approx(n, rel=1e-3, abs=1e-4)
    assert s.stokes.area_quanta == pytest.approx(n + 1, rel=1e-3)
    assert s.ratio == pytest.approx(n / (n + 1), rel=1e-3, abs=1e-4)
    assert s.occupation_from_ratio == pytest.approx(n, rel=2e-3, abs=1e-4)
    assert s.anti_stokes.frequency_hz > 0 > s.stokes.frequency_hz


def test_summary_of_the_demo_is_what_a_local_fit_returns():
    """Demo (g/κ ≈ 0.08): the pole weights equal a Lorentzian + dispersive +
    linear-background least-squares fit of the cavity-corrected spectrum over
    ±10 linewidths (an independent estimate), and the width is the eigenvalue's.

    Past weak coupling the Lorentzian weights drift from n and n + 1 (here the
    Stokes weight is 1 % high, so n from the ratio is about 3 % low); the
    summary reports it beside the exact occupation rather than hiding it.
    """
    sc = demo_scenario()
    s = sideband_summary(sc)[0]
    system = System(sc).require_stable()
    point, model = system.point, system.model
    n = s.steady_state_occupation
    assert s.anti_stokes.area_quanta == pytest.approx(n, rel=3e-3)
    assert s.stokes.area_quanta == pytest.approx(n + 1, rel=0.015)
    assert s.occupation_from_ratio == pytest.approx(n, rel=0.04)
    for side in (s.anti_stokes, s.stokes):
        c, w = side.frequency_hz, side.linewidth_hz / 2
        f = c + w * np.linspace(-10, 10, 801)
        y = (spectra.photon_flux_density(model, f)
             - spectra.photon_flux_density(model, f, floor=True)) / cavity_filter(point, 0, f)
        x = (f - c) / w
        basis = np.column_stack([1 / (np.pi * w * (1 + x**2)), x / (np.pi * w * (1 + x**2)),
                                 np.ones_like(x), x])
        area, dispersive = np.linalg.lstsq(basis, y, rcond=None)[0][:2]
        assert side.area_quanta == pytest.approx(area, rel=1e-4)
        assert side.dispersive_quanta == pytest.approx(dispersive, rel=1e-3, abs=1e-6)
    lam = np.linalg.eigvals(model.A)
    mech = lam[np.argmin(np.abs(lam.imag - 2 * np.pi * 1.5e6))]
    assert s.anti_stokes.linewidth_hz == pytest.approx(-2 * mech.real / (2 * np.pi), rel=1e-9)
    assert set(s.to_dict()) >= {"ratio", "occupation_from_ratio", "steady_state_occupation"}


def _corrected_areas(sc, centre, width):
    """∫ contribution/(η F) dν over ±0.4 MHz around ``centre``, per budget term."""
    system = System(sc).require_stable()
    point, _ = system.point, system.model
    off = width * np.logspace(-4, np.log10(4e5 / width), 3000)
    f = centre + np.concatenate([-off[::-1], [0.0], off])
    spec = spectra.heterodyne_spectrum(sc, f)
    filt = sc.detection.efficiency * cavity_filter(point, 0, f)
    return {k: np.trapezoid(v / filt, f) for k, v in spec.contributions.items()
            if k != spectra.FLOOR}


@pytest.mark.parametrize("external", [1e6, 0.4e6], ids=["lossless", "lossy"])
def test_imprecision_backaction_cross_term_makes_the_one_quantum_asymmetry(external):
    """Motion terms are symmetric (n + ½ on both sides); the cross terms give ∓½.

    Khalili et al., PRA 86, 033840 (2012); Weinstein et al., PRX 4, 041003
    (2014): the symmetrised motion is the same on both sidebands and the
    interference of imprecision with back-action adds +½ to the Stokes and
    −½ to the anti-Stokes area. For a lossless cavity it is all in the
    external-port vacuum's cross term; with internal loss the loss port's
    vacuum shares it, and the two cross terms add to ∓½.
    """
    sc = _weak(3.0, external=external)
    s = sideband_summary(sc)[0]
    n = s.steady_state_occupation
    width = s.anti_stokes.linewidth_hz
    up = _corrected_areas(sc, s.anti_stokes.frequency_hz, width)
    down = _corrected_areas(sc, s.stokes.frequency_hz, width)
    cross_up = sum(v for k, v in up.items() if "×" in k)
    cross_down = sum(v for k, v in down.items() if "×" in k)
    motion_up = sum(v for k, v in up.items() if "motion" in k)
    motion_down = sum(v for k, v in down.items() if "motion" in k)
    assert cross_up == pytest.approx(-0.5, rel=2e-3)
    assert cross_down == pytest.approx(+0.5, rel=2e-3)
    assert motion_up == pytest.approx(n + 0.5, rel=2e-3)
    assert motion_down == pytest.approx(n + 0.5, rel=2e-3)
    if external == 1e6:
        assert up["external port vacuum: imprecision × back-action"] == pytest.approx(
            -0.5, rel=2e-3)
        assert not any(k.startswith("internal") for k in up)


def test_two_mode_summary_keeps_modes_apart():
    """Two modes 3 MHz apart: each summary sees its own sidebands and occupation."""
    sc = scenario_with_coupling(
        g_hz=1e4, detuning_hz=-20e6,
        modes=[mode("a", frequency_hz=20e6, linewidth_hz=50.0, bath_occupation=50.0),
               mode("b", frequency_hz=23e6, linewidth_hz=20.0, bath_occupation=10.0)])
    out = sideband_summary(sc)
    assert [s.mode for s in out] == ["a", "b"]
    for s in out:
        assert s.occupation_from_area == pytest.approx(s.steady_state_occupation, rel=2e-3)
    assert out[0].anti_stokes.frequency_hz == pytest.approx(20e6, rel=1e-3)
    assert out[1].anti_stokes.frequency_hz == pytest.approx(23e6, rel=1e-3)
    assert out[1].stokes.frequency_hz == pytest.approx(-23e6, rel=1e-3)


def test_summary_of_an_undriven_mode_is_empty_not_an_error():
    """No drive, g = 0: nothing to analyse; NaN areas, the bath occupation beside them."""
    sc = _weak(7.0).replace("drive.power_w", 0.0)
    s = sideband_summary(sc)[0]
    assert np.isnan(s.ratio) and np.isnan(s.anti_stokes.area_quanta)
    assert s.steady_state_occupation == pytest.approx(7.0)


def test_a_hybrid_line_is_flagged_not_read_as_n():
    """The mode's share of its pole's residue projector is 1 for a mechanical
    line, large near the exceptional point of the red-detuned beam splitter
    (g ≈ κ/4, huge cancelling residues) and about ½ past normal-mode
    splitting (g ≫ κ/4); the summary says so instead of passing the weights
    off as n and n + 1. Weak coupling carries no warning."""
    def summary(g_hz):
        return sideband_summary(scenario_with_coupling(
            g_hz=g_hz, linewidth_hz=1e6, detuning_hz=-50e6,
            modes=[mode(frequency_hz=50e6, linewidth_hz=1.0, bath_occupation=3.0)]))[0]
    near = summary(0.2499e6)
    assert "hybrid" in near.warning and "exceptional point" in near.warning
    assert near.stokes.area_quanta > 5 * (near.steady_state_occupation + 1)  # meaningless
    for g_hz in (1e6, 2e6):  # split: each line is half cavity, half mechanics
        split = summary(g_hz)
        assert "hybrid" in split.warning and "0.5" in split.warning
        assert split.stokes.area_quanta == pytest.approx(0.5, abs=0.03)
    assert summary(1e4).warning == ""


def test_modes_hybridised_through_the_cavity_are_flagged():
    """Two modes 5 Hz apart, both coupled to one cavity: the light sees a bright
    and a dark combination, neither line is one mode's, and both summaries
    say so (each mode's share of its pole ≈ ½)."""
    out = sideband_summary(scenario_with_coupling(
        g_hz=1e4, detuning_hz=-20e6,
        modes=[mode("a", frequency_hz=20e6, linewidth_hz=50.0, bath_occupation=5.0),
               mode("b", frequency_hz=20e6 + 5, linewidth_hz=20.0, bath_occupation=10.0)]))
    assert all("hybrid" in s.warning for s in out)
