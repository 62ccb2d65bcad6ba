"""Generate a scheduled record segment by segment (:mod:`simulator.records.protocol`).

Each segment runs the full-state kernel with its own exact discrete model;
the state (mean included) is carried over, and a segment's coherent kick is
added to the state at its first sample. The random normals come from the
same per-block streams as a stationary record's
(:class:`simulator.records.kernels.NormalBlocks`), indexed by the sample's
place in the whole record, and the start is drawn as a stationary record's
start is: a one-segment schedule that starts in the steady state therefore
gives the stationary full-state record bit for bit (same seed).

The record runs through the same threaded pipeline as a stationary one
(:func:`simulator.records.generate.generate`, :mod:`simulator.records.pipeline`)
with the plan's own stepper and tone (:mod:`simulator.records.protocol_stepper`):
the kernel's matrices switch at segment boundaries inside a chunk, and each
segment's tone is its own. Every step is a pure function of the sample
indices, so the record is the same bits for any chunk size and any number of
worker threads.
"""

import dataclasses
import warnings


def generate_protocol_record(scenario, *, seed=None, chunk_samples=None, sink=None,
                             progress=None, workers=None):
    """A digitised record of ``scenario``'s ``[schedule]``; returns the Record.

    Parameters
    ----------
    scenario : simulator.scenario.loader.Scenario
        With a ``[schedule]``.
    seed : int, optional
        Default: the scenario's seed.
    chunk_samples : int, optional
        Samples per chunk (default: the scenario's ``record.chunk_samples``).
    sink : callable, optional
        As in :func:`simulator.records.generate.generate_record`: ``sink(plan,
        chunk_rows)`` (e.g. :class:`simulator.io.recordfile.RecordFileWriter`,
        which then stores the timeline too); default: memory.
    progress : callable, optional
        Called with the samples of each chunk and the total.
    workers : int, optional
        Threads that draw normals, digitise and compress beside the
        recursion (default: every core this process may use); the same bits
        for any number.

    Returns
    -------
    (simulator.records.generate.Record, simulator.records.protocol.Timeline)
        The record, whose ``truth`` is the first segment's steady state, and
        the truth in time (a record file stores it in ``truth/timeline``).
    """
    from simulator.records.generate import (
        QUANTISATION_WARNING,
        RecordWarning,
        quantisation_share,
        stream_plan,
    )
    from simulator.records.protocol import plan_protocol

    plan = plan_protocol(scenario, seed=seed)
    # the generator takes a scheduled plan as it is (its stepper switches segments)
    record, clipped = stream_plan(plan, chunk_samples, sink, progress, workers)
    coarse = max(quantisation_share(dataclasses.replace(plan, chain=seg.chain,
                                                        discrete=seg.discrete))
                 for seg in plan.segments if seg.system.stable)  # unstable: only louder
    if coarse > QUANTISATION_WARNING:
        warnings.warn(f"the digitiser's step ({plan.bits} bits over ±{plan.full_scale_v:.6g} V, "
                      "a range set by the loudest segment) adds rounding noise of "
                      f"{100.0 * coarse:.3g} % of the quietest segment's variance; raise "
                      "digitizer.bits or lower the kick", RecordWarning, stacklevel=2)
    if clipped:
        warnings.warn(f"{clipped} of {plan.n_samples} samples clipped at the digitiser's "
                      f"full scale ±{plan.full_scale_v:.6g} V; raise digitizer.full_scale_v",
                      RecordWarning, stacklevel=2)
    return record, plan.timeline


def run_segments(plan, sink, *, chunk, progress=None, workers=1):
    """Run every segment's recursion into ``sink``; return the number of clipped samples."""
    from simulator.records.generate import generate

    return generate(plan, sink, chunk=chunk, progress=progress, workers=workers)
