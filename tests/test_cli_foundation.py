"""Command line of the foundation: --help, check, inspect (text and --json), exit codes.

The numbers printed by ``inspect --json`` are compared with the Python API
(which the physics tests check against published formulas), so the CLI is
tested for faithful reporting, strict JSON and its exit statuses: 0 success,
2 bad input, 3 unstable operating point (DEVELOPERS.md, "Exit statuses").
"""

import json
import math
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
from conftest import DEMO, REPO, mode, run_cli, scenario_with_coupling

from simulator.cli.parser import main
from simulator.scenario.loader import load_scenario
from simulator.workflows.inspection import inspect_scenario

HEAVY = ("qutip", "numba", "matplotlib", "xarray", "h5py", "dask")

MODE_KEYS = {"name", "g_hz", "optical_damping_hz", "optical_spring_hz",
             "effective_frequency_hz", "effective_linewidth_hz", "bath_occupation",
             "occupation", "weak_coupling_occupation", "cooperativity"}
TOP_KEYS = {"photon_number", "cavity_occupation", "stable", "warnings", "modes"}


def strict_json(text):
    """Parse JSON, refusing NaN and ±Infinity (not JSON)."""
    def refuse(name):
        raise AssertionError(f"non-standard JSON constant {name}")
    return json.loads(text, parse_constant=refuse)


def write(tmp_path, scenario, name="case.toml"):
    path = tmp_path / name
    path.write_text(scenario.to_toml(), encoding="utf-8")
    return path


def cooled(g_ratio, n_th=1000.0):
    """Resolved-sideband cooling at Δ = −Ωm with g = g_ratio·κ (κ = 1 MHz)."""
    return scenario_with_coupling(g_hz=g_ratio * 1e6, detuning_hz=-20e6, modes=[
        mode("drum", frequency_hz=20e6, linewidth_hz=10.0, bath_occupation=n_th)])


def blue_unstable():
    return scenario_with_coupling(g_hz=2e4, detuning_hz=5e6, modes=[
        mode("drum", frequency_hz=5e6, linewidth_hz=20.0)])


# -- help and version --------------------------------------------------------------

def test_console_script_help():
    exe = shutil.which("noisechain") or str(Path(sys.executable).with_name("noisechain"))
    if not Path(exe).exists():
        pytest.fail("the noisechain console script is not installed (pip install -e .)")
    done = subprocess.run([exe, "--help"], capture_output=True, text=True, timeout=60)
    assert done.returncode == 0, done.stderr
    for verb in ("check", "inspect"):
        assert verb in done.stdout
    assert done.stdout.startswith("usage: noisechain")


def test_module_help_and_version():
    done = run_cli("--help")
    assert done.returncode == 0 and "inspect" in done.stdout
    from simulator import __version__

    done = run_cli("--version")
    assert done.returncode == 0 and __version__ in done.stdout


def test_no_verb_is_a_usage_error():
    done = run_cli()
    assert done.returncode == 2 and "Traceback" not in done.stderr


# -- inspect ----------------------------------------------------------------------

def test_inspect_json_keys_and_values(tmp_path):
    s = cooled(0.02)
    done = run_cli("inspect", write(tmp_path, s), "--json")
    assert done.returncode == 0, done.stderr
    data = strict_json(done.stdout)
    assert TOP_KEYS <= data.keys()
    assert data["stable"] is True
    report = inspect_scenario(s).to_dict()
    assert data["photon_number"] == pytest.approx(report["photon_number"], rel=1e-15)
    assert data["cavity_occupation"] == pytest.approx(report["cavity_occupation"], rel=1e-12)
    (entry,) = data["modes"]
    assert MODE_KEYS <= entry.keys()
    assert entry["name"] == "drum"
    assert entry["g_hz"] == pytest.approx(0.02e6, rel=1e-12)
    for key in MODE_KEYS - {"name"}:
        assert entry[key] == pytest.approx(report["modes"][0][key], rel=1e-12), key


def test_inspect_demo_text_and_json_agree(capsys):
    text = run_cli("inspect", DEMO)
    assert text.returncode == 0 and "Traceback" not in text.stderr
    assert main(["inspect", str(DEMO), "--json"]) == 0
    data = strict_json(capsys.readouterr().out)
    assert f"{data['photon_number']:.6g}" in text.stdout
    mode_data = data["modes"][0]
    assert f"mode {mode_data['name']}" in text.stdout
    for key in ("occupation", "weak_coupling_occupation", "effective_linewidth_hz"):
        assert f"{mode_data[key]:.6g}" in text.stdout


def test_json_has_no_infinities(tmp_path, capsys):
    # Zero bath occupation makes the quantum cooperativity C/n_th infinite:
    # the JSON must say null, not Infinity.
    s = cooled(0.01, n_th=0.0)
    assert main(["inspect", str(write(tmp_path, s)), "--json"]) == 0
    data = strict_json(capsys.readouterr().out)
    assert data["modes"][0]["quantum_cooperativity"] is None


@pytest.mark.parametrize("g_ratio", [0.005, 0.05, 0.1, 0.15, 0.2, 0.3])
def test_strong_coupling_warning_exactly_when_occupations_differ(g_ratio, tmp_path, capsys):
    # The warning must appear exactly when |weak − exact| > 10 % of exact
    # (docs/physics.md §11); the occupations come from the API, checked elsewhere.
    s = cooled(g_ratio)
    assert main(["inspect", str(write(tmp_path, s)), "--json"]) == 0
    data = strict_json(capsys.readouterr().out)
    m = data["modes"][0]
    differs = abs(m["weak_coupling_occupation"] - m["occupation"]) > 0.1 * m["occupation"]
    warned = [w for w in data["warnings"] if "drum" in w and "strong coupling" in w]
    assert bool(warned) == differs
    if g_ratio >= 0.2:
        assert differs  # the rate equation is far off by then (docs/physics.md §11)
    if g_ratio <= 0.05:
        assert not differs


def test_inspect_unstable_exit_3_with_growth_rate_and_cause(tmp_path, capsys):
    s = blue_unstable()
    path = write(tmp_path, s, "blue.toml")
    report = inspect_scenario(s)
    rate = report.stability.growth_rate_hz
    assert rate > 0
    done = run_cli("inspect", path)
    assert done.returncode == 3
    assert "Traceback" not in done.stderr
    assert "UNSTABLE" in done.stdout and "blue detuning" in done.stdout
    assert f"{rate:.6g} Hz" in done.stdout
    assert main(["inspect", str(path), "--json"]) == 3
    data = strict_json(capsys.readouterr().out)
    assert data["stable"] is False and data["growth_rate_hz"] == pytest.approx(rate, rel=1e-12)
    assert "Γm + Γopt < 0" in data["instability_cause"]
    assert data["cavity_occupation"] is None
    assert "occupation" not in data["modes"][0]


def test_inspect_bad_input_exit_2(tmp_path, capsys):
    bad = tmp_path / "bad.toml"
    bad.write_text("[scenario]\nname = 'x'\n", encoding="utf-8")
    assert main(["inspect", str(bad), "--json"]) == 2
    out = capsys.readouterr()
    assert out.out == "" and "missing required table 'drive'" in out.err
    assert str(bad) in out.err


def test_check_valid_file(tmp_path, capsys):
    path = write(tmp_path, cooled(0.01))
    assert main(["check", str(path)]) == 0
    assert "valid scenario" in capsys.readouterr().out
    assert load_scenario(path) == cooled(0.01)


# -- start-up stays light ---------------------------------------------------------

def test_cli_does_not_load_heavy_libraries():
    # --help, check and inspect must stay fast, so they must not import qutip,
    # numba, matplotlib (nor the file-format libraries): DEVELOPERS.md, "Set-up".
    code = (
        "import sys, contextlib, io\n"
        "from simulator.cli.parser import main\n"
        "with contextlib.redirect_stdout(io.StringIO()):\n"
        f"    main(['check', {str(DEMO)!r}])\n"
        f"    main(['inspect', {str(DEMO)!r}, '--json'])\n"
        f"    main(['inspect', {str(DEMO)!r}])\n"
        f"heavy = {HEAVY!r}\n"
        "print(sorted(m for m in sys.modules if m.split('.')[0] in heavy))\n")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          cwd=REPO, timeout=120)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "[]"


def test_demo_numbers_are_finite():
    data = inspect_scenario(load_scenario(DEMO)).to_dict()
    for key in ("photon_number", "cavity_occupation", "growth_rate_hz"):
        assert math.isfinite(data[key])


# -- messages a physicist reads at a glance ------------------------------------------

def blue_stable():
    """Blue of the cavity by Ωm, driven weakly: stable, but the light heats the mode."""
    return scenario_with_coupling(g_hz=2e2, detuning_hz=5e6, modes=[
        mode("drum", frequency_hz=5e6, linewidth_hz=20.0)])


def test_backaction_limit_outside_its_domain_is_not_applicable_with_why(tmp_path, capsys):
    # n_min = A+/(A− − A+) is the floor of sideband cooling and needs A− > A+
    # (Marquardt, Chen, Clerk, Girvin, PRL 99, 093902 (2007)); on the blue side
    # the formula gives a negative number, which must not be printed.
    s = blue_stable()
    report = inspect_scenario(s)
    ms = report.steady.modes[0]
    assert ms.stokes_rate_hz > ms.anti_stokes_rate_hz and ms.backaction_limit < 0
    text = report.to_text()
    assert "back-action limit n_min     not applicable (the Stokes rate" in text
    assert f"{ms.backaction_limit:.6g}" not in text
    assert main(["inspect", str(write(tmp_path, s)), "--json"]) == 0
    entry = strict_json(capsys.readouterr().out)["modes"][0]
    assert entry["backaction_limit"] is None
    assert "heats this mode" in entry["backaction_limit_not_applicable"]
    cooled_entry = inspect_scenario(cooled(0.01)).to_dict()["modes"][0]
    assert cooled_entry["backaction_limit"] > 0
    assert "backaction_limit_not_applicable" not in cooled_entry


def test_no_master_equation_advice_for_occupations_beyond_its_fock_space():
    # A thermal state of n quanta needs ≈ n ln(4/ε) Fock levels (geometric tail;
    # simulator.master.hilbert.displaced_thermal_cutoff): 1e8 phonons need ~1e9.
    hot = scenario_with_coupling(g_hz=1e3, detuning_hz=-20e6, modes=[
        mode("drum", frequency_hz=20e6, linewidth_hz=10.0, coupling_hz=500.0,
             bath_occupation=1e8)])
    regime = inspect_scenario(hot, feasibility=False).regime
    assert regime.level == "nonlinear"
    assert "the master equation: not applicable (" in regime.reason
    assert "inspect --master" not in regime.reason
    few = scenario_with_coupling(g_hz=1e3, detuning_hz=-20e6, modes=[
        mode("drum", frequency_hz=20e6, linewidth_hz=10.0, coupling_hz=2e5,
             bath_occupation=1.0)])
    verdict = inspect_scenario(few, feasibility=False).regime
    assert verdict.level == "nonlinear" and "inspect --master" in verdict.reason


@pytest.mark.parametrize(("sections", "words"), [
    # a 6.3 MHz drum written in Hz beside a 6 GHz circuit
    ({"mechanics": {"frequency_hz": 6.3, "linewidth_hz": 1e-4}},
     "was a value in MHz written in Hz? (6.3 MHz is frequency_hz = 6.3e+06)"),
    ({"mechanics": {"linewidth_hz": 5e6}}, "Q = frequency/linewidth = 4, below 10"),
    ({"mechanics": {"bath_occupation": None, "bath_temperature_k": 2e-5}},
     "was a value in mK written in K? (2e-05 mK is bath_temperature_k = 2e-08)"),
    ({"drive": {"power_w": 67.0}}, "67 W (48.26 dBm) at the port of a 6e+09 Hz circuit"),
    ({"electronics": {"amplifier_added_quanta": 12.0}},
     'set detection.receiver = "microwave"'),
    # a −20 MHz detuning and a 2 MHz cavity linewidth written in Hz
    ({"drive": {"detuning_hz": -20.0}},
     "was a value in MHz written in Hz? (-20 MHz is detuning_hz = -2e+07)"),
    ({"cavity": {"linewidth_hz": 2.0, "external_linewidth_hz": 1.0}},
     "(2 MHz is linewidth_hz = 2e+06)"),
])
def test_implausible_values_are_warned_with_what_looks_wrong(sections, words, tmp_path, capsys):
    from conftest import make_scenario

    drive = {"wavelength_m": None, "frequency_hz": 6e9, "power_w": 1e-10, "detuning_hz": -20e6}
    s = make_scenario(**{**sections, "drive": drive | sections.get("drive", {})})
    assert any(words in w for w in inspect_scenario(s, feasibility=False).warnings), words
    path = write(tmp_path, s)
    assert main(["check", str(path)]) == 0
    err = capsys.readouterr().err
    assert "noisechain check: warning:" in err and words in err
    assert main(["check", str(path), "--quiet"]) == 0  # --quiet hides progress, not warnings
    assert words in capsys.readouterr().err


def test_a_plausible_device_has_no_plausibility_warning():
    from simulator.scenario.plausibility import plausibility_warnings

    for path in sorted((REPO / "scenarios").glob("*.toml")):
        assert plausibility_warnings(load_scenario(path)) == (), path.name


def test_plot_into_a_path_under_a_file_says_the_file_is_not_a_folder(tmp_path, capsys):
    blocker = tmp_path / "outfile"
    blocker.write_text("not a folder", encoding="utf-8")
    for target in (blocker / "s.png", blocker / "deeper" / "s.png"):
        assert main(["spectrum", str(DEMO), "--plot", str(target)]) == 2
        err = capsys.readouterr().err
        assert f"{str(blocker)!r} is a file, not a folder" in err and "does not exist" not in err


@pytest.mark.parametrize("verb", ["check", "inspect", "spectrum", "record", "sweep", "trial",
                                  "run", "demo"])
def test_every_verb_accepts_quiet(verb):
    from simulator.cli.parser import build_parser

    needs = {"record": ["--out", "r.h5"], "sweep": ["--out", "d"], "run": ["--out", "d"],
             "trial": ["--out", "d", "--estimator", "m:f", "--trials", "1"]}
    argv = [verb] + ([] if verb == "demo" else ["x.toml"]) + needs.get(verb, []) + ["--quiet"]
    assert build_parser().parse_args(argv).quiet is True
