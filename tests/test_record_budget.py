"""The spectrum at the digitiser (simulator.linear.record_budget), the default of
``noisechain spectrum``.

- its total is the exact density of the record (the sampled pole–residue
  form; the same chain the records are drawn from), which the truncated alias
  sum DetectionChain.sampled_spectrum approaches within its own truncation
  (tests/test_digitiser_poles.py shows it converging as N⁻³);
- its budget lines sum to the total, and the device lines equal the
  cavity-port budget of an ideal receiver (an independent path: the device
  model alone, not the chain);
- the amplifier line is the added noise in the receiver's own units
  (Caves, Phys. Rev. D 26, 1817 (1982): n_add − ½ beyond heterodyne's own half
  quantum for iq; 2 n_add on a real record);
- a synthetic record's averaged periodogram agrees with it within the
  statistics of its number of averages, for every receiver kind.
"""

import numpy as np
import pytest
from test_records import make as record_scenario

from simulator.analysis.psd import averaged_periodogram
from simulator.linear.budget import FLOOR
from simulator.linear.record_budget import (
    ALIASES,
    ALIASING,
    SINC,
    continuous_lines,
    digitiser_spectrum,
    in_volts,
)
from simulator.linear.spectra import heterodyne_spectrum
from simulator.model.chain import record_sample_rate
from simulator.model.system import System
from simulator.scenario.loader import scenario_from_dict
from simulator.workflows.demo import demo_scenario
from simulator.workflows.record import simulate_record

FS = 2e6
# Relative truncation of the ±100-alias sum (DetectionChain.sampled_spectrum) against
# the exact sampled pole form, measured on these chains at ≤ 6.4e-8 (the if chain's
# 1.5 MHz low-pass at 2 MHz sampling; 1.0e-9 at ±400, 1.6e-11 at ±1600: N⁻³), with margin
ALIAS_SUM_RTOL = 1e-7
RECEIVERS = {
    "iq": dict(electronics={"bandwidth_hz": 0.7e6, "current_noise_a_per_sqrt_hz": 3e-12,
                            "amplifier_added_quanta": 3.0},
               detection={"efficiency": 0.6, "balanced": False}),
    "if": dict(detection={"intermediate_frequency_hz": 0.4512e6}, record={"kind": "if"},
               electronics={"bandwidth_hz": 1.5e6, "amplifier_added_quanta": 2.0}),
    "homodyne": dict(detection={"scheme": "homodyne", "quadrature_angle_rad": 1.2},
                     electronics={"current_noise_a_per_sqrt_hz": 3e-12}),
}


def make(samples=1 << 16, **sections):
    """A 300 kHz mode in a 600 kHz cavity, sampled at 2 MHz (tests/test_records.py's)."""
    return record_scenario(samples=samples, **sections)


def grid(kind):
    return np.linspace(0.0 if kind != "iq" else -FS / 2, FS / 2, 257)


@pytest.mark.parametrize("kind", list(RECEIVERS))
def test_total_is_the_exact_record_density_and_the_lines_sum_to_it(kind):
    system = System(make(**RECEIVERS[kind]))
    f = grid(kind)
    spectrum = digitiser_spectrum(system, f)
    exact = spectrum.total
    # the alias sum over ±100 misses its tail beyond k = 100 (≤ 6.4e-8 of the total
    # here, falling as N⁻³; the pole form sums every alias): ALIAS_SUM_RTOL
    np.testing.assert_allclose(exact, system.chain.sampled_spectrum(f, FS, aliases=ALIASES),
                               rtol=ALIAS_SUM_RTOL, atol=0)
    assert spectrum.budget_residual() < 1e-12
    assert spectrum.sided == ("two-sided" if kind == "iq" else "one-sided")
    assert {SINC, ALIASING, FLOOR} <= set(spectrum.contributions)
    assert any("amplifier" in k or "electronics" in k for k in spectrum.contributions)
    volts = in_volts(spectrum)
    factor = system.chain.volts_per_unit ** 2 * (1 if kind == "iq" else 2)
    np.testing.assert_allclose(volts.total, factor * exact, rtol=1e-12)
    assert volts.units.startswith("V^2/Hz")


def test_default_grid_and_sample_rate_are_the_records():
    system = System(demo_scenario())
    spectrum = digitiser_spectrum(system)
    fs = record_sample_rate(system.scenario, system.chain)
    f = spectrum.frequency_hz
    assert spectrum.calibration["sample_rate_hz"] == fs and np.all(np.abs(f) <= fs / 2)
    # the truncated alias sums approach the exact total: ±400 within the ±100 tolerance
    # (its tail falls as N⁻³, see ALIAS_SUM_RTOL)
    for n in (ALIASES, 4 * ALIASES):
        np.testing.assert_allclose(spectrum.total[::50],
                                   system.chain.sampled_spectrum(f[::50], fs, aliases=n),
                                   rtol=ALIAS_SUM_RTOL, atol=0)


def test_device_lines_are_the_cavity_budget_of_an_ideal_receiver():
    """Σ over the chain's device inputs ÷ η equals the cavity-port budget at η = 1."""
    system = System(make(**RECEIVERS["iq"]))
    f = grid("iq")
    lines = continuous_lines(system, f)
    cavity = heterodyne_spectrum(system, f, efficiency=1.0).contributions
    for name, value in cavity.items():
        np.testing.assert_allclose(lines[name], value, rtol=1e-9, atol=1e-12 * np.abs(
            value).max())
    eta = 0.6
    excess = sum(v for k, v in cavity.items() if k != FLOOR)
    loss = [v for k, v in lines.items() if k.startswith("detection efficiency")][0]
    single = [v for k, v in lines.items() if k.startswith("single-ended")][0]
    np.testing.assert_allclose(loss + single, (eta * 0.5 - 1.0) * excess, rtol=1e-12,
                               atol=1e-15)


def test_calibration_tone_reaches_the_record_through_the_chain():
    """A tone line of the cavity-port spectrum at η is at the record η_d·b/η_d × sinc² × |L|²
    (a line of no width: the density's gain at its frequency)."""
    data = make().to_dict()
    data["drive"]["calibration_tone"] = {"depth_rad": 0.01, "frequency_hz": 0.25e6}
    data["electronics"] = {"bandwidth_hz": 0.5e6}
    data["detection"]["balanced"] = False
    system = System(scenario_from_dict(data, source="<test>"))
    record = digitiser_spectrum(system, grid("iq")).lines
    cavity = heterodyne_spectrum(system, grid("iq")).lines
    assert len(record) == len(cavity) == 2
    for at_record, at_cavity in zip(record, cavity, strict=True):
        f = at_cavity.frequency_hz
        gain = 0.5 * np.sinc(f / FS) ** 2 / (1 + (f / 0.5e6) ** 2)
        assert at_record.frequency_hz == f
        assert at_record.power == pytest.approx(gain * at_cavity.power, rel=1e-12)


@pytest.mark.parametrize("kind, per_quantum, vacuum", [("iq", 1.0, 0.5), ("if", 2.0, 0.0),
                                                       ("homodyne", 2.0, 0.0)])
def test_amplifier_line_scales_with_the_added_quanta(kind, per_quantum, vacuum):
    sections = {k: dict(v) for k, v in RECEIVERS[kind].items()}
    f = grid(kind)
    totals = {}
    for n_add in (0.0, 20.0):
        sections["electronics"] = {"amplifier_added_quanta": n_add}
        system = System(make(**sections))
        lines = continuous_lines(system, f)
        amp = [v for k, v in lines.items() if k.startswith("amplifier")]
        if n_add == 0:
            assert not amp
        else:
            np.testing.assert_allclose(amp[0], per_quantum * (n_add - vacuum), rtol=1e-12)
        totals[n_add] = digitiser_spectrum(system, f).total
    # the record sees the amplifier: its floor rises by the added noise (× sinc², aliased)
    rise = totals[20.0] - totals[0.0]
    expected = per_quantum * 20.0 - (0.5 if kind == "iq" else 0.0)
    np.testing.assert_allclose(rise, expected, rtol=1e-9)


@pytest.mark.parametrize("kind", list(RECEIVERS))
def test_welch_estimate_of_a_record_agrees_with_the_default_spectrum(kind):
    """Averaged periodogram (Hann, K segments) over the default spectrum: each bin is
    the spectrum times a Gamma(K)/K variate (Nørrelykke & Flyvbjerg, Rev. Sci.
    Instrum. 81, 075103 (2010)), so over M independent bins the mean ratio has
    standard deviation 1/√(KM) and Σ K(r − 1)² has mean M and variance M(2 + 6/K)
    (to first order in the window's smoothing, whose bias here is below 1e-3:
    bins of 977 Hz against a 14 kHz line)."""
    segment, samples = 2048, 1 << 16
    scenario = make(samples=samples, **RECEIVERS[kind])
    record = simulate_record(scenario, seed=5, progress=False)
    psd = averaged_periodogram(record.shot_noise_units(), FS, segment_samples=segment)
    keep = (np.abs(psd.frequency_hz) > 0) & (np.abs(psd.frequency_hz) < 0.49 * FS)
    f = psd.frequency_hz[keep][::3]  # every third bin: independent under a Hann window
    model = digitiser_spectrum(System(scenario), f).total
    if psd.sided == "one-sided":
        model = 2.0 * model  # record units: the one-sided vacuum level is 2
    ratio = psd.density[keep][::3] / model
    k, m = psd.averages, ratio.size
    assert abs(ratio.mean() - 1.0) < 5.0 / np.sqrt(k * m)
    z = (k * np.sum((ratio - 1.0) ** 2) - m) / np.sqrt(m * (2.0 + 6.0 / k))
    assert abs(z) < 5.0


def test_cli_default_is_the_record_and_at_cavity_is_labelled(tmp_path, capsys):
    import json

    from simulator.cli.parser import main

    path = tmp_path / "amp.toml"
    path.write_text(demo_scenario().replace("electronics.amplifier_added_quanta", 20.0)
                    .to_toml(), encoding="utf-8")
    assert main(["spectrum", str(path), "--json"]) == 0
    record = json.loads(capsys.readouterr().out)
    assert main(["spectrum", str(path), "--json", "--at", "cavity"]) == 0
    cavity = json.loads(capsys.readouterr().out)
    assert record["at"] == "record" and "digitiser" in record["quantity"]
    assert cavity["at"] == "cavity" and "cavity port" in cavity["quantity"]
    lines = record["budget_at"]["lines"]
    assert lines[[k for k in lines if k.startswith("amplifier")][0]] == pytest.approx(19.5)
    assert record["budget_at"]["total"] > 20 > cavity["budget_at"]["total"]
    assert record["budget_residual"] < 1e-12
    assert main(["spectrum", str(path), "--engine", "master"]) == 2
    assert "--at cavity" in capsys.readouterr().err


def test_amplifier_line_from_a_noise_temperature():
    """Given as a noise temperature T_N, the amplifier's line is that of n_add =
    k_B T_N/(h f) quanta (Caves, Phys. Rev. D 26, 1817 (1982)), and the budget
    still sums to the record's total."""
    from scipy import constants

    sections = {k: dict(v) for k, v in RECEIVERS["iq"].items()}
    sections["electronics"] = {"amplifier_added_quanta": 0.0,
                               "amplifier_noise_temperature_k": 5e4}
    system = System(make(**sections))
    n_add = (constants.k * 5e4 / (constants.h * system.scenario.drive.carrier_frequency_hz))
    assert system.chain.added_quanta == pytest.approx(n_add, rel=1e-12)
    f = grid("iq")
    lines = continuous_lines(system, f)
    amp = [v for k, v in lines.items() if k.startswith("amplifier")]
    assert len(amp) == 1
    np.testing.assert_allclose(amp[0], n_add - 0.5, rtol=1e-12)
    spectrum = digitiser_spectrum(system, f)
    np.testing.assert_allclose(sum(spectrum.contributions.values()), spectrum.total,
                               rtol=1e-9)
