"""Benchmark: the planner with two free parameters (detuning and power of the microwave drum).

Prints, side by side in one run, the wall time and points evaluated of the
plan (coarse grid, then refinement), the coarse grid alone, and a brute-force
grid four times finer along each parameter, with the ratios and the objective
each finds. The target is a plan under 30 s on the project's two-core
machine. Run with `.venv/bin/python tests/benchmarks/bench_plan.py [objective]`
(objective: asymmetry_time, the default, occupation_error or occupation).
"""

import sys
import time
from pathlib import Path

import numpy as np

from simulator.scenario.loader import parse_scenario
from simulator.workflows.plan import base_of, evaluate_plan_point, plan_scenario

DRUM = (Path(__file__).resolve().parents[2] / "scenarios" / "drum_microwave_mK.toml").read_text()
PLAN = """
[plan]
objective = "{objective}"
[plan.parameters]
"drive.detuning_hz" = {{ start = -0.6, stop = 0.2, num = {n1}, unit = "mechanics[0].frequency_hz" }}
"drive.power_w" = {{ start = 1e-11, stop = 1e-8, num = {n2}, log = true }}
"""
COARSE = (17, 13)
FINE_FACTOR = 4


def _timed(function):
    t0 = time.perf_counter()
    value = function()
    return value, time.perf_counter() - t0


def main(objective="asymmetry_time"):
    scenario = parse_scenario(DRUM + PLAN.format(objective=objective, n1=COARSE[0],
                                                 n2=COARSE[1]))
    plan_scenario(parse_scenario(DRUM + PLAN.format(objective=objective, n1=2, n2=2)))  # warm
    result, t_plan = _timed(lambda: plan_scenario(scenario))
    coarse, t_coarse = _timed(lambda: plan_scenario(scenario, refine=False))
    base, plan = base_of(scenario), scenario.plan
    grids = [np.linspace(-0.6, 0.2, FINE_FACTOR * (COARSE[0] - 1) + 1) * 8e6,
             np.geomspace(1e-11, 1e-8, FINE_FACTOR * (COARSE[1] - 1) + 1)]

    def brute():
        best = np.inf
        for d in grids[0]:
            for p in grids[1]:
                out = evaluate_plan_point(base, plan, [("drive.detuning_hz", d),
                                                       ("drive.power_w", p)])
                if out.feasible:
                    best = min(best, out.objective)
        return best

    fine, t_fine = _timed(brute)
    n_fine = grids[0].size * grids[1].size
    print(f"objective {objective}, drum, two free parameters (detuning × power)")
    print(f"{'method':<34}{'points':>8}{'wall (s)':>11}{'objective':>14}")
    print(f"{'plan: coarse grid + refinement':<34}{result.found.evaluations:>8}"
          f"{t_plan:>11.2f}{result.found.best_outcome.objective:>14.5g}")
    print(f"{'coarse grid only':<34}{coarse.found.evaluations:>8}{t_coarse:>11.2f}"
          f"{coarse.found.best_outcome.objective:>14.5g}")
    print(f"{f'brute force, {FINE_FACTOR}x finer grid':<34}{n_fine:>8}{t_fine:>11.2f}"
          f"{fine:>14.5g}")
    print(f"plan / brute-force wall time: {t_plan / t_fine:.3f}; objective plan / brute "
          f"force: {result.found.best_outcome.objective / fine:.4f} (target: plan under 30 s, "
          f"{'met' if t_plan < 30 else 'NOT met'})")


if __name__ == "__main__":
    main(*sys.argv[1:2])
