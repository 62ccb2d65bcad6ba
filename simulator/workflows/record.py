"""A record as a user asks for it: in memory or streamed to its HDF5 file, with progress.

:func:`simulate_record` composes the record engine
(:func:`simulator.records.generate.generate_record`) with the file writer of
:mod:`simulator.io.recordfile` and a progress bar that also lets Ctrl-C stop
the run between chunks; :func:`master_records_to_files` does the same for the
master equation's trajectory records.
"""

from simulator.errors import InputError
from simulator.records.generate import generate_record

# A progress bar is drawn only for work that lasts longer than this: a record refused
# at once (a duration shorter than one sample, no room on the disk) leaves its error
# alone on the terminal, not after an empty bar.
PROGRESS_DELAY_S = 0.5


def simulate_record(system, *, seed=None, duration_s=None, out=None, form="auto",
                    store_mechanics=None, chunk_samples=None, progress=False, overwrite=False,
                    workers=None, compression="none"):
    """Generate a digitised record of ``system`` with its ground truth.

    Parameters
    ----------
    system : simulator.model.system.System
        Or a scenario, built into one.
    seed : int, optional
        Default: ``scenario.scenario.seed``.
    duration_s : float, optional
        Overrides ``record.duration_s`` (the embedded scenario says so).
    out : str or pathlib.Path, optional
        HDF5 file to stream the record to (written through a temporary file
        and renamed when complete). Without it the record is kept in memory.
    form : {"auto", "full-state", "innovations"}
        Exact generator; "auto" takes the full state form when the mechanical
        quadratures are stored and the innovations form otherwise.
    store_mechanics : bool, optional
        Overrides ``record.store_mechanics``.
    chunk_samples : int, optional
        Samples per step; overrides ``record.chunk_samples``. Does not change
        the result.
    progress : bool
        Show a progress bar (tqdm, on standard error).
    workers : int, optional
        Threads drawing normals, digitising and compressing beside the
        recursion (default: every core this process may use). Does not
        change the result.
    compression : {"none", "deflate"}
        How ``out`` stores the counts: raw, or through HDF5's shuffle and
        gzip filters (about 11 % smaller for a record whose noise spans
        thousands of counts, several times slower to write: the table in
        docs/records.md). Either is read by plain h5py.
    overwrite : bool
        Replace an existing file at ``out`` (by default it is an error).

    Returns
    -------
    simulator.records.generate.Record
        In memory, or (with ``out``) describing the file: ``Record.samples()``
        reads the counts, :func:`simulator.io.recordfile.load_record` everything
        including the stored mechanical quadratures.

    Raises
    ------
    simulator.errors.InputError
        Bad seed, duration, form or output path; an existing ``out`` without
        ``overwrite``; a write that fails (disk full) as
        :class:`simulator.io.files.OutputError`.
    simulator.errors.OperatingPointError
        Unstable operating point: no stationary record exists.

    Warns
    -----
    simulator.records.generate.RecordWarning
        When samples were clipped at the digitiser's full scale.
    """
    from tqdm import tqdm

    from simulator.workflows import interrupt

    sink = None
    if out is not None:
        from simulator.io.recordfile import RecordFileWriter

        def sink(plan, rows):
            return RecordFileWriter(out, plan, chunk_rows=rows, overwrite=overwrite,
                                    compression=compression)

    with tqdm(unit="sample", unit_scale=True, disable=not progress, desc="record",
              delay=PROGRESS_DELAY_S) as bar:
        def advance(count, total):
            bar.total = total
            bar.update(count)
            interrupt.check()  # a Ctrl-C swallowed inside a library callback still stops

        scenario = system if hasattr(system, "schedule") else system.scenario
        if scenario.schedule is not None:
            return scheduled_record(scenario, seed=seed, duration_s=duration_s, form=form,
                                    store_mechanics=store_mechanics,
                                    chunk_samples=chunk_samples, sink=sink, progress=advance,
                                    workers=workers)
        return generate_record(system, seed=seed, duration_s=duration_s, form=form,
                               store_mechanics=store_mechanics, chunk_samples=chunk_samples,
                               sink=sink, progress=advance, workers=workers)


def scheduled_record(scenario, *, seed, duration_s, form, store_mechanics, chunk_samples,
                     sink, progress, workers=None):
    """The record of a scenario with a ``[schedule]`` (docs/records.md, "Schedules").

    Its length is the sum of the segments' durations and it runs the full
    state form; a different ``duration_s``, ``form = "innovations"`` or
    ``store_mechanics`` against the scenario's are refused.
    """
    import dataclasses

    from simulator.records.protocol_generate import generate_protocol_record

    if duration_s is not None and duration_s != scenario.record.duration_s:
        raise InputError(f"duration = {duration_s!r} s with a [schedule]: a scheduled "
                         "record lasts the sum of its segments' duration_s; leave the "
                         "duration out")
    if form == "innovations":
        raise InputError("form = 'innovations' with a [schedule]: a scheduled record is "
                         "not stationary and runs the full-state form; use 'auto'")
    if store_mechanics is not None and store_mechanics != scenario.record.store_mechanics:
        scenario = dataclasses.replace(scenario, record=dataclasses.replace(
            scenario.record, store_mechanics=bool(store_mechanics)))
    record, _ = generate_protocol_record(scenario, seed=seed, chunk_samples=chunk_samples,
                                         sink=sink, progress=progress, workers=workers)
    return record


def simulate_averaged_spectrum(system, *, segment_samples, window="hann", seed=None,
                               duration_s=None, out=None, overwrite=False):
    """A synthetic averaged periodogram of ``system``'s record, optionally written to ``out``.

    Drawn from its exact law
    (:func:`simulator.analysis.synthetic_spectrum.synthetic_averaged_spectrum`,
    whose parameters these are), so an hour of integration costs
    milliseconds; ``out`` is an HDF5 file (:mod:`simulator.io.averagedfile`),
    written atomically, replaced only with ``overwrite``.
    """
    from simulator.analysis.synthetic_spectrum import synthetic_averaged_spectrum

    if out is not None:
        from simulator.io.files import refuse_existing

        refuse_existing(out, overwrite=overwrite)  # before the work, not after
    spectrum = synthetic_averaged_spectrum(system, segment_samples=segment_samples,
                                           window=window, seed=seed, duration_s=duration_s)
    if out is None:
        return spectrum
    import dataclasses

    from simulator.io.averagedfile import write_averaged_spectrum

    return dataclasses.replace(spectrum, path=write_averaged_spectrum(spectrum, out,
                                                                      overwrite=overwrite))


def master_records_to_files(system, seeds, out, *, overwrite=False, **options):
    """Master-equation trajectory records, one HDF5 file per seed (``out``, a list of paths).

    See :func:`simulator.master.trajectories.master_records` for ``options``.
    """
    from simulator.errors import InputError
    from simulator.io.recordfile import RecordFileWriter
    from simulator.master.trajectories import master_records

    out = list(out)
    if len(out) != len(seeds):
        raise InputError(f"{len(out)} output files for {len(seeds)} seeds; expected one each")

    def sink(plan, index):
        return RecordFileWriter(out[index], plan, overwrite=overwrite)

    return master_records(system, seeds, sink=sink, **options)
