"""The ``[sweep]`` section: which parameters to vary and how to combine them.

    [sweep]
    combine = "grid"                      # or "zip"
    [sweep.parameters]
    "drive.detuning_hz" = { start = -1.5, stop = 1.5, num = 61,
                            unit = "mechanics[0].frequency_hz" }
    "mechanics[0].bath_temperature_k" = [0.1, 1.0, 4.0]

Each entry maps a parameter path to a list of values or to a range table with
``start``, ``stop``, ``num`` and optionally ``log`` (logarithmic spacing) and
``unit`` (a path whose value in the base scenario multiplies the numbers, so
a detuning can be given in mechanical frequencies). The sweep engine is
:mod:`simulator.workflows.sweep`.
"""

import collections.abc
import dataclasses
import math

import numpy as np

from simulator.errors import ScenarioError
from simulator.scenario.schema import param

RANGE_KEYS = ("start", "stop", "num", "log", "unit")
MAX_POINTS = 1_000_000  # points in one sweep (a larger grid is almost surely a typo)


def _finite(number):
    """True for an int or float that a float holds as a finite number."""
    try:
        return math.isfinite(float(number))
    except OverflowError:  # an integer beyond the largest float
        return False


def _range_problem(spec):
    unknown = [k for k in spec if k not in RANGE_KEYS]
    if unknown:
        return (f"unknown key {unknown[0]!r} in a range; expected keys "
                + ", ".join(RANGE_KEYS))
    for k in ("start", "stop", "num"):
        if k not in spec:
            return f"a range needs {k!r}; expected {{start = .., stop = .., num = ..}}"
    for k in ("start", "stop"):
        v = spec[k]
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not _finite(v):
            return f"range {k} = {v!r} is not a finite number"
    num = spec["num"]
    if isinstance(num, bool) or not isinstance(num, int) or not 1 <= num <= MAX_POINTS:
        return f"range num = {num!r}; expected an integer from 1 to {MAX_POINTS}"
    if num == 1 and spec["start"] != spec["stop"]:  # linspace(start, stop, 1) is [start]
        return (f"range num = 1 from {spec['start']!r} to {spec['stop']!r}: only start would "
                "be used and stop ignored; expected num ≥ 2 to span the range (or a list "
                "of one value)")
    if not isinstance(spec.get("log", False), bool):
        return f"range log = {spec['log']!r}; expected true or false"
    if spec.get("log") and (spec["start"] <= 0 or spec["stop"] <= 0):
        return "a logarithmic range needs start > 0 and stop > 0"
    if "unit" in spec and not isinstance(spec["unit"], str):
        return f"range unit = {spec['unit']!r}; expected a parameter path as text"
    return None


class ReadOnlyTable(collections.abc.Mapping):
    """A read-only mapping that, unlike ``types.MappingProxyType``, pickles.

    Scenarios travel to worker processes (sweeps, trials), so every part of
    them must survive pickling.
    """

    __slots__ = ("_items",)

    def __init__(self, items):
        self._items = dict(items)

    def __getitem__(self, key):
        return self._items[key]

    def __iter__(self):
        return iter(self._items)

    def __len__(self):
        return len(self._items)

    def __repr__(self):
        return f"ReadOnlyTable({self._items!r})"

    def __reduce__(self):
        return (ReadOnlyTable, (self._items,))


def parse_parameters(value, key, source):
    """Check ``[sweep.parameters]`` and freeze it (read-only mappings)."""
    if isinstance(value, dict) and not value:
        raise ScenarioError(f"[{key}] is empty: nothing to vary; expected at least one "
                            'parameter path, e.g. "drive.power_w" = {start = 1e-9, stop = '
                            "1e-6, num = 7, log = true}", source=source, key=key)
    if not isinstance(value, dict):
        raise ScenarioError(f"{value!r} is not a table of parameters; expected "
                            f"[{key}] mapping parameter paths to a list of values or a "
                            "range table", source=source, key=key)
    for path in value:
        twin = path[: -len("_dbm")] + "_w" if path.endswith("_dbm") else None
        if twin in value:  # one power in two units: which would the point use?
            raise ScenarioError(f"both {twin!r} and {path!r} are varied: they are one power "
                                "in W and in dBm; expected exactly one of them",
                                source=source, key=f'{key}."{path}"')
    frozen = {}
    for path, spec in value.items():
        where = f'{key}."{path}"'
        if isinstance(spec, list):
            if not spec:
                raise ScenarioError("empty list of values; expected at least one",
                                    source=source, key=where)
            for v in spec:
                if isinstance(v, bool) or not isinstance(v, (int, float)) or not _finite(v):
                    raise ScenarioError(f"{v!r} is not a finite number; expected a list of "
                                        "numbers", source=source, key=where)
            frozen[path] = tuple(spec)
        elif isinstance(spec, dict):
            problem = _range_problem(spec)
            if problem:
                raise ScenarioError(problem, source=source, key=where)
            spec = dict(spec, start=float(spec["start"]), stop=float(spec["stop"]))
            frozen[path] = ReadOnlyTable(spec)
        else:
            raise ScenarioError(f"{spec!r} is neither a list of values nor a range table",
                                source=source, key=where)
    return ReadOnlyTable(frozen)


@dataclasses.dataclass(frozen=True, kw_only=True)
class Sweep:
    """``[sweep]``: parameters varied over a grid or element by element."""

    combine: str = param("how several swept parameters combine: every combination "
                         "(grid) or element by element (zip)", choices=("grid", "zip"),
                         default="grid")
    parameters: dict = param(
        "parameter path → list of values, or range {start, stop, num, log, unit}",
        parser=parse_parameters,
        accepts="a table: parameter path = [values] or {start, stop, num, log = false, "
                "unit = path}")

    records: bool = param(
        "also write a synthetic record at every stable point (DIR/records/<point>.h5; "
        "seeds spawned per point from scenario.seed)", default=False)
    spectra: bool = param(
        "also write the analytic spectrum at the cavity port (that of `noisechain spectrum "
        "--at cavity`, before the detection chain) at every stable point "
        "(DIR/spectra/<point>.nc)", default=False)

    def problems(self):
        """Cross-field checks: yields ``(key, message)`` for each inconsistency."""
        if self.combine == "grid":
            yield from grid_size_problems(self.parameters)
        if self.combine == "zip":
            lengths = {p: len(axis_numbers(spec)) for p, spec in self.parameters.items()}
            if len(set(lengths.values())) > 1:
                yield ("parameters", "zipped parameters need equal lengths; got "
                       + ", ".join(f"{p}: {n}" for p, n in lengths.items()))
            return
        for path, spec in self.parameters.items():  # a grid axis: each value once
            value, count = collections.Counter(axis_numbers(spec)).most_common(1)[0]
            if count > 1:
                yield (f'parameters."{path}"', f"{value!r} comes {count} times along this "
                       "grid axis (the same points computed again, a degenerate axis); "
                       "expected distinct values (a range with num > 1 needs start ≠ stop)")


def grid_size_problems(parameters, advice='split the sweep or use combine = "zip"'):
    """A grid of more than :data:`MAX_POINTS` points, refused before any value is checked
    (two axes of 10⁶ each passed the per-axis limit, then held `check` for minutes
    while each value was validated, on the way to a 10¹² point grid)."""
    sizes = {p: len(spec) if isinstance(spec, (tuple, list)) else spec["num"]
             for p, spec in parameters.items()}
    total = math.prod(sizes.values())
    if total > MAX_POINTS:
        yield ("parameters", f"the grid has {total} points ("
               + " × ".join(f"{n} {p}" for p, n in sizes.items())
               + f"); expected at most {MAX_POINTS} ({advice})")


def axis_numbers(spec):
    """The numbers of one swept parameter before any ``unit`` scaling."""
    if isinstance(spec, (tuple, list)):
        return list(spec)
    space = np.geomspace if spec.get("log", False) else np.linspace
    return [float(x) for x in space(spec["start"], spec["stop"], spec["num"])]
