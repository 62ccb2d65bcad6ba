"""Synthetic digitised records with exactly the statistics of the linear model.

:func:`generate_record` is the engine: system and seed in, a :class:`Record`
out, chunk by chunk into a sink (memory here; the HDF5 file of
:mod:`simulator.io.recordfile` through
:func:`simulator.workflows.record.simulate_record`, so that memory does not
grow with the duration). The pipeline is

    scenario ► detection chain (:mod:`simulator.model.chain`) ► exact discretisation
    at the sample interval (:mod:`simulator.records.discretize`) ► numba recursion
    (:mod:`simulator.records.kernels`) ► carrier rotation (if records) ► volts ►
    digitiser (quantisation, clipping) ► counts.

Two exact forms generate the same process: the full state form (one normal
per noise direction and sample; it also yields the true mechanical
quadratures) and the innovations form (one normal per output channel and
sample). Both start in the stationary state.

Reproducibility: the random normals of sample block k (``kernels.BLOCK_SAMPLES``
samples) come from their own generator, seeded by (seed, k) through
:class:`numpy.random.SeedSequence`. A record is therefore the same bits for a
given (scenario, seed, form) whatever the chunk size used to make it.
"""

import dataclasses
import warnings

import numpy as np

from simulator.errors import InputError
from simulator.records.record_plan import (  # noqa: F401 (part of this module's API)
    FULL_SCALE_SIGMAS,
    RecordPlan,
    Truth,
    plan_record,
)


class RecordWarning(UserWarning):
    """Something in a generated record deserves attention (clipping)."""


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class Record:
    """A digitised record with its ground truth and provenance.

    Attributes
    ----------
    counts : ndarray or None
        ADC counts, shape (N, 2) for I, Q (kind ``"iq"``) or (N,) (``"if"``);
        (N, 2K) for I, Q of each of K detected tones (``tones``); None when the
        record lives only in its file (:meth:`samples` reads it).
    kind : str
        ``"iq"`` or ``"if"``.
    sample_rate_hz, volts_per_count, shot_noise_per_count : float
        counts × shot_noise_per_count is the record in units whose two-sided
        shot-noise density is 1 per Hz; I + iQ has the anti-Stokes sideband at
        positive frequency in an FFT.
    mechanical_quadratures : ndarray or None
        (N, 2 × modes): q, p of each mode at the start of each sample interval
        (vacuum variance ½), when stored.
    path : path or None
        The file the record was written to, if any.
    reader : callable or None
        Returns the counts of a record that lives only in its file (set by
        the file writer, :mod:`simulator.io.recordfile`).
    tones : tuple of str
        The detected tones of a record with several (``detection.tones``),
        in the order of the I/Q pairs; empty for a one-tone record.
    channel_shot_noise_per_count : tuple of float
        One count in shot-noise units for each tone's pair (the scale follows
        the tone's frequency); ``shot_noise_per_count`` is the first's.
    """

    counts: np.ndarray | None
    kind: str
    scheme: str
    sample_rate_hz: float
    n_samples: int
    volts_per_count: float
    shot_noise_per_count: float
    full_scale_v: float
    bits: int
    clipped_samples: int
    intermediate_frequency_hz: float
    local_oscillator_side: str
    seed: int
    form: str
    scenario: object
    truth: Truth
    software_version: str
    created_utc: str = ""
    mechanical_quadratures: np.ndarray | None = None
    path: object = None
    reader: object = None
    tones: tuple = ()
    channel_shot_noise_per_count: tuple = ()

    def samples(self):
        """The ADC counts, read from the file when not held in memory."""
        return self.counts if self.counts is not None else self.reader()

    def shot_noise_units(self):
        """The record in shot-noise units: complex I + iQ (iq) or real (if); with
        several detected tones (N, K) complex, column k the pair of ``tones[k]``."""
        c = self.samples()
        if self.tones:
            scale = np.asarray(self.channel_shot_noise_per_count)
            return (c[:, 0::2] + 1j * c[:, 1::2]) * scale
        if self.kind == "iq":
            return (c[:, 0] + 1j * c[:, 1]) * self.shot_noise_per_count
        return c * self.shot_noise_per_count

    def channel(self, tone):
        """I + iQ in shot-noise units of the detected tone named ``tone`` (N,)."""
        from simulator.model.detected_tone import channel_index

        k = channel_index(self.tones, tone, "record holds one detected tone; use "
                                            "shot_noise_units()")
        c = self.samples()
        return (c[:, 2 * k] + 1j * c[:, 2 * k + 1]) * self.channel_shot_noise_per_count[k]

    def volts(self):
        """The digitised voltage (V); complex I + iQ for an iq record ((N, K) with
        several detected tones: one digitiser, one volts per count)."""
        if self.tones:
            c = self.samples()
            return (c[:, 0::2] + 1j * c[:, 1::2]) * self.volts_per_count
        return self.shot_noise_units() * (self.volts_per_count / self.shot_noise_per_count)


def generate_record(system, *, seed=None, duration_s=None, form="auto",
                    store_mechanics=None, chunk_samples=None, sink=None, progress=None,
                    workers=None):
    """Generate a digitised record of ``system`` into a sink; return the Record.

    The engine behind :func:`simulator.workflows.record.simulate_record`,
    which adds the output file and the progress bar.

    Parameters
    ----------
    system : simulator.model.system.System
        Or a scenario, built into one.
    seed, duration_s, form, store_mechanics, chunk_samples
        As in :func:`simulator.workflows.record.simulate_record`.
    sink : callable, optional
        ``sink(plan, chunk_rows)`` returns the object the counts go to (a
        context manager with ``write(first, counts, mechanics)`` and
        ``finish(clipped)``, which returns the Record); default: memory.
    progress : callable, optional
        Called with the number of samples of each chunk and the total, after
        each chunk.
    workers : int, optional
        Threads that draw normals, digitise and compress beside the
        recursion (default: every core this process may use); the record is
        the same bits for any number.

    Warns
    -----
    RecordWarning
        When samples were clipped at the digitiser's full scale, or the
        digitiser's step is coarse.
    """
    plan = plan_record(system, seed=seed, duration_s=duration_s, form=form,
                       store_mechanics=store_mechanics)
    record, clipped = stream_plan(plan, chunk_samples, sink, progress, workers)
    coarse = quantisation_share(plan)
    if coarse > QUANTISATION_WARNING:
        coarse_words = (" (a step this close to the signal's standard deviation also makes "
                        "the rounding error depend on the signal)" if coarse > 1.0 / 12 else "")
        warnings.warn(f"the digitiser's step ({plan.bits} bits over ±{plan.full_scale_v:.6g} V) "
                      f"adds rounding noise Δ²/12 of {100.0 * coarse:.3g} % of the record's "
                      f"variance{coarse_words}; raise digitizer.bits or lower "
                      "digitizer.full_scale_v", RecordWarning, stacklevel=3)
    if clipped:
        warnings.warn(f"{clipped} of {plan.n_samples} samples "
                      f"({100.0 * clipped / plan.n_samples:.3g} %) clipped at the digitiser's "
                      f"full scale ±{plan.full_scale_v:.6g} V; raise digitizer.full_scale_v "
                      f"or lower {plan.chain.scale_key}", RecordWarning, stacklevel=3)
    return record


def stream_plan(plan, chunk_samples, sink, progress, workers):
    """Run ``plan`` (a stationary or scheduled record's) into its sink: ``(record,
    clipped samples)``. ``chunk_samples`` default the scenario's ``record.chunk_samples``;
    ``sink`` and ``workers`` as in :func:`generate_record`."""
    from simulator.records.pipeline import checked_workers

    chunk = plan.scenario.record.chunk_samples if chunk_samples is None else chunk_samples
    if isinstance(chunk, bool) or not isinstance(chunk, (int, np.integer)) or chunk < 1:
        raise InputError(f"chunk_samples = {chunk!r}; expected a positive integer")
    workers = checked_workers(workers)
    target = MemorySink(plan) if sink is None else sink(plan, int(min(chunk, plan.n_samples)))
    with target:
        clipped = generate(plan, target, chunk=int(chunk), progress=progress, workers=workers)
        return target.finish(clipped), clipped


QUANTISATION_WARNING = 0.01  # rounding variance Δ²/12 above 1 % of the signal's (our choice)


def quantisation_share(plan):
    """Rounding variance Δ²/12 over the sample variance of the record (its weakest channel).

    Widrow and Kollár, Quantization Noise (Cambridge, 2008), Ch. 4: for a
    signal spanning many steps the rounding error is uniform, white and
    independent of the signal, of variance Δ²/12.
    """
    cov = plan.chain.sample_covariance(plan.discrete)
    if plan.chain.tones:  # several detected tones: the weakest channel in volts
        volts2 = float(np.min(np.diag(cov) * plan.chain.output_volts_per_unit() ** 2))
        return plan.volts_per_count**2 / 12.0 / volts2
    if plan.chain.receiver == "if":  # r = 2(cos φ Re ρ − sin φ Im ρ), averaged over φ
        variance = 2.0 * float(np.trace(cov))
    else:
        variance = float(np.min(np.diag(cov)))
    return plan.volts_per_count**2 / 12.0 / (variance * plan.chain.volts_per_unit**2)


def generate(plan, sink, *, chunk, progress=None, workers=1):
    """Run the recursion of ``plan`` chunk by chunk into ``sink``; return the clipped count.

    ``progress``, when given, is called with the number of samples of each
    chunk once it is written and the record's total (a progress bar; a check
    for Ctrl-C). With ``workers`` > 1 the normals are drawn ahead and each
    chunk is finished (carrier, tone, digitiser, and the sink's ``encode``
    when it has one: compression) on a pool of threads while the recursion
    runs on this one (:mod:`simulator.records.pipeline`); an iq record without
    a tone is digitised here instead, block by block after the recursion. The
    counts are the same bits for any number of workers.
    """
    from simulator.records import kernels, pipeline

    chain, n_total = plan.chain, plan.n_samples
    step = plan.recursion_stepper()
    p = len(chain.model.outputs)
    digitiser = kernels.Digitiser(plan)
    tone = plan.tone_samples()
    cycles = chain.carrier_rad_s / (2 * np.pi * plan.sample_rate_hz)
    encode = getattr(sink, "encode", None)

    # iq without a tone: each block's outputs are digitised at once, still in the cache
    # (one reused buffer), not written out by chunk and read back by another thread.
    direct = chain.receiver == "iq" and tone is None and not chain.tones
    # several detected tones: each pair's volts per record unit over the first's
    ratio = chain.output_volts_per_unit() / chain.volts_per_unit if chain.tones else None

    def finish(first, y, mech, n_clip):  # a pure function of the chunk: any thread, same bits
        if direct:
            counts = y
        else:
            if ratio is not None:
                y = y * ratio
            if chain.receiver == "homodyne":
                y = y[:, 0]
            elif chain.receiver == "if":
                y = kernels.rotate_to_carrier(y, first, cycles)
            if tone is not None:  # the calibration tone's exact response, by linearity
                y = y + tone(first, len(y))
            counts, n_clip = digitiser(y)
        return first, counts, mech, n_clip, (None if encode is None else encode(first, counts))

    clipped = 0

    def deliver(done):
        nonlocal clipped
        first, counts, mech, n_clip, encoded = done
        clipped += n_clip
        if encoded is None:
            sink.write(first, counts, mech)
        else:
            sink.write_encoded(first, counts, mech, encoded)
        if progress is not None:
            progress(len(counts), n_total)

    workers = int(workers)
    y_block = np.empty((min(chunk, kernels.BLOCK_SAMPLES), p)) if direct else None
    with pipeline.executor(workers) as pool, pipeline.writer(workers) as write:
        normals = kernels.NormalBlocks(
            plan.seed, kernels.SAMPLE_STREAM, step.width, kernels.BLOCK_SAMPLES,
            executor=pool if workers > 1 else None, total=n_total,
            ahead=2 * workers + 2)  # enough to keep every thread drawing, memory bounded
        stage = pipeline.OrderedStage(pool, finish, deliver, depth=2 * workers,
                                      writer=write if workers > 1 else None)
        try:
            for first in range(0, n_total, chunk):
                count = min(chunk, n_total - first)
                out = (np.empty((count, p), dtype=digitiser.dtype) if direct
                       else np.empty((count, p)))
                mech = np.empty((count, plan.watched.size))
                n_clip = 0
                for pos, xi in normals.pieces(first, count):
                    end = pos + len(xi)
                    if direct and step.digitised is not None:  # in the recursion's loop
                        n_clip += step.digitised(xi, digitiser, out[pos:end])
                    elif direct:
                        y = y_block[:len(xi)]
                        step(xi, y, mech[pos:end])
                        n_clip += digitiser.into(y, out[pos:end])
                    else:
                        step(xi, out[pos:end], mech[pos:end])
                stage.put(first, out, mech if plan.watched.size else None, n_clip)
            stage.drain()
        except BaseException:
            stage.cancel()
            raise
    return clipped


def record_header(plan, record_kind):
    """Fields shared by the in-memory record and the file's attributes."""
    from simulator import __version__

    det = plan.scenario.detection
    several = {} if not plan.chain.tones else dict(
        tones=plan.chain.tones, channel_shot_noise_per_count=plan.channel_shot_noise_per_count)
    return several | dict(kind=record_kind, scheme=det.scheme, sample_rate_hz=plan.sample_rate_hz,
                n_samples=plan.n_samples, volts_per_count=plan.volts_per_count,
                shot_noise_per_count=plan.shot_noise_per_count,
                full_scale_v=plan.full_scale_v, bits=plan.bits,
                intermediate_frequency_hz=det.intermediate_frequency_hz,
                local_oscillator_side=det.local_oscillator_side, seed=plan.seed,
                form=plan.form, software_version=__version__)


class MemorySink:
    """Holds a record in memory: the default sink of :func:`generate_record`."""

    def __init__(self, plan):
        self.plan = plan
        shape = record_shape(plan)
        self.counts = np.empty(shape, dtype=np.int16 if plan.bits <= 16 else np.int32)
        self.mech = np.empty((plan.n_samples, plan.watched.size)) if plan.watched.size else None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False

    def write(self, first, counts, mech):
        """Store a chunk of counts (and mechanical quadratures) from sample ``first``."""
        self.counts[first:first + len(counts)] = counts
        if mech is not None:
            self.mech[first:first + len(mech)] = mech

    def finish(self, clipped):
        """Return the finished in-memory Record, with ``clipped`` clipped samples."""
        import datetime

        created = datetime.datetime.now(datetime.UTC).isoformat(timespec="seconds")
        return Record(counts=self.counts, clipped_samples=clipped, scenario=self.plan.scenario,
                      truth=self.plan.truth, mechanical_quadratures=self.mech,
                      created_utc=created, **record_header(self.plan,
                                                           self.plan.chain.record_kind))


def record_shape(plan):
    """Shape of the counts: (N, 2) for iq, (N, 2K) for K detected tones, (N,) otherwise."""
    if plan.chain.record_kind == "iq":
        return (plan.n_samples, len(plan.chain.model.outputs))
    return (plan.n_samples,)
