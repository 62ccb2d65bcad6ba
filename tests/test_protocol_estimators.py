"""Reference estimators of scheduled records, run through the trial harness.

The ring-down linewidth (simulator.analysis.ringdown: demodulated sideband,
exponential fit of the block power; common practice) on the example
nanostring's probe ring-down, where zero detuning gives no optical damping
(Marquardt et al., PRL 99, 093902 (2007): Γopt is the difference of the
anti-Stokes and Stokes scattering rates, which are equal at Δ = 0; recalled
from memory), so the truth is the intrinsic Γm.
"""

import dataclasses
from pathlib import Path

import numpy as np
import pytest

from simulator.analysis.ringdown import (
    _rate_and_slope,
    demodulated_power,
    fit_ring_down,
    jackknife_over_cycles,
    mirror_null_block,
    relaxation,
    transient_curves,
)
from simulator.errors import InputError
from simulator.scenario.loader import load_scenario
from simulator.workflows.trial import run_trials, truth_table
from simulator.workflows.trial_verdicts import width_interval

EXAMPLE = Path(__file__).resolve().parents[1] / "scenarios" / "nanostring_protocol.toml"
TRIALS = 16


def ring_down_only():
    scenario = load_scenario(EXAMPLE)
    return dataclasses.replace(scenario, schedule=dataclasses.replace(
        scenario.schedule, segments=scenario.schedule.segments[:1]))


def test_fit_recovers_a_decay_far_above_its_noise():
    """A kick of 10¹² against thermal motion of 1 (Γ·T = 1.6): Γ to its stated
    error, which follows the thermal limit (simulator.analysis.ringdown_likelihood)."""
    fs, f, rate = 1e6, 1e5, 300.0
    rng = np.random.default_rng(5)
    t = np.arange(40_000) / fs
    z = 1e6 * np.exp(-rate * t / 2 + 2j * np.pi * f * t) + (
        rng.standard_normal(t.size) + 1j * rng.standard_normal(t.size))
    estimate, error = fit_ring_down(z, fs, f, 500)
    assert abs(estimate - rate) < 5 * error
    assert error < 1e-3 * rate
    with pytest.raises(InputError, match="at least"):
        fit_ring_down(z[:2000], fs, f, 500)


def test_block_length_puts_the_stokes_line_in_a_null():
    """2 f L/fs whole: the block mean at +f cancels the line at −f exactly."""
    block = mirror_null_block(1989, 12.5e6, 1.5e6)
    assert 1989 * 3 // 4 <= block <= 1989
    assert (2 * 1.5e6 * block / 12.5e6) % 1 == pytest.approx(0.0, abs=1e-9)
    t = np.arange(20 * block) / 12.5e6
    _, power = demodulated_power(np.exp(-2j * np.pi * 1.5e6 * t), 12.5e6, 1.5e6, block)
    assert power.max() < 1e-20


def test_ring_down_linewidth_through_the_trial_harness(tmp_path):
    """Bias and pulls of the reference ring-down fit over independent records.

    The likelihood of the demodulated amplitude carries the thermal beat (the
    energy fit it replaces had a pull width of 3.0 here). Measured over 200
    records (docs/records.md, "Schedules"): unbiased, pull width consistent
    with 1. Here 16 trials: no significant bias, and the χ² interval of the
    pull width holds 1.
    """
    scenario = ring_down_only()
    truth = truth_table(scenario)["effective_linewidth_hz@ring-down"]
    assert truth == pytest.approx(scenario.mechanics[0].linewidth_hz, rel=1e-9)
    result = run_trials(scenario, "simulator.analysis.ringdown:ring_down_linewidth", TRIALS,
                        tmp_path, workers=2, progress=False)
    assert not result.errors
    (q,) = result.quantities
    assert q.truth == truth and q.trials == TRIALS
    assert abs(q.bias) < 0.02 * truth
    assert abs(q.bias) < 4 * q.bias_error
    low, high = width_interval(q.pull_width, TRIALS, 0.01)
    assert low <= 1.0 <= high


def test_protocol_figure_is_written(tmp_path):
    from simulator.records.protocol_generate import generate_protocol_record
    from simulator.report.protocol_plots import plot_protocol

    record, timeline = generate_protocol_record(load_scenario(EXAMPLE))
    path = plot_protocol(record, timeline, tmp_path / "protocol.png")
    assert path.stat().st_size > 10_000


def test_run_writes_the_scheduled_record_and_its_figure(tmp_path):
    from simulator.io.timelinefile import read_timeline
    from simulator.workflows.run import run_scenario

    scenario = load_scenario(EXAMPLE)
    scenario = dataclasses.replace(scenario, record=dataclasses.replace(scenario.record,
                                                                        in_run=True))
    run_scenario(scenario, tmp_path / "run", progress=False)
    timeline = read_timeline(tmp_path / "run" / "record.h5")
    assert timeline.segment_names == ("ring-down", "cooling on", "cooling off")
    assert (tmp_path / "run" / "record_protocol.png").stat().st_size > 10_000
    assert not (tmp_path / "run" / "record_spectrum.png").exists()


def test_record_command_follows_the_schedule(tmp_path, capsys):
    import json

    from simulator.cli import parser as cli

    out = tmp_path / "r.h5"
    assert cli.main(["record", str(EXAMPLE), "--out", str(out), "--quiet", "--json"]) == 0
    summary = json.loads(capsys.readouterr().out)
    assert summary["schedule"] == ["ring-down", "cooling on", "cooling off"]
    assert summary["samples"] == round(0.042 * summary["sample_rate_hz"])
    status = cli.main(["record", str(EXAMPLE), "--out", str(tmp_path / "m.h5"), "--quiet",
                       "--engine", "master"])
    assert status == cli.EXIT_INPUT
    assert "linear engine only" in capsys.readouterr().err


def test_transient_rates_recover_a_noiseless_relaxation_averaged_over_cycles():
    """Cycles of a sideband whose power relaxes as P∞ − (P∞ − P₀) e^{−Γt}: the
    averaged fit gives Γ and the initial slope Γ(P∞ − P₀), and the jackknife
    error vanishes as the cycles differ only by a phase."""
    from types import SimpleNamespace

    fs, f, rate, n = 2e5, 2e4, 500.0, 4000
    t = np.arange(n) / fs
    amplitude = np.sqrt(relaxation(t, 1.0, rate, 100.0))
    segments = [SimpleNamespace(name=name, duration_s=n / fs, excite_phonons=0.0)
                for name in ("on", "off") * 4]
    z = np.concatenate([amplitude * np.exp(2j * np.pi * f * t + 1j * k) for k in range(8)])
    curves = transient_curves(z, fs, segments, f)
    assert set(curves) == {"on", "off"}
    times, stack = curves["off"]
    assert stack.shape == (4, 200)
    (fitted, slope), error = jackknife_over_cycles(times, stack, _rate_and_slope)
    assert fitted == pytest.approx(rate, rel=1e-2)  # |block mean of √P|² ≠ P: 0.4 %
    assert slope == pytest.approx(rate * 99.0, rel=1e-2)  # the same: 0.7 %
    assert np.all(error < 1e-3 * np.array([fitted, slope]))
    times, power = demodulated_power(z[:n], fs, f, n // 200)
    assert len(times) == 200 and power[0] < power[-1]


def test_thermal_slope_error_is_the_scatter_of_the_fixed_weight_slope():
    """Cycles of a narrow-band thermal amplitude re-thermalising (a complex AR(1)
    per block: a_{k+1} = ρ a_k + w_k, ρ = e^{−ΓΔ/2}) on a white floor: the slope
    fitted at Γ with fixed nominal weights is unbiased (its mean within 4
    standard errors of Γ(n_∞ − n₀)), and ``thermal_slope_error`` at the fitted
    level matches its scatter (pull width inside the χ² interval at 0.1 %)."""
    from simulator.analysis.ringdown import linear_in_slope, nominal_sigma, thermal_slope_error

    rng = np.random.default_rng(11)
    draws, cycles, blocks, rate, spacing = 300, 20, 100, 125.0, 4e-5
    n0, n_inf, floor = 1e3, 5e4, 50.0
    t = (np.arange(blocks) + 0.5) * spacing
    rho = np.exp(-rate * spacing / 2)

    def circular(var):
        return np.sqrt(var / 2) * (rng.standard_normal((draws, cycles))
                                   + 1j * rng.standard_normal((draws, cycles)))

    a, power = circular(n0), np.empty((draws, cycles, blocks))
    for k in range(blocks):
        power[..., k] = np.abs(a + circular(floor)) ** 2
        a = rho * a + circular(n_inf * (1 - rho**2))
    sigma = nominal_sigma(t, 1.0, floor, n0, n_inf, rate)
    slopes = np.array([linear_in_slope(t, p.mean(axis=0), sigma, rate)[0][1] for p in power])
    errors = np.array([thermal_slope_error(t, p.mean(axis=0), sigma, rate, floor, cycles)
                       for p in power])
    truth = rate * (n_inf - n0) * np.exp(rate * spacing / 2)  # n₀ is at the first centre, Δ/2
    assert abs(slopes.mean() - truth) < 4 * slopes.std(ddof=1) / np.sqrt(draws)
    width = float(((slopes - truth) / errors).std(ddof=1))
    low, high = width_interval(width, draws, 1e-3)
    assert low <= 1.0 <= high
