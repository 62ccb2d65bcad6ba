"""Checks and summaries of the command line that run before any work.

``check``'s summary of what a valid file holds beyond its mechanical modes, the
checks of output files and folders (a wrong extension, a folder that cannot take
a file, an existing file without ``--force``), and the checks of options that
override a scenario key (``--duration``, ``--seed``) or that a scenario would
ignore (a ``--duration`` beside a ``[schedule]``): each refusal names the option,
its value and what was expected, not the scenario file, which is not at fault.
"""

import os
from pathlib import Path

from simulator.errors import InputError
from simulator.io.files import refuse_existing
from simulator.scenario.tone_sections import detected_tone_names


def check_summary(scenario, points):
    """What ``check`` found beyond the mechanical modes, one line each: the tones and which
    are recorded, the cavity modes, a schedule, a sweep, a plan (so that a table left out
    or misplaced is seen before any run)."""
    if scenario.tones:
        recorded = ("the pair, at its mean frequency (a back-action-evading pair)"
                    if scenario.detection.backaction_evading
                    else ", ".join(detected_tone_names(scenario)))
        yield (f"tones: {', '.join(['drive', *(t.name for t in scenario.tones)])}; "
               f"recorded: {recorded}")
    if scenario.cavity_modes:
        yield f"cavity modes: cavity, {', '.join(m.name for m in scenario.cavity_modes)}"
    if scenario.schedule is not None:
        segments = scenario.schedule.segments
        yield (f"schedule: {len(segments)} segment(s), "
               f"{sum(seg.duration_s for seg in segments):g} s of record")
    if scenario.sweep is not None:
        yield (f"sweep: {points} points over {', '.join(scenario.sweep.parameters)} "
               f"({scenario.sweep.combine})")
    if scenario.plan is not None:
        yield (f"plan: {scenario.plan.objective} over "
               f"{', '.join(scenario.plan.parameters)}")


def require_in_key_range(option, value, section, key):
    """Refuse an option's value outside the range of the scenario key it overrides,
    naming the option (not the scenario file, which is not at fault)."""
    if value is None:
        return
    from simulator.scenario import schema
    from simulator.scenario.loader import Scenario

    cls = schema.field_kind(Scenario, section)[1]
    field = next(f for f in schema.public_fields(cls) if f.name == key)
    problem = schema.range_problem(field, schema.field_kind(cls, key)[1], value)
    if problem:
        raise InputError(f"{option} {problem}")


def require_no_duration_with_schedule(args, scenario):
    """A scheduled record lasts the sum of its segments: a --duration would be ignored."""
    if scenario.schedule is not None and args.duration is not None:
        total = sum(seg.duration_s for seg in scenario.schedule.segments)
        raise InputError(f"--duration {args.duration!r} with a [schedule]: a scheduled "
                         f"record lasts the sum of its segments' duration_s ({total:g} s "
                         "here); expected no --duration")


def require_output_file(path, allowed, option, force):
    """Refuse, before any work, an output file with the wrong extension, in a folder
    that cannot take it, or that exists (without ``--force``)."""
    if path is None:
        return
    if Path(path).suffix.lower() not in allowed:
        raise InputError(f"{option} {path!r} has extension {Path(path).suffix!r}; expected "
                         f"one of {', '.join(allowed)}")
    require_writable_folder(Path(path).parent or Path("."), option, path)
    refuse_existing(path, overwrite=force, option=option)


def require_writable_folder(folder, option, path):
    """Refuse ``folder`` (where ``option``'s ``path`` goes) unless a file can be made in it."""
    folder = Path(folder) if str(folder) else Path(".")
    for above in (folder, *folder.parents):  # the nearest part of the path that exists
        if above.exists():
            if not above.is_dir():
                raise InputError(f"{option} {str(path)!r}: {str(above)!r} is a file, not a "
                                 "folder; expected a path inside an existing, writable folder")
            break
    if not folder.is_dir() or not os.access(folder, os.W_OK | os.X_OK):
        raise InputError(f"{option} {str(path)!r}: folder {str(folder)!r} does not exist or "
                         "is not writable; expected an existing, writable folder")
    import tempfile

    try:  # the permission bits do not tell (root, a network share mapping root to nobody)
        with tempfile.TemporaryFile(dir=folder):
            pass
    except OSError as exc:
        raise InputError(f"{option} {str(path)!r}: folder {str(folder)!r} cannot take a file "
                         f"({exc.strerror or exc}); expected an existing, writable folder"
                         ) from None


def require_output_folder(path, option="--out"):
    """Refuse an output folder that cannot be created or written, before any work."""
    target = Path(path)
    if target.exists() and not target.is_dir():
        raise InputError(f"{option} {path!r} is a file; expected a folder (new or existing)")
    parent = target if target.exists() else target.parent
    require_writable_folder(parent, option, path)


def require_workers(args):
    """Refuse a ``--workers`` out of range before any work."""
    workers = getattr(args, "workers", None)
    if workers is not None:
        from simulator.workflows.tasks import checked_workers

        checked_workers(workers)


def require_record_options(args):
    """Refuse options of ``record`` that are out of range or that the chosen output
    would silently ignore."""
    if args.threads is not None and args.threads < 1:
        raise InputError(f"--threads {args.threads}: expected a positive number of threads")
    if args.threads is not None:
        from simulator.records.pipeline import checked_workers

        try:
            checked_workers(args.threads)
        except InputError as exc:  # the same limit, under the option's own name
            raise InputError(f"--threads {args.threads}: "
                             f"{str(exc).partition('; ')[2]}") from None
    require_in_key_range("--seed", args.seed, "scenario", "seed")
    require_in_key_range("--duration", args.duration, "record", "duration_s")
    if args.averaged is None and args.window is not None:
        raise InputError(f"--window {args.window}: expected it only with --averaged N "
                         "(it is the averaged periodogram's window)")
    unused = [name for name, given in (("--compress", args.compress),
                                       ("--threads", args.threads is not None),
                                       ("--form", args.form != "auto")) if given]
    if unused and args.averaged is not None:
        raise InputError(f"{', '.join(unused)} with --averaged: expected none of them (an "
                         "averaged spectrum is drawn from its law, not from time samples)")
    if unused and args.engine == "master":
        raise InputError(f"{', '.join(unused)} with --engine master: expected none of them "
                         "(they shape the linear engine's records)")


def require_master_with_tones(scenario, option, model, steady_only):
    """Refuse a master-equation run the scenario's tones rule out, naming the option.

    The full master equation holds one cavity mode in the drive's frame, where several
    tones beat at their spacing (no stationary state); the linearised one (one Hilbert
    factor per tone field, :mod:`simulator.master.tone_fields`) gives the steady state
    only (``steady_only``: what the command asks of it). A back-action-evading pair is
    held by neither.
    """
    if not scenario.tones:
        return
    names = ", ".join(["'drive'", *(repr(t.name) for t in scenario.tones)])
    if scenario.detection.backaction_evading:
        raise InputError(f"{option} with a back-action-evading pair: the master equation "
                         "does not hold the pair's model; expected the linear engine "
                         f"(leave out {option}), whose steady state is exact for it")
    if model == "full":
        hint = ("expected --master-model linearised (one field per tone) or the linear "
                "engine" if steady_only else "expected the linear engine (the default)")
        raise InputError(f"{option} with several drive tones ({names}): the full master "
                         "equation holds one cavity mode in the frame of the drive, where "
                         "the tones beat at their spacing (no stationary state); " + hint)
    if not steady_only:
        raise InputError(f"{option} --master-model linearised with several drive tones "
                         f"({names}): it gives the steady state only (`noisechain inspect "
                         "--master --master-model linearised`); expected the linear engine "
                         "(the default) for spectra and records")
