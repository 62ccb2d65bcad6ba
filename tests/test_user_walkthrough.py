"""What a new user met on a first walk through the commands, kept fixed.

Each test pins one thing that read wrongly or misled: a figure's line that
looked like another, a label that claimed less than the number holds, a
value printed without its unit.
"""

from pathlib import Path

import numpy as np
import pytest

from simulator.linear.record_budget import digitiser_spectrum
from simulator.linear.spectra import heterodyne_spectrum
from simulator.model.system import System
from simulator.report import colours, plan_plots
from simulator.scenario.labels import axis_label
from simulator.scenario.loader import load_scenario
from simulator.workflows.plan import plan_scenario
from simulator.workflows.plan_text import plan_dict, plan_text

SCENARIOS = Path(__file__).resolve().parents[1] / "scenarios"


def test_every_term_of_the_drums_record_budget_is_drawn_its_own_way():
    """Colour = source, line = term: no two terms of one figure look the same.

    The detection efficiency's loss and the digitiser's two terms once drew
    in one colour and one line style, so the legend could not tell them apart.
    """
    drum = System(load_scenario(SCENARIOS / "drum_microwave_mK.toml"))
    names = list(digitiser_spectrum(drum, np.linspace(-1e7, 1e7, 41)).contributions)
    assert any(n.startswith("sampling: aliasing") for n in names)  # the chain's terms are there
    looks = [tuple(colours.term_style(n, names=names).values()) for n in names]
    assert len(set(looks)) == len(looks), list(zip(names, looks, strict=True))


def test_the_cavity_port_spectrum_says_it_carries_the_detection_efficiency():
    """S = 1 + η N_out: the excess scales with η, and the label says η is in it."""
    system = System(load_scenario(SCENARIOS / "drum_microwave_mK.toml"))
    f = np.array([-8.0e6, 0.0, 8.0e6])
    full = heterodyne_spectrum(system, f, efficiency=1.0)
    lossy = heterodyne_spectrum(system, f, efficiency=0.25)
    assert lossy.total - 1.0 == pytest.approx(0.25 * (full.total - 1.0), rel=1e-12)
    assert "detection efficiency" in lossy.quantity and "cavity port" in lossy.quantity


def test_plan_axes_and_powers_in_dbm_read_as_quantities():
    assert plan_plots._label({"path": "drive.detuning_hz",
                              "unit": "mechanics[0].frequency_hz"}) == "drive detuning Δ / Ωm"
    assert plan_plots._label({"path": "drive.power_w", "unit": None}) == "drive power P (W)"
    assert axis_label("drive.power_dbm") == "drive power (dBm)"


@pytest.fixture(scope="module")
def drum_plan():
    """The bundled drum's plan on its coarse grid, as plain data."""
    return plan_dict(plan_scenario(load_scenario(SCENARIOS / "drum_microwave_plan.toml"),
                                   refine=False))


def test_the_plans_optimum_leads_the_run_reports_answer(drum_plan):
    from simulator.workflows.run import _plan_best

    (criterion, where, value), = _plan_best(drum_plan)
    assert criterion.startswith("plan: time to resolve the sideband asymmetry")
    assert where.startswith("drive detuning Δ / Ωm = ")
    assert "drive detuning Δ/2π (Hz) = " in where and "drive power P (W) = " in where
    assert value == f"{drum_plan['optimum']['objective']:.4g} s"
    assert _plan_best(dict(drum_plan, feasible=False)) == []


def test_the_plans_flatness_lines_give_their_values_with_units(drum_plan):
    text = plan_text(drum_plan)
    flat = [line for line in text.splitlines() if "flatness:" in line]
    assert flat, text
    for line in flat:
        unit = "Hz)" if "detuning_hz" in line else "W)"
        assert unit + ": objective" in line, line


def test_the_reference_estimator_reads_averaged_spectra_too():
    """`trial --averaged N` with the bundled reference once failed every trial.

    The anti-Stokes area of a synthetic averaged spectrum (one second of the
    4 K membrane) must give back the Lyapunov occupation within its stated
    error: the two are independent computations (the fit against the
    steady-state covariance).
    """
    from simulator.analysis.reference import sideband_thermometry
    from simulator.linear.steady_state import steady_state
    from simulator.workflows.estimator import public_view
    from simulator.workflows.record import simulate_averaged_spectrum

    system = System(load_scenario(SCENARIOS / "membrane_4k.toml"))
    spectrum = simulate_averaged_spectrum(system, segment_samples=4096, seed=7,
                                          duration_s=1.0)
    found = sideband_thermometry(public_view(spectrum))
    value, error = found["occupation:anti_stokes_area"]
    truth = steady_state(system).modes[0].occupation
    assert 0 < error < 0.05 * truth
    assert abs(value - truth) < 4 * error, (value, error, truth)


def test_a_dbm_level_in_a_watt_range_is_refused_with_the_twin_key(tmp_path):
    from conftest import run_cli

    drum = (SCENARIOS / "drum_microwave_mK.toml").read_text()
    path = tmp_path / "plan.toml"
    path.write_text(drum + '\n[plan]\n[plan.parameters]\n'
                    '"drive.power_w" = { start = -67, stop = -50, num = 5 }\n')
    done = run_cli("check", path)
    assert done.returncode == 2 and "Traceback" not in done.stderr
    assert 'plan.parameters."drive.power_w"' in done.stderr
    assert "a level in dBm? vary 'drive.power_dbm' instead" in done.stderr


def test_a_plan_nothing_satisfies_exits_with_the_documented_status(tmp_path):
    """README: exit status 3 for plan means no point satisfies the constraints."""
    from conftest import run_cli

    assert "3 unstable operating point\n(for `plan`: no point satisfies the constraints)" \
        in (SCENARIOS.parent / "README.md").read_text()
    drum = (SCENARIOS / "drum_microwave_mK.toml").read_text()
    path = tmp_path / "plan.toml"
    path.write_text(drum + '\n[plan]\nmax_power_w = 1e-12\n[plan.parameters]\n'
                    '"drive.power_w" = { start = 1e-11, stop = 1e-8, num = 3, log = true }\n')
    done = run_cli("plan", path, "--no-refine")
    assert done.returncode == 3, done.stderr
    assert "no feasible point: max_power_w excludes every one" in done.stdout


def test_an_averaged_spectrum_says_how_long_a_record_it_stands_for(tmp_path):
    from conftest import run_cli

    done = run_cli("record", SCENARIOS / "drum_microwave_mK.toml", "--out",
                   tmp_path / "a.h5", "--averaged", "4096", "--duration", "2")
    assert done.returncode == 0, done.stderr
    # 2 s at the drum's automatic 8e7 samples/s
    assert done.stdout.startswith("averaged spectrum of 2 s of record (1.6e+08 samples, iq, ")


def test_plan_without_a_plan_points_to_an_example_that_exists():
    import re

    from simulator.errors import ScenarioError
    from simulator.workflows.plan import check_plan

    with pytest.raises(ScenarioError) as refused:
        check_plan(load_scenario(SCENARIOS / "membrane_4k.toml"))
    named = re.findall(r"(scenarios/\S+\.toml|docs/\S+\.md)", refused.value.detail)
    assert len(named) == 2
    for path in named:
        assert (SCENARIOS.parent / path).exists(), path
    assert load_scenario(SCENARIOS.parent / named[0]).plan is not None


def test_a_homodyne_records_budget_is_quoted_on_the_mechanical_line():
    """It was quoted mid-band, where the homodyne record has no line at all."""
    from simulator.workflows.spectrum import compute_spectrum, reference_frequency

    result = compute_spectrum(System(load_scenario(
        SCENARIOS / "microtoroid_room_temperature.toml")))
    spectrum, line = result.spectrum, result.summary[0].anti_stokes
    assert spectrum.sided == "one-sided"
    k = reference_frequency(result)
    assert abs(spectrum.frequency_hz[k] - abs(line.frequency_hz)) < line.linewidth_hz
    assert spectrum.total[k] > 0.9 * spectrum.total.max()  # the thermal line is the peak


def test_the_trial_report_says_why_nothing_is_tested_with_few_trials():
    from types import SimpleNamespace

    from simulator.report.trial_report import _tests_in_words

    untested = SimpleNamespace(quantities=[SimpleNamespace(level=None)] * 2)
    tested = SimpleNamespace(quantities=[SimpleNamespace(level=0.0025),
                                         SimpleNamespace(level=None)])
    assert "No quantity is tested yet" in _tests_in_words(untested)
    assert "—" not in _tests_in_words(untested)
    assert "two-sided level of 0.0025 per quantity" in _tests_in_words(tested)


def test_a_record_larger_than_the_free_space_is_refused_before_any_work(tmp_path):
    """`--duration 1e6` on the drum once began a 10¹⁴-sample file and filled the disk."""
    import shutil

    from conftest import run_cli

    free = shutil.disk_usage(tmp_path).free
    seconds = 2 * free / (4 * 8e7)  # int16 I and Q at the drum's 8e7 samples/s: twice the room
    done = run_cli("record", SCENARIOS / "drum_microwave_mK.toml", "--out", tmp_path / "r.h5",
                   "--duration", f"{seconds:.6g}", "--quiet")
    assert done.returncode == 2, done.stderr
    assert "GB free; expected a shorter --duration" in done.stderr
    assert "Traceback" not in done.stderr
    assert not list(tmp_path.iterdir())  # nothing written, no temporary file left


def test_an_integration_time_beyond_a_day_says_why_and_where_to_look():
    """The bundled drum needs ~10⁷ s at its own point: inspect says a weak sideband sets it
    and points to the planner; a time under a day gets no such note."""
    from simulator.workflows.inspection import LONG_INTEGRATION_S, inspect_scenario

    root = Path(__file__).resolve().parents[1] / "scenarios"
    long = inspect_scenario(System(load_scenario(root / "drum_microwave_mK.toml")))
    assert long.to_dict()["feasibility"][0]["asymmetry_time_s"] > LONG_INTEGRATION_S
    assert "noisechain plan" in long.to_text() and "more than a day" in long.to_text()
    short = inspect_scenario(System(load_scenario(root / "membrane_4k.toml")))
    assert short.to_dict()["feasibility"][0]["asymmetry_time_s"] < LONG_INTEGRATION_S
    assert "more than a day" not in short.to_text()
