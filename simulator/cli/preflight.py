"""Checks and summaries of the command line that run before any work.

``check``'s summary of what a valid file holds beyond its mechanical modes, and
the checks of options that override a scenario key (``--duration``, ``--seed``)
or that a scenario would ignore (a ``--duration`` beside a ``[schedule]``): each
refusal names the option, its value and what was expected, not the scenario
file, which is not at fault.
"""

from simulator.errors import InputError
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
