"""Scheduled records of several detected tones: one I/Q pair per tone, segment by segment.

A cooling tone and two probes at ±(Ωm + δ) on a warm drum (the invented device
of tests/test_tone_records.py) under a schedule: the drum starts hot, is
cooled, then the cooling tone is switched off and the drum kicked. Every
segment's record comes from its joint model of all channels with the state
carried over, so the second moments of the samples at any time are
Γ V(t) Γᵀ + R of that segment, V(t) the exact covariance flow
(:func:`simulator.records.protocol_flow.state_moments`), R the sampled output
noise, plus the digitiser's rounding Δ²/12 on each channel (Widrow and
Kollár, Quantization Noise (Cambridge, 2008), Ch. 4) and the mean Γ m(t).
"""

import dataclasses

import h5py
import numpy as np
import pytest
from test_protocol_pipeline import sequential

from simulator.errors import InputError
from simulator.io.recordfile import RecordFileWriter
from simulator.records import kernels
from simulator.records.generate import generate_record, stream_plan
from simulator.records.protocol import _check_layout, plan_protocol
from simulator.records.protocol_flow import state_moments
from simulator.records.protocol_generate import generate_protocol_record
from simulator.scenario.loader import parse_scenario
from tests.test_tone_records import two_probe_text

COOL_S, OFF_S = 2e-5, 1e-5  # 320 and 160 samples at 16 MHz
HOT = 3e5  # start occupation: the drum's lines near the per-sample noise (16 MHz)
KICK = 1e5  # phonons of the kick when the cooling tone goes off
RECORDS = 1000  # records of the ensemble: variances to √(2/1000) ≈ 4.5 %
HEADROOM = 2.0  # digitiser range over the automatic one: the hot start is not clipped
SIGMAS = 5.0  # bound on every standardised deviation (Gaussian estimators)


def schedule_text(start="occupation", segments=((COOL_S, None, 0.0), (OFF_S, 0.0, KICK))):
    """A [schedule]: segments of (duration, drive power or None, kick phonons)."""
    text = f'\n[schedule]\nstart = "{start}"\n'
    if start == "occupation":
        text += f"start_occupation = {HOT!r}\n"
    for k, (duration, power, kick) in enumerate(segments):
        text += (f'[[schedule.segments]]\nname = "s{k}"\nduration_s = {duration!r}\n'
                 f"excite_phonons = {kick!r}\n")
        if power is not None:
            text += f'[schedule.segments.changes]\n"drive.power_w" = {power!r}\n'
    return text


def scheduled(**options):
    return parse_scenario(two_probe_text(extra=schedule_text(**options)), source="sched.toml")


@pytest.fixture(scope="module")
def ensemble():
    """The plan and RECORDS records of it (seeds 0 …), in shot-noise units (N, 4) each."""
    scenario = scheduled()  # the automatic full scale holds the steady states, not HOT
    scenario = dataclasses.replace(scenario, digitizer=dataclasses.replace(
        scenario.digitizer, full_scale_v=HEADROOM * plan_protocol(scenario).full_scale_v))
    plan = plan_protocol(scenario)
    scale = np.repeat(plan.channel_shot_noise_per_count, 2)
    rows = []
    for seed in range(RECORDS):
        record, clipped = stream_plan(dataclasses.replace(plan, seed=seed), None, None,
                                      None, 1)
        assert clipped == 0
        rows.append(record.counts * scale)
    return plan, np.array(rows)


def exact_moments(plan, samples):
    """Mean (k, 4) and covariance (k, 4, 4) of the channels at ``samples``, exact."""
    means, covs = state_moments(plan, samples)
    scale = np.repeat(plan.channel_shot_noise_per_count, 2)
    rounding = np.diag(scale**2 / 12.0)
    out_m, out_c = [], []
    for s, m, v in zip(samples, means, covs, strict=True):
        seg = next(g for g in plan.segments if g.first <= s < g.first + g.n_samples)
        gam = seg.discrete.output
        out_m.append(gam @ m)
        out_c.append(gam @ v @ gam.T + seg.discrete.output_noise + rounding)
    return np.array(out_m), np.array(out_c)


def test_channel_moments_follow_the_exact_covariance_flow(ensemble):
    """Every channel's and every pair of channels' second moments, at the hot start, while
    cooling, at the switch with the kick and after it, against Γ V(t) Γᵀ + R per segment."""
    plan, y = ensemble
    cool = plan.segments[0].n_samples
    samples = np.array([0, 40, cool - 1, cool, cool + 60, plan.n_samples - 1])
    mean, cov = exact_moments(plan, samples)
    for k, s in enumerate(samples):
        d = y[:, s, :] - mean[k]
        sample_mean = d.mean(axis=0)
        assert np.all(np.abs(sample_mean) < SIGMAS * np.sqrt(np.diag(cov[k]) / RECORDS)), s
        got = d.T @ d / RECORDS  # about the exact mean: unbiased
        var = np.diag(cov[k])
        # Var of a Gaussian sample covariance: Isserlis, Biometrika 12, 134 (1918) (from memory)
        error = np.sqrt((np.outer(var, var) + cov[k] ** 2) / RECORDS)
        z = (got - cov[k]) / error
        assert np.abs(z).max() < SIGMAS, (s, z)
    # the test can fail: the hot drum (once the cavity field has followed it, after a
    # few 1/κ) and the kick stand far out of the bounds ...
    steady = plan.segments[0].chain.sample_covariance(plan.segments[0].discrete)
    hot = np.diag(cov[1])
    assert np.all(hot - np.diag(steady) > 10 * np.sqrt(2.0 * hot**2 / RECORDS))
    assert np.abs(mean[4]).max() > 10 * np.sqrt(cov[4].diagonal().max() / RECORDS)
    # ... and the two probes' channels are correlated (the same phonons scatter both)
    cross = cov[1][:2, 2:] / np.sqrt(np.outer(hot[:2], hot[2:]))
    assert np.abs(cross).max() > 0.2


def test_one_segment_schedule_is_the_stationary_record_of_several_tones(tmp_path):
    """A steady one-segment schedule: the stationary several-tone record bit for bit, the
    same channel truths, written as format version 2 with the channels and the timeline."""
    scenario = scheduled(start="steady", segments=((5e-4, None, 0.0),))
    path = tmp_path / "one.h5"
    record, timeline = generate_protocol_record(
        scenario, seed=5, chunk_samples=777, workers=2,
        sink=lambda p, rows: RecordFileWriter(path, p, chunk_rows=rows))
    plain = generate_record(dataclasses.replace(scenario, schedule=None), seed=5,
                            form="full-state", duration_s=5e-4, workers=1)
    assert record.tones == plain.tones == ("red", "blue")
    with h5py.File(path, "r") as f:
        assert f.attrs["format_version"] == 2
        np.testing.assert_array_equal(f["samples"][:], plain.counts)
        assert list(f["truth/channels"].attrs["tones"]) == ["red", "blue"]
        assert "timeline" in f["truth"]
    assert record.truth.channels == plain.truth.channels  # frames, couplings, calibrations
    assert timeline.occupation[0, 0] == pytest.approx(record.truth.occupation[0], rel=1e-9)


def test_several_tones_same_bits_for_any_workers_and_chunk():
    """The threaded pipeline against the sequential segment loop: 1–3 threads, chunks that
    cut the segments and the normals' blocks at odd places."""
    segments = ((0.0030005, None, 0.0), (0.004, 0.0, KICK), (0.0015001, None, 50.0))
    scenario = scheduled(segments=segments)
    plan = plan_protocol(scenario, seed=23)
    assert plan.n_samples > 2 * kernels.BLOCK_SAMPLES
    counts, _ = sequential(plan, 4096)
    assert counts.shape == (plan.n_samples, 4) and counts.std() > 10
    for workers, chunk in [(1, plan.n_samples), (2, 1001), (3, kernels.BLOCK_SAMPLES + 7)]:
        record, _ = generate_protocol_record(scenario, seed=23, workers=workers,
                                             chunk_samples=chunk)
        np.testing.assert_array_equal(record.counts, counts)


def test_a_segment_must_keep_the_channels_and_their_scales():
    """A changed probe frequency changes its channel's scale; a one-tone chain beside a
    two-tone one changes the channel layout: both refused, naming the segment."""
    text = schedule_text(segments=((COOL_S, None, 0.0),)) + (
        '[[schedule.segments]]\nname = "moved"\nduration_s = 1e-5\n'
        '[schedule.segments.changes]\n"tones.blue.detuning_hz" = 5.5e6\n')
    with pytest.raises(InputError, match="'moved' changes the detection gain.*of a channel"):
        plan_protocol(parse_scenario(two_probe_text(extra=text), source="moved.toml"))
    two = plan_protocol(scheduled(start="steady", segments=((1e-5, None, 0.0),))).chain
    one = plan_protocol(parse_scenario(two_probe_text('tone = "red"', schedule_text(
        start="steady", segments=((1e-5, None, 0.0),))), source="one.toml")).chain
    with pytest.raises(InputError, match="'late' changes the detected tones.*'red', 'blue'"):
        _check_layout(two, one, "late")


def test_the_commands_name_the_channels_of_a_scheduled_record(tmp_path, capsys):
    """The example of docs/records.md ("Schedules", several detected tones): the bundled
    drum's two probes recorded while the cooling tone goes off; `record` names both
    channels and writes their truths and the timeline, `inspect` names the channel its
    protocol bound reads."""
    from simulator.cli.parser import main
    from simulator.io.recordfile import load_record
    from simulator.io.timelinefile import read_timeline

    text = open("scenarios/drum_two_probes.toml").read()
    text = text.replace('tone = "blue_probe"', 'tones = ["red_probe", "blue_probe"]')
    text = text.replace("duration_s = 0.001\n", "") + schedule_text(
        start="thermal", segments=((2e-4, None, 0.0), (3e-4, 0.0, 0.0)))
    scenario, out = tmp_path / "drum.toml", tmp_path / "drum.h5"
    scenario.write_text(text)
    assert main(["record", str(scenario), "--out", str(out), "--quiet"]) == 0
    assert "detected tones, one I/Q pair each: red_probe, blue_probe" in capsys.readouterr().out
    record, timeline = load_record(out), read_timeline(out)
    assert [c["tone"] for c in record.truth.channels] == ["red_probe", "blue_probe"]
    assert timeline.segment_names == ("s0", "s1")
    # cooled by the drive, then heating towards the bath once it is off
    assert timeline.occupation[-1, 0] > 10 * timeline.occupation[len(timeline.times_s) // 2, 0]
    assert main(["inspect", str(scenario)]) == 0
    assert ("protocol ([schedule], first mode, the channel of the detected tone red_probe)"
            in capsys.readouterr().out)
