"""Input the loader refuses or survives, beyond the bad-scenario corpus.

Deriving a scenario by path rebuilds only the section that holds the key;
it must accept and refuse exactly what a full reload does. Swept values are
checked once each, ranges and lists alike, with the key named on refusal.
"""

import copy

import pytest
from conftest import make_scenario, scenario_dict

from simulator.errors import ScenarioError
from simulator.scenario.loader import scenario_from_dict
from simulator.workflows.sweep import sweep_axes


def full_reload(scenario, path_parts, value, drop=None):
    """The scenario rebuilt from plain data with one key set (the slow, obvious way)."""
    data = copy.deepcopy(scenario.to_dict())
    node = data
    for part in path_parts[:-1]:
        node = node[part]
    node[path_parts[-1]] = value
    if drop:
        node.pop(drop)
    return scenario_from_dict(data, source=scenario.source)


def two_modes():
    base = scenario_dict()["mechanics"][0]
    return make_scenario(mechanics=[dict(base, name="a"), dict(base, name="b",
                                                                  frequency_hz=3e6)])


@pytest.mark.parametrize(("path", "parts", "value", "drop"), [
    ("mechanics[1].frequency_hz", ("mechanics", 1, "frequency_hz"), 4.5e6, None),
    ("mechanics[0].bath_temperature_k", ("mechanics", 0, "bath_temperature_k"), 0.3,
     "bath_occupation"),
    ("drive.detuning_hz", ("drive", "detuning_hz"), -1e6, None),
    ("detection.efficiency", ("detection", "efficiency"), 0.25, None),
])
def test_replace_by_path_equals_a_full_reload(path, parts, value, drop):
    s = two_modes()
    assert s.replace(path, value) == full_reload(s, parts, value, drop)


@pytest.mark.parametrize(("path", "value", "words"), [
    ("mechanics[1].name", "a", "used by an earlier mode"),  # a check across sections
    ("drive.power_w", 2e3, "at most 1000"),
    ("drive.detuning_hz", 3e15, "below the drive frequency"),
    ("cavity.external_linewidth_hz", 5e6, "larger than linewidth_hz"),
])
def test_replace_by_path_refuses_what_a_full_reload_refuses(path, value, words):
    s = two_modes()
    with pytest.raises(ScenarioError, match=words) as info:
        s.replace(path, value)
    assert info.value.key == path


def test_a_huge_integer_for_a_number_is_refused_as_not_finite():
    with pytest.raises(ScenarioError, match="not a finite number") as info:
        make_scenario(cavity={"linewidth_hz": 10**400})
    assert info.value.key == "cavity.linewidth_hz"


@pytest.mark.parametrize("spec", [
    [1.0, "two"], [True, 1.0], {"start": 0, "stop": 10**400, "num": 3},
    {"start": 1.0, "stop": 2.0, "num": 3, "unit": "scenario.name"},
])
def test_sweep_values_that_are_not_numbers_are_refused_naming_the_key(spec):
    with pytest.raises(ScenarioError) as info:
        make_scenario(sweep={"parameters": {"drive.detuning_hz": spec}})
    assert info.value.key == 'sweep.parameters."drive.detuning_hz"'


def test_each_distinct_swept_value_is_checked_and_the_bad_one_named():
    values = [1e-3, 1e-3, 2e3, 1e-3]  # 2 kW is beyond the 1 kW limit
    s = make_scenario(sweep={"parameters": {"drive.power_w": values}})
    with pytest.raises(ScenarioError, match="2000.0 is invalid") as info:
        sweep_axes(s)
    assert info.value.key == 'sweep.parameters."drive.power_w"'
