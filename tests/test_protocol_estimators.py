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
    correlation_factor,
    demodulated_power,
    fit_ring_down,
    relaxation,
    transient_rates,
)
from simulator.errors import InputError
from simulator.scenario.loader import load_scenario
from simulator.workflows.trial import run_trials, truth_table

EXAMPLE = Path(__file__).resolve().parents[1] / "scenarios" / "nanostring_protocol.toml"
TRIALS = 16


def ring_down_only():
    scenario = load_scenario(EXAMPLE)
    return dataclasses.replace(scenario, schedule=dataclasses.replace(
        scenario.schedule, segments=scenario.schedule.segments[:1]))


def test_fit_recovers_a_noiseless_decay_exactly():
    fs, f, rate = 1e6, 1e5, 300.0
    t = np.arange(40_000) / fs
    z = 50.0 * np.exp(-rate * t / 2 + 2j * np.pi * f * t)
    estimate, _ = fit_ring_down(z, fs, f, 500)
    assert estimate == pytest.approx(rate, rel=1e-6)
    with pytest.raises(InputError, match="at least"):
        fit_ring_down(z[:2000], fs, f, 500)


def test_correlation_factor_of_white_and_of_correlated_residuals():
    rng = np.random.default_rng(4)
    white = rng.standard_normal(4000)
    assert correlation_factor(white) < 1.1
    smooth = np.convolve(white, np.ones(9) / 9, mode="valid")  # ρ_j = 1 − j/9: 1 + 2Σ = 9
    assert correlation_factor(smooth) == pytest.approx(9.0, rel=0.25)


def test_ring_down_linewidth_through_the_trial_harness(tmp_path):
    """Bias and pulls of the reference ring-down fit over independent records.

    Measured (16 trials, the example's seed): mean 20.16 Hz for Γm/2π = 20 Hz,
    bias 0.16 ± 0.12 Hz (not significant), spread 0.48 Hz, pull width 3.0:
    the stated errors are about three times too small, since the thermal
    motion's beat with the kicked amplitude is correlated over most of the
    fit window, which the integrated-autocorrelation inflation only partly
    captures (docs/records.md, "Schedules"). The test pins the bias and keeps
    the pull width measured within broad limits, so a change shows.
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
    assert 0.5 < q.pull_width < 4.0


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
    averaged fit gives Γ, and the jackknife error vanishes as the cycles differ
    only by a phase."""
    from types import SimpleNamespace

    fs, f, rate, n = 2e5, 2e4, 500.0, 4000
    t = np.arange(n) / fs
    amplitude = np.sqrt(relaxation(t, 1.0, rate, 100.0))
    segments = [SimpleNamespace(name=name, duration_s=n / fs, excite_phonons=0.0)
                for name in ("on", "off") * 4]
    z = np.concatenate([amplitude * np.exp(2j * np.pi * f * t + 1j * k) for k in range(8)])
    scenario = SimpleNamespace(schedule=SimpleNamespace(segments=segments),
                               mechanics=[SimpleNamespace(frequency_hz=f)])
    record = SimpleNamespace(scenario=scenario, kind="iq", sample_rate_hz=fs, samples=z)
    estimates = transient_rates(record)
    value, error = estimates["effective_linewidth_hz@off"]
    assert value == pytest.approx(rate / (2 * np.pi), rel=1e-3)  # block averaging: ≤ 0.1 %
    assert error < 1e-3 * value
    assert set(estimates) == {"effective_linewidth_hz@on", "effective_linewidth_hz@off"}
    times, power = demodulated_power(z[:n], fs, f, n // 200)
    assert len(times) == 200 and power[0] < power[-1]
