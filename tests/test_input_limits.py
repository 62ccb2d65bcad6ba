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
    # zipped: a grid axis refuses a repeated value (the same points twice)
    s = make_scenario(sweep={"combine": "zip", "parameters": {"drive.power_w": values}})
    with pytest.raises(ScenarioError, match="2000.0 is invalid") as info:
        sweep_axes(s)
    assert info.value.key == 'sweep.parameters."drive.power_w"'


# --- powers in dBm -------------------------------------------------------------
# dBm is decibels relative to 1 mW, P[W] = 1e-3 · 10^(dBm/10) (Pozar, Microwave
# Engineering, 4th ed., Wiley (2012), its decibel conventions; from memory).
@pytest.mark.parametrize(("dbm", "watts"), [(0.0, 1e-3), (30.0, 1.0), (-30.0, 1e-6),
                                            (-67.0, 1e-3 * 10 ** -6.7)])
def test_a_power_in_dbm_is_the_same_scenario_as_in_watts(dbm, watts):
    in_dbm = make_scenario(drive={"power_w": None, "power_dbm": dbm})
    in_w = make_scenario(drive={"power_w": watts})
    assert in_dbm.drive.power_w == pytest.approx(watts, rel=1e-13)
    assert in_dbm.get("drive.power_dbm") == pytest.approx(dbm, abs=1e-9)
    lo = make_scenario(detection={"local_oscillator_power_dbm": dbm})
    assert lo.detection.local_oscillator_power_w == pytest.approx(watts, rel=1e-13)
    assert in_w.replace("drive.power_dbm", dbm).drive.power_w == pytest.approx(watts, rel=1e-13)


def test_a_power_in_both_units_is_refused_naming_both():
    with pytest.raises(ScenarioError, match="exactly one of power_w or power_dbm") as info:
        make_scenario(drive={"power_dbm": -30.0})
    assert "found both" in str(info.value) and info.value.key == "drive.power_dbm"


@pytest.mark.parametrize(("section", "key", "value", "words"), [
    ("drive", "power_dbm", 70.0, "70.0 dBm is 10000 W"),  # 10 W above the 1 kW limit
    ("drive", "power_dbm", "-30", "expected a finite number in dBm"),
    ("drive", "power_dbm", float("-inf"), "0 W has no dBm value"),
    ("detection", "local_oscillator_power_dbm", 40.0, "10 W; 10.0 is out of range"),
    ("drive", "power_dbm", -290.0, "rounding error"),  # a cross-field check, restated
])
def test_a_bad_dbm_value_is_refused_naming_the_dbm_key(section, key, value, words):
    data = {key: value} | ({"power_w": None} if section == "drive" else {})
    with pytest.raises(ScenarioError, match=words) as info:
        make_scenario(**{section: data})
    assert info.value.key == f"{section}.{key}"


def test_a_misspelt_dbm_key_is_pointed_to_the_dbm_key():
    with pytest.raises(ScenarioError, match="did you mean 'power_dbm'"):
        make_scenario(drive={"power_w": None, "power_dBm": -30.0})


def test_a_sweep_over_a_dbm_path_sets_the_watt_power():
    s = make_scenario(sweep={"parameters": {"drive.power_dbm": {"start": -40.0, "stop": -20.0,
                                                                "num": 3}}})
    (axis,) = sweep_axes(s)
    assert axis.values == (-40.0, -30.0, -20.0)
    watts = [s.replace(axis.path, v).drive.power_w for v in axis.values]
    assert watts == pytest.approx([1e-7, 1e-6, 1e-5], rel=1e-12)
    bad = make_scenario(sweep={"parameters": {"drive.power_dbm": [-30.0, 61.0]}})
    with pytest.raises(ScenarioError, match="61.0 dBm is 1258.9") as info:
        sweep_axes(bad)
    assert info.value.key == 'sweep.parameters."drive.power_dbm"'


# --- keys written in a scaled unit ---------------------------------------------
@pytest.mark.parametrize(("section", "key", "value", "advice"), [
    ("mechanics", "bath_temperature_mk", 12, "use bath_temperature_k = 0.012"),
    ("mechanics", "frequency_mhz", 8, "use frequency_hz = 8e+06"),
    ("mechanics", "frequency_MHz", 8, "use frequency_hz = 8e+06"),
    ("mechanics", "frequency_mHz", 8, "use frequency_hz = 0.008"),
    ("cavity", "linewidth_khz", 300, "use linewidth_hz = 300000"),
    ("drive", "detuning_ghz", -0.001, "use detuning_hz = -1e+06"),
    ("drive", "power_mw", 2, "use power_w = 0.002 (2 mW in W) or power_dbm = 3.0103"),
    ("drive", "power_uw", 1, "use power_w = 1e-06"),
    ("drive", "power_nw", 1, "or power_dbm = -60"),
    ("drive", "wavelength_nm", 1064, "use wavelength_m = 1.064e-06"),
    ("mechanics", "effective_mass_pg", 10, "use effective_mass_kg = 1e-14"),
    ("detection", "quadrature_angle_deg", 90, "use quadrature_angle_rad = 1.5708"),
    ("mechanics", "bath_temperature_mk", "cold", "use bath_temperature_k, in kelvin"),
])
def test_a_key_in_a_scaled_unit_names_the_si_key_and_the_converted_value(section, key, value,
                                                                          advice):
    data = scenario_dict()
    target = data[section][0] if section == "mechanics" else data[section]
    target[key] = value
    with pytest.raises(ScenarioError) as info:
        scenario_from_dict(data, source="<test>")
    assert advice in str(info.value), str(info.value)
    assert info.value.key.endswith(key)


def test_a_sweep_point_over_a_dbm_path_is_the_point_in_watts():
    from simulator.workflows.sweep import _axis_attrs, evaluate_point

    s = make_scenario(sweep={"parameters": {"drive.power_dbm": [-40.0, -30.0]}})
    text = s.to_toml()
    in_dbm = evaluate_point(text, (("drive.power_dbm", -30.0),))
    in_w = evaluate_point(text, (("drive.power_w", 1e-6),))
    assert not in_dbm.get("error") and not in_w.get("error")
    assert in_dbm["photon_number"] == pytest.approx(in_w["photon_number"], rel=1e-12)
    (axis,) = sweep_axes(s)
    assert _axis_attrs(axis)["units"] == "dBm"
