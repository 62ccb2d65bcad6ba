"""Scheduled records on the threaded pipeline are the bits of the sequential segment loop.

The reference is the loop scheduled records were made with before they used
the pipeline: segment after segment on the calling thread, the kick added at
a segment's first sample, chunks starting at each segment's start, the
normals of the whole record's block streams drawn in order, the carrier, the
segment's own calibration tone and the digitiser, no executor anywhere.
Records from 1, 2 and 3 worker threads, in memory and streamed to HDF5, with
chunk sizes that cut segments, normal blocks and file chunks at odd places,
must equal it bit for bit (counts and stored mechanical quadratures).
"""

import dataclasses

import h5py
import numpy as np
import pytest
from test_protocol_records import OFF, make

from simulator.records import kernels
from simulator.records.generate import MemorySink
from simulator.records.protocol import plan_protocol
from simulator.records.protocol_generate import generate_protocol_record

TONE = {"depth_rad": 1e-4, "frequency_hz": 123e3}
# 2e6 samples/s: segments of 50 001, 70 000 and 30 002 samples cross the normals' blocks
SEGMENTS = [{"duration_s": 0.0250005, "excite_phonons": 1e3},
            {"duration_s": 0.035, "changes": OFF},
            {"duration_s": 0.015001, "excite_phonons": 50.0,
             "changes": {"drive.detuning_hz": -2.5e5}}]


def scheduled(*, tone=False, kind="iq", store=False):
    scenario = make(SEGMENTS, store=store)
    data = scenario.to_dict()
    if tone:  # the tone in the last segment only: each segment's own tone
        data["schedule"]["segments"][2]["changes"]["drive.calibration_tone.depth_rad"] = (
            TONE["depth_rad"])
        data["drive"]["calibration_tone"] = dict(TONE, depth_rad=0.0)
    if kind == "if":
        data["detection"]["intermediate_frequency_hz"] = 0.41e6
        data["record"]["kind"] = "if"
    from simulator.scenario.loader import scenario_from_dict

    return scenario_from_dict(data, source="<test>")


def sequential(plan, chunk):
    """The former single-threaded segment loop: counts and mechanical quadratures."""
    from simulator.model.tone import tone_signal

    first_seg = plan.segments[0]
    width = first_seg.noise_factor.shape[1]
    state = kernels._stationary_start(plan.seed, plan.start_covariance) + plan.start_mean
    normals = kernels.NormalBlocks(plan.seed, kernels.SAMPLE_STREAM, width,
                                   kernels.BLOCK_SAMPLES)
    digitiser = kernels.Digitiser(plan)
    cycles = first_seg.chain.carrier_rad_s / (2 * np.pi * plan.sample_rate_hz)
    p = len(first_seg.chain.model.outputs)
    sink = MemorySink(plan)
    for seg in plan.segments:
        state[seg.kick_index] += seg.kick
        phi = np.ascontiguousarray(seg.discrete.transition)
        gam = np.ascontiguousarray(seg.discrete.output)
        tone = tone_signal(seg.chain, seg.system.scenario, plan.sample_rate_hz)
        end = seg.first + seg.n_samples
        for first in range(seg.first, end, chunk):
            count = min(chunk, end - first)
            y = np.empty((count, p))
            mech = np.empty((count, plan.watched.size))
            for pos, xi in normals.pieces(first, count):
                kernels.full_state_step(phi, gam, seg.noise_factor, state, xi,
                                        y[pos:pos + len(xi)], plan.watched,
                                        mech[pos:pos + len(xi)])
            if seg.chain.tones:  # several detected tones: each pair at its own scale
                y = y * (seg.chain.output_volts_per_unit() / seg.chain.volts_per_unit)
            if seg.chain.receiver == "if":
                y = kernels.rotate_to_carrier(y, first, cycles)
            if tone is not None:
                y = y + tone(first, len(y))
            counts, _ = digitiser(y)
            sink.write(first, counts, mech if plan.watched.size else None)
    return sink.counts, sink.mech


@pytest.mark.parametrize("options", [dict(store=True, tone=True), dict(kind="if", tone=True)])
def test_same_bits_as_the_sequential_loop_for_any_workers_and_chunk(options, tmp_path):
    from simulator.io.recordfile import RecordFileWriter

    scenario = scheduled(**options)
    plan = plan_protocol(scenario, seed=17)
    assert plan.n_samples > 2 * kernels.BLOCK_SAMPLES
    counts, mech = sequential(plan, 4096)
    assert counts.std() > 10  # a real record, not a constant
    for workers, chunk in [(1, plan.n_samples), (2, 1000), (3, kernels.BLOCK_SAMPLES + 7)]:
        record, _ = generate_protocol_record(scenario, seed=17, workers=workers,
                                             chunk_samples=chunk)
        np.testing.assert_array_equal(record.counts, counts)
        if mech is not None:
            np.testing.assert_array_equal(record.mechanical_quadratures, mech)
        if workers != 2:
            continue
        path = tmp_path / f"w{workers}-c{chunk}.h5"
        generate_protocol_record(scenario, seed=17, workers=workers, chunk_samples=chunk,
                                 sink=lambda p, rows, path=path: RecordFileWriter(
                                     path, p, chunk_rows=rows))
        with h5py.File(path, "r") as f:
            np.testing.assert_array_equal(f["samples"][:], counts)


def test_the_tone_belongs_to_its_segment():
    plan = plan_protocol(scheduled(tone=True), seed=2)
    tone = plan.tone_samples()
    seg = plan.segments[2]
    values = tone(seg.first - 5, 100)
    assert np.all(values[:5] == 0) and np.all(np.abs(values[5:]).max(axis=1) > 0)


def test_the_stepper_carries_the_state_over_any_split_of_the_samples():
    plan = dataclasses.replace(plan_protocol(scheduled(store=True), seed=3))
    normals = kernels.NormalBlocks(plan.seed, kernels.SAMPLE_STREAM,
                                   plan.segments[0].noise_factor.shape[1],
                                   kernels.BLOCK_SAMPLES).take(0, plan.n_samples)
    outs = []
    for cuts in ([plan.n_samples], [1, 50_000, 3, 99_999]):
        step = plan.recursion_stepper()
        y = np.empty((plan.n_samples, 2))
        mech = np.empty((plan.n_samples, plan.watched.size))
        edges = np.cumsum([0] + cuts[:-1] + [plan.n_samples - sum(cuts[:-1])])
        for lo, hi in zip(edges[:-1], edges[1:], strict=True):
            step(normals[lo:hi], y[lo:hi], mech[lo:hi])
        outs.append((y, mech))
    assert np.array_equal(outs[0][0], outs[1][0]) and np.array_equal(outs[0][1], outs[1][1])
