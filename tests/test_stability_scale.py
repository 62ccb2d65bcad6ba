"""The stability verdict is right at tiny damping ratios, on each block's own scale.

A levitated particle in ultra-high vacuum has a mechanical damping of order
0.1 µHz while its cavity is megahertz wide: damping ratios Γm/Ωm of 1e-12 and
below. Each verdict here is checked against two independent references:

* the Routh–Hurwitz criterion evaluated exactly in rational arithmetic on the
  characteristic polynomial of the same drift matrix (``exact_stability``);
* in weak coupling, the amplitude decay rate −(Γm + Γopt)/2 with the optical
  damping Γopt = A− − A+ of the sideband scattering rates (Marquardt, Chen,
  Clerk, Girvin, Phys. Rev. Lett. 99, 093902 (2007); Aspelmeyer,
  Kippenberg, Marquardt, Rev. Mod. Phys. 86, 1391 (2014), Sec. VII).
"""

import math

import numpy as np
import pytest
from conftest import make_scenario, mode, scenario_with_coupling
from exact_stability import characteristic_polynomial, routh_hurwitz_stable

from simulator.cli.parser import main
from simulator.linear.weak_coupling import scattering_rates
from simulator.model.operating_point import operating_point
from simulator.model.optomechanics import linear_model
from simulator.model.stability import STABILITY_ROUNDING_MARGIN, stability

TWO_PI = 2 * math.pi


def verdict_of(scenario):
    point = operating_point(scenario)
    model = linear_model(scenario, point)
    return stability(model, point), model, point


def rounding_hz(model):
    """The band within which a double-precision eigenvalue's real part is uncertain (Hz)."""
    n = len(model.A)
    return (STABILITY_ROUNDING_MARGIN * n * np.finfo(float).eps * np.linalg.norm(model.A)
            / TWO_PI)


def weak_coupling_growth_hz(point, j=0):
    """−(Γm + Γopt)/2 of mode j, in Hz (amplitude decay rate)."""
    m = point.modes[j]
    a_minus, a_plus = scattering_rates(
        g=TWO_PI * m.coupling_rate_hz, kappa=TWO_PI * point.cavity_linewidth_hz,
        detuning=TWO_PI * point.detuning_effective_hz, frequency=TWO_PI * m.frequency_hz)
    return -(m.linewidth_hz + (a_minus - a_plus) / TWO_PI) / 2


def levitated(power_w, detuning_hz=-1e5):
    """0.1 µHz damping of a 100 kHz mode in a 1 MHz wide cavity (invented values)."""
    return make_scenario(
        drive={"power_w": power_w, "detuning_hz": detuning_hz},
        cavity={"linewidth_hz": 1e6, "external_linewidth_hz": 0.5e6},
        mechanics=[mode("particle", frequency_hz=1e5, linewidth_hz=1e-7, coupling_hz=1.0)])


@pytest.mark.parametrize("power_w", [0.0, 1e-12, 1e-9])
def test_levitated_particle_is_stable_undriven_and_weakly_driven(power_w):
    verdict, model, point = verdict_of(levitated(power_w))
    assert routh_hurwitz_stable(characteristic_polynomial(model.A)) is True
    assert verdict.stable, verdict.cause
    assert verdict.growth_rate_hz == pytest.approx(weak_coupling_growth_hz(point), rel=1e-6,
                                                   abs=rounding_hz(model))


def test_levitated_particle_inspects_as_stable_from_the_command_line(tmp_path, capsys):
    path = tmp_path / "levitated.toml"
    path.write_text(levitated(0.0).to_toml())
    assert main(["inspect", str(path)]) == 0
    assert "stable" in capsys.readouterr().out


@pytest.mark.parametrize("ratio", [1e-9, 1e-12, 1e-15])
@pytest.mark.parametrize("frequency_hz", [1e3, 1e6, 1e9])
@pytest.mark.parametrize("optical_share", [0.0, 1.0])
def test_stable_at_damping_ratios_down_to_1e_15(ratio, frequency_hz, optical_share):
    # optical_share = Γopt/Γm on the red sideband: 0 is an undriven mode
    gm = ratio * frequency_hz
    modes = [mode("m", frequency_hz=frequency_hz, linewidth_hz=gm, coupling_hz=1.0)]
    if optical_share == 0:
        scenario = make_scenario(drive={"power_w": 0.0}, mechanics=modes)
    else:
        kappa = 1e6  # Γopt ≈ 4g²/κ on the red sideband of a resolved mode
        g = math.sqrt(optical_share * gm * kappa / 4)
        scenario = scenario_with_coupling(g_hz=g, linewidth_hz=kappa,
                                          detuning_hz=-frequency_hz, modes=modes)
    verdict, model, point = verdict_of(scenario)
    assert routh_hurwitz_stable(characteristic_polynomial(model.A)) is True
    assert verdict.stable, verdict.cause
    assert verdict.growth_rate_hz == pytest.approx(weak_coupling_growth_hz(point), rel=1e-6,
                                                   abs=rounding_hz(model))


@pytest.mark.parametrize("ratio", [1e-6, 1e-15])
def test_blue_detuned_antidamping_is_unstable_at_any_damping_ratio(ratio):
    # Γopt = −2 Γm on the blue sideband: the mode grows at (|Γopt| − Γm)/2 = Γm/2.
    om, kappa = 1e6, 1e6
    gm = ratio * om
    g = math.sqrt(2 * gm * kappa / 4)
    scenario = scenario_with_coupling(g_hz=g, linewidth_hz=kappa, detuning_hz=om,
                                      modes=[mode("m", frequency_hz=om, linewidth_hz=gm,
                                                  coupling_hz=1.0)])
    verdict, model, point = verdict_of(scenario)
    assert routh_hurwitz_stable(characteristic_polynomial(model.A)) is False
    assert not verdict.stable
    assert "blue" in verdict.cause and "Γm + Γopt < 0" in verdict.cause
    # rel: the weak-coupling formula's own error, of order (g/κ)² ≈ 1e-6 here
    assert verdict.growth_rate_hz == pytest.approx(weak_coupling_growth_hz(point), rel=1e-5,
                                                   abs=rounding_hz(model))
    assert verdict.growth_rate_hz > 0


def test_rounding_margin_is_one_named_positive_constant():
    # the band is a small multiple of the unit roundoff times the block's norm
    assert 1 <= STABILITY_ROUNDING_MARGIN <= 100
