"""Scenario loader: the bad-scenario corpus, round-trips, derivation by path.

Every file in ``tests/bad_scenarios/`` holds one deliberate mistake and says in
its header which error class it belongs to (``# class:``), which key path the
error must name (``# key:``) and which words the message must contain
(``# expect:``). Each is checked in Python (``ScenarioError``) and on the
command line (exit status 2, one paragraph on stderr, no traceback).
"""

import dataclasses
import math
from pathlib import Path

import pytest
from conftest import make_scenario, run_cli, scenario_dict
from hypothesis import given, settings
from hypothesis import strategies as st

from simulator.cli.parser import main
from simulator.errors import InputError, ScenarioError
from simulator.scenario.loader import (
    Scenario,
    load_scenario,
    parse_scenario,
    scenario_from_dict,
)

CORPUS = Path(__file__).parent / "bad_scenarios"
BAD_FILES = sorted(CORPUS.glob("*.toml"))

# The error classes the loader must report (docs/validation.md, its first row),
# each covered by at least one corpus file.
REQUIRED_CLASSES = {
    "unknown key", "unknown section", "missing key", "wrong type", "nan or inf",
    "not positive", "external linewidth > total", "exclusive keys", "malformed TOML",
    "duplicate mode names", "empty mechanics", "outside physical limits", "bad name",
    "non-numeric sweep", "scaled unit", "receiver keys",
}


def header(path):
    """The ``# class:``, ``# key:`` and ``# expect:`` lines of a corpus file."""
    cls, key, expect = None, None, []
    for line in path.read_text(encoding="utf-8").splitlines():
        if not line.startswith("#"):
            break
        tag, _, value = line[1:].strip().partition(": ")
        if tag == "class":
            cls = value
        elif tag == "key":
            key = None if value == "(none)" else value
        elif tag == "expect":
            expect.append(value)
    return cls, key, expect


def test_corpus_covers_every_error_class():
    classes = {header(p)[0] for p in BAD_FILES}
    assert REQUIRED_CLASSES <= classes, f"missing: {REQUIRED_CLASSES - classes}"
    for path in BAD_FILES:
        cls, _, expect = header(path)
        assert cls and expect, f"{path.name} has no '# class:' or '# expect:' header"


@pytest.mark.parametrize("path", BAD_FILES, ids=lambda p: p.stem)
def test_bad_scenario_raises_clear_error(path):
    _, key, expect = header(path)
    with pytest.raises(ScenarioError) as info:
        load_scenario(path)
    err = info.value
    message = str(err)
    assert err.source == str(path)
    assert message.startswith(str(path)), "the message must name the file first"
    assert err.key == key
    if key is not None:
        assert key in message
    for fragment in expect:
        assert fragment in message, f"{fragment!r} not in {message!r}"
    assert isinstance(err, InputError) and isinstance(err, ValueError)


def one_per_class():
    """First corpus file of each error class (run in a fresh interpreter)."""
    chosen = {}
    for path in BAD_FILES:
        chosen.setdefault(header(path)[0], path)
    return sorted(chosen.values())


def assert_clear_cli_error(code, out, err, path):
    _, key, expect = header(path)
    assert code == 2, err
    assert out == ""
    err = err.strip()
    assert "Traceback" not in err
    assert err, "an error must be explained on stderr"
    assert "\n\n" not in err, "one paragraph, not several"
    assert str(path) in err
    for fragment in expect + ([key] if key else []):
        assert fragment in err


@pytest.mark.parametrize("path", BAD_FILES, ids=lambda p: p.stem)
def test_bad_scenario_on_the_command_line_in_process(path, capsys):
    code = main(["check", str(path)])
    captured = capsys.readouterr()
    assert_clear_cli_error(code, captured.out, captured.err, path)


@pytest.mark.parametrize("path", one_per_class(), ids=lambda p: p.stem)
def test_bad_scenario_on_the_command_line(path):
    done = run_cli("check", path)
    assert_clear_cli_error(done.returncode, done.stdout, done.stderr, path)


def test_missing_file_is_input_error(tmp_path):
    missing = tmp_path / "nowhere.toml"
    with pytest.raises(ScenarioError, match="file not found"):
        load_scenario(missing)
    done = run_cli("check", missing)
    assert done.returncode == 2
    assert "nowhere.toml" in done.stderr and "Traceback" not in done.stderr


def test_unreadable_bytes_are_input_error(tmp_path):
    path = tmp_path / "latin1.toml"
    path.write_bytes(b"[scenario]\nname = \"caf\xe9\"\n")
    with pytest.raises(ScenarioError, match="cannot read"):
        load_scenario(path)


def test_good_file_checks_clean():
    done = run_cli("check", Path(__file__).parents[1] / "simulator" / "data" / "demo.toml")
    assert done.returncode == 0, done.stderr
    assert "trampoline" in done.stdout and done.stderr == ""


# -- values and types -------------------------------------------------------

def test_integer_accepted_where_float_expected():
    s = make_scenario(cavity={"linewidth_hz": 2_000_000, "external_linewidth_hz": 1})
    assert s.cavity.linewidth_hz == 2e6 and isinstance(s.cavity.linewidth_hz, float)


def test_zero_power_and_zero_temperature_allowed():
    s = make_scenario(drive={"power_w": 0},
                      mechanics={"bath_occupation": None, "bath_temperature_k": 0})
    assert s.drive.power_w == 0.0 and s.mechanics[0].bath_temperature_k == 0.0


def test_defaults_filled_in():
    data = scenario_dict()
    del data["detection"]
    s = scenario_from_dict(data)
    assert s.detection.scheme == "heterodyne" and s.detection.efficiency == 1.0
    assert s.drive.detuning_reference == "bare" and s.drive.bistable_branch == "lowest"
    assert s.cavity.bath_occupation == 0.0


def test_sections_are_frozen_and_keyword_only():
    s = make_scenario()
    with pytest.raises(dataclasses.FrozenInstanceError):
        s.drive.power_w = 1.0
    with pytest.raises(TypeError):
        type(s.cavity)(1e6, 0.5e6)


def test_carrier_frequency_from_wavelength():
    # f = c/λ with the exact SI speed of light (common practice).
    s = make_scenario(drive={"wavelength_m": 1550e-9})
    assert s.drive.carrier_frequency_hz == pytest.approx(299_792_458 / 1550e-9, rel=1e-15)
    s = make_scenario(drive={"wavelength_m": None, "frequency_hz": 6e9})
    assert s.drive.carrier_frequency_hz == 6e9


# -- round trip ---------------------------------------------------------------

def test_round_trip_base_and_demo():
    for s in (make_scenario(), load_scenario(Path(__file__).parents[1]
                                              / "simulator" / "data" / "demo.toml")):
        again = parse_scenario(s.to_toml())
        assert again == s
        assert again.to_toml() == s.to_toml()


# Values across the physical limits of each key (docs/scenario-reference.md).
finite = st.floats(min_value=1e-3, max_value=1e12, allow_nan=False, allow_infinity=False)
printable = st.characters(categories=("L", "M", "N", "P", "S"))


@settings(max_examples=40, deadline=None)
@given(kappa=finite, frac=st.floats(1e-3, 1.0),
       power=st.one_of(st.just(0.0), st.floats(1e-30, 1e3)),
       detuning=st.floats(-1e9, 1e9), freqs=st.lists(finite, min_size=1, max_size=4),
       use_temperature=st.booleans(), seed=st.integers(0, 2**62),
       name=st.text(printable, min_size=1, max_size=12))
def test_round_trip_exact(kappa, frac, power, detuning, freqs, use_temperature, seed, name):
    # tomli-w writes floats by repr, so every value must come back bit for bit.
    modes = []
    for i, f in enumerate(freqs):
        m = {"name": f"{name}{i}", "frequency_hz": f, "linewidth_hz": f * 1e-6,
             "effective_mass_kg": 1e-12, "coupling_hz": 10.0}
        m["bath_temperature_k" if use_temperature else "bath_occupation"] = 1e-6 + f * 1e-9
        modes.append(m)
    s = make_scenario(scenario={"name": name, "seed": seed},
                      drive={"power_w": power, "detuning_hz": detuning},
                      cavity={"linewidth_hz": kappa,
                              "external_linewidth_hz": max(kappa * frac, 1e-3)},
                      mechanics=modes)
    again = parse_scenario(s.to_toml())
    assert again == s
    assert again.cavity.external_linewidth_hz == s.cavity.external_linewidth_hz


def test_to_dict_omits_unset_exclusive_keys():
    data = make_scenario().to_dict()
    assert "frequency_hz" not in data["drive"] and "wavelength_m" in data["drive"]
    assert "bath_temperature_k" not in data["mechanics"][0]


# -- get and replace by path --------------------------------------------------

def test_get_by_path():
    s = make_scenario(mechanics=[
        {**scenario_dict()["mechanics"][0], "name": "a"},
        {**scenario_dict()["mechanics"][0], "name": "b", "frequency_hz": 3e6}])
    assert s.get("drive.power_w") == 1e-6
    assert s.get("mechanics[1].frequency_hz") == 3e6
    assert s.get("mechanics[0]").name == "a"
    assert len(s.get("mechanics")) == 2


@pytest.mark.parametrize("path", ["drive.powerw", "mechanics[3].frequency_hz",
                                  "nosuch", "drive[0]", "drive.power_w.x",
                                  "mechanics[x]", "drive..power_w", ""])
def test_get_bad_path(path):
    with pytest.raises(ScenarioError) as info:
        make_scenario().get(path)
    assert repr(path) in str(info.value)


def test_replace_leaves_original_alone():
    s = make_scenario()
    t = s.replace("drive.power_w", 2e-3)
    assert t.drive.power_w == 2e-3 and s.drive.power_w == 1e-6
    assert t.replace("drive.power_w", 1e-6) == s
    u = s.replace("mechanics[0].frequency_hz", 7e6)
    assert u.mechanics[0].frequency_hz == 7e6 and s.mechanics[0].frequency_hz == 20e6
    assert u.source == s.source


def test_replace_switches_exclusive_keys():
    s = make_scenario()
    t = s.replace("mechanics[0].bath_temperature_k", 4.0)
    assert t.mechanics[0].bath_temperature_k == 4.0 and t.mechanics[0].bath_occupation is None
    back = t.replace("mechanics[0].bath_occupation", 100.0)
    assert back == s
    f = s.replace("drive.frequency_hz", 2e14)
    assert f.drive.frequency_hz == 2e14 and f.drive.wavelength_m is None


def test_replace_revalidates():
    s = make_scenario()
    with pytest.raises(ScenarioError) as info:
        s.replace("cavity.external_linewidth_hz", 5e6)
    assert info.value.key == "cavity.external_linewidth_hz"
    with pytest.raises(ScenarioError) as info:
        s.replace("drive.power_w", math.nan)
    assert info.value.key == "drive.power_w" and "nan" in str(info.value)
    with pytest.raises(ScenarioError, match="did you mean 'power_w'"):
        s.replace("drive.powr_w", 1.0)


@pytest.mark.parametrize("path", ["mechanics[4].frequency_hz", "mechanics.frequency_hz",
                                  "mechanics[0]", "drive[0].power_w", "nosuch.key",
                                  "bad path"])
def test_replace_bad_path(path):
    with pytest.raises(ScenarioError):
        make_scenario().replace(path, 1.0)


def test_scenario_source_is_not_part_of_equality():
    a = scenario_from_dict(scenario_dict(), source="a.toml")
    b = scenario_from_dict(scenario_dict(), source="b.toml")
    assert a == b and a.source == "a.toml"
    assert isinstance(a, Scenario)


@pytest.mark.parametrize("make, expect", [
    (lambda p: p.write_bytes(b""), "the file is empty"),
    (lambda p: p.write_bytes(b" \n\t\n"), "the file is empty"),
    (lambda p: p.write_bytes(b"\x82\x00\xff junk"), "byte 0x82 at offset 0 is not UTF-8"),
    (lambda p: p.mkdir(), "is a folder; expected a scenario TOML file"),
], ids=["empty", "blank", "binary", "folder"])
def test_file_that_is_no_scenario_is_named_and_refused(tmp_path, capsys, make, expect):
    path = tmp_path / "given.toml"
    make(path)
    with pytest.raises(ScenarioError, match=expect):
        load_scenario(path)
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert str(path) in err and expect in err and err.count("\n") == 1


def test_endless_file_is_refused_after_a_bounded_read(monkeypatch):
    """/dev/zero never ends: reading it whole used to exhaust the memory."""
    import simulator.scenario.loader as loader

    monkeypatch.setattr(loader, "MAX_SCENARIO_BYTES", 2**20)
    with pytest.raises(ScenarioError, match="larger than 1 MiB"):
        load_scenario("/dev/zero")


@pytest.mark.parametrize("bits", [0, 1, 33])
def test_digitiser_bits_outside_two_to_32_name_the_same_limits(bits):
    """bits = 0 was refused as "expected a positive integer (> 0)", hiding that 1 is
    refused too; every value outside names the limits 2 to 32."""
    with pytest.raises(ScenarioError, match=rf"digitizer\.bits: {bits} is out of range; "
                       r"expected .*from 2 to 32"):
        make_scenario(digitizer={"bits": bits})


@pytest.mark.parametrize("section, path, records", [
    ("sweep", "scenario.seed", False), ("sweep", "scenario.seed", True),
    ("sweep", "record.duration_s", False), ("plan", "record.duration_s", False),
])
def test_varying_what_no_point_computes_is_refused(section, path, records):
    """A sweep over the seed or a record setting (without records) made every point the
    same: each point's record seed is spawned from the file's, and no record is made."""
    table = {"parameters": {path: [1, 2]}}
    if section == "sweep":
        table["records"] = records
    else:
        table["objective"] = "occupation"
    with pytest.raises(ScenarioError, match="changes no quantity") as info:
        make_scenario(**{section: table})
    assert info.value.key == f'{section}.parameters."{path}"'


def test_a_record_setting_may_be_swept_with_records():
    scenario = make_scenario(sweep={"records": True,
                                    "parameters": {"record.duration_s": [1e-4, 2e-4]}})
    assert scenario.sweep.records
