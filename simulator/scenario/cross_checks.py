"""Checks of a scenario across its sections: the record against the detection scheme,
and the paths a sweep or plan varies.

Called by :meth:`simulator.scenario.loader.Scenario.problems`; each yields
``(key, message)`` for every inconsistency, like the other section checks.
"""

import dataclasses
import difflib

from simulator.errors import ScenarioError
from simulator.scenario import pair_paths
from simulator.scenario.paths import leaf_type


def chain_problems(scenario):
    """The record kind and intermediate frequency against the detection scheme."""
    detection, kind = scenario.detection, scenario.record.kind
    if detection.scheme == "homodyne":
        if kind == "iq":
            yield ("record.kind", '"iq" is not available for homodyne, which measures '
                   'one quadrature; expected "if" (a real record) or leave it out')
        if detection.intermediate_frequency_hz != 0:
            yield ("detection.intermediate_frequency_hz",
                   f"{detection.intermediate_frequency_hz!r} Hz with homodyne, whose "
                   "local oscillator is at the drive frequency; expected 0")
    elif kind == "if" and detection.intermediate_frequency_hz == 0:
        yield ("detection.intermediate_frequency_hz",
               '0 Hz with an "if" heterodyne record; expected a positive intermediate '
               "frequency")


def varied_path_problems(scenario, path, swept, section="sweep"):
    """A path a ``[sweep]`` or ``[plan]`` varies (or uses as a unit) that names no single
    numeric parameter, or whose variation would change nothing computed."""
    key = f'{section}.parameters."{swept}"'
    try:
        value = scenario.get(path)
    except ScenarioError as exc:
        close = difflib.get_close_matches(path, scenario.parameter_paths(), n=1)
        hint = f"; did you mean {close[0]!r}?" if close else (
            "; expected a path such as 'drive.detuning_hz'")
        yield key, exc.detail + hint
        return
    if pair_paths.is_pair_path(path):
        return  # a back-action-evading pair's own number (simulator.scenario.pair_paths)
    if path.split(".")[0] in ("sweep", "plan", "schedule") or dataclasses.is_dataclass(
            value) or isinstance(value, tuple):
        yield key, f"{path!r} does not name a single scenario parameter"
    elif leaf_type(type(scenario), scenario._canonical(path)[0],
                   scenario.source) not in (int, float):
        role = "sweepable" if path == swept else "usable as the unit of a range"
        yield key, (f"{path!r} is not a numeric parameter, so it is not {role}; "
                    "expected a number such as 'drive.detuning_hz'")
    elif path == swept and changes_nothing_computed(path, section, scenario.sweep):
        yield key, (f"{path!r} changes no quantity the {section} computes (each point's "
                    "record seed is spawned from the file's scenario.seed, and a record "
                    "setting matters only to the records of `[sweep] records = true`), "
                    "so every point would be the same; expected a drive, device, bath "
                    "or detection parameter")


def changes_nothing_computed(path, section, sweep):
    """Whether varying ``path`` in a sweep or plan leaves every point the same: the seed
    (each point's is spawned from the file's), and a record setting without records."""
    root = path.split(".")[0]
    return root == "scenario" or (root == "record" and not (
        section == "sweep" and sweep is not None and sweep.records))
