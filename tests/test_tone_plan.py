"""The planner and sweeps with each tone's power and detuning free, on the joint bound.

The two-probe drum (scenarios/drum_two_probes.toml) with the red probe's power
(in dBm) and the blue probe's detuning free, the objective the time of both
probes recorded together (simulator.analysis.joint_feasibility) and the summed
power of all tones capped: the planner's optimum is checked against a brute-force
grid of the same objective (an independent exhaustive search).
"""

import itertools
import pathlib
import warnings

import numpy as np
import pytest

from simulator.errors import ScenarioError
from simulator.scenario.loader import load_scenario, parse_scenario
from simulator.workflows.plan import evaluate_plan_point, plan_scenario

SCENARIO = pathlib.Path("scenarios/drum_two_probes.toml")
PLAN = """
[plan]
objective = "recorded_tones_time"
max_power_w = 1.6e-10
[plan.parameters]
"tones.red_probe.power_dbm" = { start = -84.0, stop = -72.0, num = 5 }
"tones.blue_probe.detuning_hz" = { start = 6.2e6, stop = 7.0e6, num = 5 }
"""


@pytest.fixture(scope="module")
def planned():
    return parse_scenario(SCENARIO.read_text() + PLAN, source=str(SCENARIO))


def test_named_tone_paths_reach_the_tone():
    scenario = load_scenario(SCENARIO)
    moved = scenario.replace("tones.blue_probe.power_dbm", -80.0)
    assert moved.tones[1].power_w == pytest.approx(1e-11)
    assert moved.get("tones.blue_probe.power_w") == moved.get("tones[1].power_w")
    assert scenario.replace("tones.red_probe.detuning_hz", -6.3e6).tones[0].detuning_hz == -6.3e6
    with pytest.raises(ScenarioError, match="no entry named 'green'.*'red_probe', 'blue_probe'"):
        scenario.replace("tones.green.power_w", 1e-12)


def test_planner_optimum_matches_a_brute_force_grid(planned):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # tone-spacing advisories at the grid's blue edge
        result = plan_scenario(planned, refine=True)
        plan = planned.plan
        powers = np.linspace(-84.0, -72.0, 7)
        detunings = np.linspace(6.2e6, 7.0e6, 5)
        brute = []
        for p, d in itertools.product(powers, detunings):
            out = evaluate_plan_point(planned, plan, [("tones.red_probe.power_dbm", p),
                                                      ("tones.blue_probe.detuning_hz", d)])
            if out.feasible:
                brute.append((out.objective, p, d))
    assert result.feasible
    best = result.found.best_outcome.objective
    grid_best = min(brute)
    print(f"planner {best:.4g} s at {result.found.best}, brute force {grid_best}")
    assert best <= grid_best[0] * (1 + 1e-3)
    # the summed power cap binds: the red probe holds what the drive and blue probe leave
    cap_dbm = 10 * np.log10((1.6e-10 - 1.2e-10 - 1.37e-11) / 1e-3)
    assert result.found.best[0] == pytest.approx(cap_dbm, abs=0.2)
    assert result.found.best[1] == pytest.approx(grid_best[2], abs=0.1e6)


def test_sweep_stores_the_joint_bound_of_the_recorded_tones(tmp_path):
    """A sweep of the two-probe drum stores the joint time and error of both probes
    recorded together (the planner's recorded_tones_time), equal to the direct bound,
    with units and a description; no back-action-evading variables."""
    from simulator.analysis.joint_feasibility import joint_bound
    from simulator.workflows.sweep import run_sweep

    sweep = '\n[sweep]\n[sweep.parameters]\n"tones.red_probe.power_dbm" = [-84.0, -78.0]\n'
    scenario = parse_scenario(SCENARIO.read_text() + sweep, source=str(SCENARIO))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # tone-spacing advisories
        ds = run_sweep(scenario, tmp_path / "s", workers=1, progress=False)
        direct = joint_bound(load_scenario(SCENARIO).replace("tones.red_probe.power_dbm", -78.0),
                             ("red_probe", "blue_probe"), 0)
    assert float(ds["recorded_tones_time_s"][1, 0]) == pytest.approx(direct.duration_s,
                                                                      rel=1e-12)
    assert float(ds["recorded_tones_error_1s"][1, 0]) == pytest.approx(
        direct.error_one_second, rel=1e-12)
    assert ds["recorded_tones_time_s"].attrs["units"] == "s"
    assert "together" in ds["recorded_tones_time_s"].attrs["description"]
    assert "x2_backaction_heating" not in ds
    # more red-probe power, more information: the joint time falls
    assert ds["recorded_tones_time_s"][1, 0] < ds["recorded_tones_time_s"][0, 0]
