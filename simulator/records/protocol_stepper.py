"""The recursion and the tone of a scheduled record, segment by segment, for the pipeline.

:func:`segment_stepper` and :func:`segment_tone` are what a
:class:`simulator.records.protocol.ProtocolPlan` hands to the record
pipeline (:func:`simulator.records.generate.generate`) in place of a
stationary record's stepper and tone: the full-state kernel with each
segment's matrices, switching at segment boundaries inside any chunk, and
each segment's calibration tone on its own samples. Both are pure functions
of the sample indices, so the record is the same bits for any chunk size and
number of worker threads.
"""

import numpy as np


def segment_stepper(plan):
    """A :class:`simulator.records.kernels.Stepper` running the segments of ``plan`` in turn.

    The full-state kernel with each segment's Φ, Γ and noise factor (padded
    to the widest segment's normals); the segment's kick is added to the
    state at its first sample; a call may span segment boundaries. Its
    ``recursion`` describes the first segment.
    """
    from simulator.records import kernels

    segments = plan.segments
    mats = [(np.ascontiguousarray(s.discrete.transition),
             np.ascontiguousarray(s.discrete.output), s.noise_factor) for s in segments]
    start = kernels._stationary_start(plan.seed, plan.start_covariance) + plan.start_mean
    state = np.ascontiguousarray(start)
    where = {"sample": 0, "index": 0, "kicked": False}

    def step(xi, y, mech):
        pos, count = 0, len(xi)
        while pos < count:
            k = where["index"]
            seg = segments[k]
            if not where["kicked"]:
                state[seg.kick_index] += seg.kick
                where["kicked"] = True
            take = min(count - pos, seg.first + seg.n_samples - where["sample"])
            phi, gam, factor = mats[k]
            kernels.full_state_step(phi, gam, factor, state, xi[pos:pos + take],
                                    y[pos:pos + take], plan.watched, mech[pos:pos + take])
            pos += take
            where["sample"] += take
            if where["sample"] == seg.first + seg.n_samples and k + 1 < len(segments):
                where.update(index=k + 1, kicked=False)

    phi, gam, factor = mats[0]
    n = phi.shape[0]
    return kernels.Stepper(factor.shape[1], kernels.Recursion(
        kind="full-state", transition=phi, drive=factor[:n], output=gam,
        feedthrough=factor[n:], start_covariance=plan.start_covariance), step, start)


def segment_tone(plan):
    """``signal(first, count)``: each segment's calibration tone on its own samples."""
    from simulator.model.tone import tone_signal

    tones = [tone_signal(s.chain, s.system.scenario, plan.sample_rate_hz)
             for s in plan.segments]
    if all(t is None for t in tones):
        return None
    p = len(plan.chain.model.outputs)  # iq: (I, Q) of every detected tone
    shape = (p,) if plan.chain.receiver == "iq" else ()

    def signal(first, count):
        out = np.zeros((count,) + shape)
        for seg, tone in zip(plan.segments, tones, strict=True):
            lo, hi = max(first, seg.first), min(first + count, seg.first + seg.n_samples)
            if tone is not None and lo < hi:
                out[lo - first:hi - first] = tone(lo, hi - lo)
        return out

    return signal
