"""The ``[schedule]`` section: a record made of segments with their own parameters.

    [schedule]
    start = "thermal"                     # or "steady", "occupation"
    [[schedule.segments]]
    name = "ring-down"
    duration_s = 0.02
    excite_phonons = 1e6                  # coherent kick of mode excite_mode at the start
    [schedule.segments.changes]
    "drive.power_w" = 0.0                 # cooling tone off
    [[schedule.segments]]
    name = "cooling"
    duration_s = 0.01                     # the file's own parameters: no changes

Every segment runs the scenario of the file with its ``changes`` applied
(parameter paths as in ``[sweep.parameters]``; each segment starts again from
the file's values, changes do not accumulate). The state is carried from one
segment to the next; the first segment starts in the state ``start`` names.
The engine is :mod:`simulator.records.protocol`.
"""

import dataclasses
import difflib
import math

from simulator.errors import ScenarioError
from simulator.scenario.paths import leaf_type
from simulator.scenario.schema import param
from simulator.scenario.sweep_section import ReadOnlyTable

STARTS = ("steady", "thermal", "occupation")
MAX_SEGMENTS = 1000  # segments in one schedule (more is almost surely a generated typo)
MAX_EXCITATION_PHONONS = 1e16  # coherent phonons of a kick: far beyond any linear device


def parse_changes(value, key, source):
    """Check ``[schedule.segments.changes]``: parameter path → one number; freeze it."""
    if not isinstance(value, dict):
        raise ScenarioError(f"{value!r} is not a table of changed parameters; expected "
                            "[schedule.segments.changes] mapping parameter paths to numbers",
                            source=source, key=key)
    for path, number in value.items():
        if isinstance(number, bool) or not isinstance(number, (int, float)) or not (
                math.isfinite(float(number))):
            raise ScenarioError(f"{number!r} is not a finite number; expected the "
                                "parameter's value in the segment", source=source,
                                key=f'{key}."{path}"')
    return ReadOnlyTable({path: float(v) for path, v in value.items()})


@dataclasses.dataclass(frozen=True, kw_only=True)
class Segment:
    """``[[schedule.segments]]``: one stretch of the record at fixed parameters."""

    name: str = param("name of the segment, for tables and figures", check="label",
                      default="segment")
    duration_s: float = param("length of the segment (rounded to whole samples)", unit="s",
                              check="positive", high=1e6)
    changes: dict | None = param(
        "parameter path → value in this segment (from the file's values; a drive power "
        "of 0 switches that drive off); left out: the file's values", parser=parse_changes,
        default=None,
        accepts='a table: parameter path = number, e.g. "drive.power_w" = 0.0')
    excite_mode: int = param("index of the mechanical mode kicked at the segment's start",
                             check="nonnegative", default=0, high=999)
    excite_phonons: float = param(
        "coherent phonon number |β|² added at the segment's start (a resonant kick along "
        "q, then released); 0: none", check="nonnegative", default=0.0,
        high=MAX_EXCITATION_PHONONS)


# Sections one record holds fixed: its digitiser (one sample rate, resolution and full
# scale, which a segment's change was silently ignored for) and what is not a parameter
# of the device at all.
FIXED_IN_A_RECORD = ("schedule", "sweep", "plan", "scenario", "record", "digitizer")


@dataclasses.dataclass(frozen=True, kw_only=True)
class Schedule:
    """``[schedule]``: the initial state and the ordered segments of a protocol record."""

    start: str = param(
        "state at the first sample: the steady state of the first segment, every "
        "mechanical mode thermal at its bath (the rest steady), or every mechanical mode "
        "thermal at start_occupation", choices=STARTS, default="steady")
    start_occupation: float = param(
        "thermal occupation of every mechanical mode at the first sample "
        '(start = "occupation")', check="nonnegative", default=0.0, high=1e12)
    truth_points: int = param("times per segment at which the exact truth is stored",
                              check="positive", default=64, low=2, high=100_000)
    segments: tuple[Segment, ...] = dataclasses.field(
        default=(), metadata={"doc": "the segments in time order, one table each"})

    def problems(self):
        """Cross-field checks: yields ``(key, message)`` for each inconsistency."""
        if not self.segments:
            yield ("segments", "no segment; expected one or more [[schedule.segments]] "
                   "tables, each with duration_s")
        if len(self.segments) > MAX_SEGMENTS:
            yield ("segments", f"{len(self.segments)} segments; expected at most "
                   f"{MAX_SEGMENTS}")
        if self.start != "occupation" and self.start_occupation != 0:
            yield ("start_occupation", f"{self.start_occupation!r} with start = "
                   f'"{self.start}"; expected it only with start = "occupation"')
        for i, segment in enumerate(self.segments):
            for path in segment.changes or {}:
                if path.split(".")[0] in FIXED_IN_A_RECORD:
                    yield (f'segments[{i}].changes."{path}"',
                           f"{path!r} cannot change within a record; expected a drive, "
                           "device, bath or detection parameter")


def segment_problems(scenario):
    """Cross-section checks of the schedule's paths and kicked modes: ``(key, message)``."""
    if scenario.schedule is None:
        return
    length = next(f for f in dataclasses.fields(scenario.record) if f.name == "duration_s")
    if scenario.record.duration_s != length.default:  # it would be ignored
        total = sum(seg.duration_s for seg in scenario.schedule.segments)
        yield ("record.duration_s", f"{scenario.record.duration_s!r} s with a [schedule]: a "
               "scheduled record lasts the sum of its segments' duration_s "
               f"({total:g} s here); expected record.duration_s left out")
    base = dataclasses.replace(scenario, schedule=None)  # no recursion into these checks
    for i, segment in enumerate(scenario.schedule.segments):
        where = f"schedule.segments[{i}]"
        if segment.excite_mode >= len(scenario.mechanics):
            yield (f"{where}.excite_mode", f"{segment.excite_mode!r} names no mode; expected "
                   f"an index below {len(scenario.mechanics)}, the number of [[mechanics]] "
                   "tables")
        for path, value in (segment.changes or {}).items():
            try:
                value_now = base.get(path)
                kind = leaf_type(type(base), base._canonical(path)[0], base.source)
            except ScenarioError as exc:
                close = difflib.get_close_matches(path, base.parameter_paths(), n=1)
                hint = f"; did you mean {close[0]!r}?" if close else (
                    "; expected a path such as 'drive.power_w'")
                yield f'{where}.changes."{path}"', exc.detail + hint
                continue
            except (KeyError, TypeError):  # a path through a structured value
                kind = None
            if kind not in (int, float) or isinstance(value_now, tuple):
                yield (f'{where}.changes."{path}"', f"{path!r} is not a numeric parameter; "
                       "expected a number such as 'drive.power_w'")
                continue
            try:
                base.replace(path, value)
            except ScenarioError as exc:
                yield f'{where}.changes."{path}"', exc.detail
