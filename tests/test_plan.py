"""The planner: optimum against brute-force fine grids, a closed form, active constraints.

Two invented devices, built on the bundled scenarios: the SiN membrane at
4.2 K (optical) and the aluminium drum at 25 mK (microwave). The closed form
is the weak-signal asymmetry time of docs/analysis.md ("The best operating
point"), derived from the sideband rates of Marquardt et al., PRL 99, 093902
(2007) and Wilson-Rae et al., PRL 99, 093901 (2007), with the heterodyne
sideband areas of Weinstein et al., PRX 4, 041003 (2014).
"""

import json
import math
from pathlib import Path

import numpy as np
import pytest
from conftest import run_cli

from simulator.analysis.planner import Coordinate, Outcome, grid_flags, search
from simulator.cli.parser import main
from simulator.errors import ScenarioError
from simulator.linear.steady_state import steady_state
from simulator.model.chain import record_sample_rate
from simulator.model.system import System
from simulator.scenario.loader import load_scenario, parse_scenario
from simulator.workflows.plan import base_of, evaluate_plan_point, plan_scenario

SCENARIOS = Path(__file__).resolve().parents[1] / "scenarios"
MEMBRANE = (SCENARIOS / "membrane_4k.toml").read_text()
DRUM = (SCENARIOS / "drum_microwave_mK.toml").read_text()


def _with_plan(text, plan):
    return parse_scenario(text + "\n" + plan)


def _brute_force(scenario, grids):
    """Best feasible objective and its values over the product of ``grids`` (fine grid)."""
    base, plan = base_of(scenario), scenario.plan
    paths = list(plan.parameters)
    best = (math.inf, None)
    for values in np.stack(np.meshgrid(*grids, indexing="ij"), -1).reshape(-1, len(grids)):
        out = evaluate_plan_point(base, plan, list(zip(paths, values, strict=True)))
        if out.feasible and out.objective < best[0]:
            best = (out.objective, tuple(values))
    return best


def _check_against_fine_grid(scenario, fine):
    result = plan_scenario(scenario)
    assert result.feasible
    found = result.found
    best_fine, _ = _brute_force(scenario, fine)
    # the refined optimum is at least as good as every point of the much finer grid
    assert found.best_outcome.objective <= best_fine * 1.005
    # ... and it is a real point: evaluated again, feasible with the same objective
    again = evaluate_plan_point(base_of(scenario), scenario.plan,
                                list(zip(scenario.plan.parameters, found.best, strict=True)))
    assert again.feasible and again.objective == pytest.approx(found.best_outcome.objective)
    # the optimum hugs a constraint's boundary, which a grid straddles: the refinement
    # gains at most what one fine cell is worth
    assert found.best_outcome.objective >= 0.8 * best_fine
    return result


def test_membrane_lowest_occupation_against_fine_grid():
    scenario = _with_plan(MEMBRANE, """
[plan]
objective = "occupation"
[plan.parameters]
"drive.detuning_hz" = { start = -1.6, stop = -0.4, num = 9, unit = "mechanics[0].frequency_hz" }
"drive.power_w" = { start = 1e-6, stop = 1e-3, num = 9, log = true }
""")
    fine = [np.linspace(-1.6, -0.4, 31) * 1.2e6, np.geomspace(1e-6, 1e-3, 31)]
    result = _check_against_fine_grid(scenario, fine)
    # high power is closed off by bistability, which therefore binds
    assert "bistability_margin" in result.found.active


def test_drum_asymmetry_time_against_fine_grid():
    scenario = _with_plan(DRUM, """
[plan]
objective = "asymmetry_time"
[plan.parameters]
"drive.detuning_hz" = { start = -0.6, stop = 0.2, num = 9, unit = "mechanics[0].frequency_hz" }
"drive.power_w" = { start = 1e-11, stop = 1e-9, num = 7, log = true }
""")
    fine = [np.linspace(-0.6, 0.2, 17) * 8e6, np.geomspace(1e-11, 1e-9, 15)]
    _check_against_fine_grid(scenario, fine)


def _weak_signal_time(system, significance=5.0, sampled=True):
    """T = z² π γ [1/a₋² + 1/a₊² + 1/((a₋ n)² + (a₊ (n+1))²)], floor 1 (docs/analysis.md).

    ``sampled``: for the record's integrate-and-dump samples, whose lines at ±Ωm
    from the drive keep sinc²(Ωm/fs) of their height over the white floor.
    """
    s, p = system.scenario, system.point
    k, kex, eta = s.cavity.linewidth_hz, s.cavity.external_linewidth_hz, s.detection.efficiency
    g, om, det = p.modes[0].coupling_rate_hz, p.modes[0].frequency_hz, p.detuning_effective_hz
    # anti-Stokes (A₋) and Stokes (A₊) scattering rates, Marquardt et al. (2007) Eq. (3)
    rate = {sign: g**2 * k / (k**2 / 4 + (det + sign * om) ** 2) for sign in (1, -1)}
    a_minus, a_plus = (eta * kex / k * 2 * np.pi * rate[s] for s in (1, -1))
    if sampled:
        kept = np.sinc(om / record_sample_rate(s, system.chain)) ** 2
        a_minus, a_plus = a_minus * kept, a_plus * kept
    mode = steady_state(system).modes[0]
    n, width = mode.occupation, mode.effective_linewidth_hz
    cross = (a_minus * n) ** 2 + (a_plus * (n + 1)) ** 2
    return significance**2 * np.pi * width * (1 / a_minus**2 + 1 / a_plus**2 + 1 / cross)


# shot-noise-limited receiver (no amplifier) and a weak signal (low efficiency and power)
# (an ideal heterodyne receiver: the optical description, which allows no added noise)
WEAK_DRUM = DRUM.replace("amplifier_added_quanta = 12.0", "amplifier_added_quanta = 0.0").replace(
    "efficiency = 0.6 ", "efficiency = 0.01").replace("power_w = 2e-10 ", "power_w = 1e-16"
    ).replace('receiver = "microwave"', 'receiver = "optical"').replace(
    "amplifier_gain_db = 70.0", "").replace("impedance_ohm = 50.0", "")


def test_closed_form_optimum_of_the_asymmetry_time():
    # the optimum detuning is the cavity resonance, Δ* = 0 up to O(C κ²/Ωm²)
    scenario = _with_plan(WEAK_DRUM, """
[plan]
[plan.parameters]
"drive.detuning_hz" = { start = -0.27, stop = 0.33, num = 21, unit = "mechanics[0].frequency_hz" }
""")
    assert scenario.detection.efficiency == 0.01 and scenario.drive.power_w == 1e-16
    result = plan_scenario(scenario)
    (detuning,) = result.found.best
    kappa = scenario.cavity.linewidth_hz
    assert abs(detuning) < 0.05 * kappa  # the grid's nearest points are 0.8 κ away
    at_resonance = System(base_of(scenario).replace("drive.detuning_hz", 0.0))
    assert result.found.best_outcome.objective == pytest.approx(
        _weak_signal_time(at_resonance), rel=5e-3)
    assert result.found.active == ()  # an interior optimum
    assert result.found.at_bounds == ()
    # the flatness probes (Δ* ± 10 % of the range, Δ* being ~0) follow the closed form
    best = result.found.best_outcome.objective
    for probe in result.found.flatness:
        there = System(base_of(scenario).replace("drive.detuning_hz", probe.value))
        assert probe.ratio > 1 and probe.ratio == pytest.approx(
            _weak_signal_time(there) / best, rel=0.01)


def test_closed_form_matches_the_fisher_bound_in_the_weak_signal_limit():
    for detuning, power in ((-4e6, 1e-15), (-8e6, 1e-13), (2e6, 1e-16), (0.0, 1e-16)):
        system = System(parse_scenario(WEAK_DRUM).replace("drive.detuning_hz", detuning).replace(
            "drive.power_w", power))
        from simulator.analysis.feasibility import asymmetry_time

        assert asymmetry_time(system).duration_s == pytest.approx(
            _weak_signal_time(system), rel=0.01)
        assert asymmetry_time(system, sample_rate_hz=math.inf).duration_s == pytest.approx(
            _weak_signal_time(system, sampled=False), rel=0.01)


DRUM_POWER_PLAN = """
[plan]
max_power_w = {max_power}
[plan.parameters]
"drive.power_w" = {{ start = 1e-13, stop = 1e-10, num = 7, log = true }}
"""


def test_max_power_binds_when_the_objective_improves_with_power():
    # on the red sideband of the resolved drum the asymmetry time falls with power
    scenario = _with_plan(DRUM, DRUM_POWER_PLAN.format(max_power=3e-11))
    result = plan_scenario(scenario)
    (power,) = result.found.best
    assert power == pytest.approx(3e-11, rel=5e-3)
    assert result.found.active == ("max_power_w",)
    assert result.found.at_bounds == ()
    # the limit above the range: nothing binds, the optimum sits on the range's bound
    free = plan_scenario(_with_plan(DRUM, DRUM_POWER_PLAN.format(max_power=1.0)))
    assert free.found.active == ()
    assert free.found.at_bounds == ("drive.power_w",)
    assert free.found.best[0] == pytest.approx(1e-10)
    assert free.found.best_outcome.objective < result.found.best_outcome.objective


def test_no_feasible_point_names_the_constraint():
    scenario = _with_plan(DRUM, DRUM_POWER_PLAN.format(max_power=1.0).replace(
        "[plan]", "[plan]\nmax_photon_number = 10"))
    result = plan_scenario(scenario)
    assert not result.feasible
    assert "max_photon_number excludes every one of the 7 points" in result.found.message
    assert "max_photon_number" in result.to_text()


def test_heating_raises_the_bath_temperature_with_the_photon_number():
    scenario = _with_plan(MEMBRANE, """
[plan]
objective = "occupation"
heating_per_photon_k = 1e-6
[plan.parameters]
"drive.power_w" = [1e-6, 1e-5]
""")
    base = base_of(scenario)
    for power in (1e-6, 1e-5):
        out = evaluate_plan_point(base, scenario.plan, [("drive.power_w", power)])
        photons = out.quantities["photon_number"]
        assert out.quantities["bath_temperature_k"] == pytest.approx(4.2 + 1e-6 * photons)
        cold = evaluate_plan_point(base, dataclass_replace(scenario.plan), [
            ("drive.power_w", power)])
        assert out.objective > cold.objective  # a hotter bath, a hotter mode


def dataclass_replace(plan):
    import dataclasses

    return dataclasses.replace(plan, heating_per_photon_k=0.0)


def test_circulating_power_heating_needs_the_free_spectral_range():
    with pytest.raises(ScenarioError, match="free_spectral_range_hz"):
        _with_plan(MEMBRANE, '[plan]\nheating_k_per_w = 1.0\n[plan.parameters]\n'
                   '"drive.power_w" = [1e-6]\n')


@pytest.mark.parametrize(("plan", "match"), [
    ('[plan]\n[plan.parameters]\n"drive.powr_w" = [1e-6]\n', "did you mean 'drive.power_w'"),
    ('[plan]\nmode = 4\n[plan.parameters]\n"drive.power_w" = [1e-6]\n', "names no mode"),
    ('[plan]\n[plan.parameters]\n"drive.power_w" = { start = 1, stop = 2e3, num = 3 }\n',
     "bound value"),
])
def test_bad_plans_are_refused_with_the_key(plan, match):
    with pytest.raises(ScenarioError, match=match) as caught:
        scenario = _with_plan(MEMBRANE, plan)
        plan_scenario(scenario)
    assert "plan." in str(caught.value)


def test_asymmetry_objective_needs_heterodyne():
    homodyne = MEMBRANE.replace('scheme = "heterodyne"', 'scheme = "homodyne"')
    scenario = _with_plan(homodyne, '[plan]\n[plan.parameters]\n"drive.power_w" = [1e-6]\n')
    with pytest.raises(ScenarioError, match="needs heterodyne"):
        plan_scenario(scenario)


def test_feasibility_objectives_with_several_tones_read_the_detected_tone():
    """With [[tones]] every objective is evaluated through the detected tone's receiver
    (here the drive's): the plan's objective equals the bound computed directly."""
    from simulator.analysis.feasibility import asymmetry_time, occupation_bound

    tone = '[[tones]]\nname = "probe"\npower_w = 1e-7\ndetuning_hz = 1.5e6\n'
    for objective in ("asymmetry_time", "occupation_error", "occupation"):
        scenario = _with_plan(MEMBRANE, f'[plan]\nobjective = "{objective}"\n'
                              '[plan.parameters]\n"drive.power_w" = [1e-6]\n' + tone)
        found = plan_scenario(scenario, refine=False).found
        assert math.isfinite(found.best_outcome.objective) and found.best_outcome.objective > 0
        if objective == "asymmetry_time":
            system = System(base_of(scenario).replace("drive.power_w", 1e-6))
            assert found.best_outcome.objective == pytest.approx(
                asymmetry_time(system).duration_s, rel=1e-9)
            assert occupation_bound(system).error_one_second > 0


def test_search_on_a_known_function():
    # f = (log10 x + 7)² + (y − 0.3)²: minimum at x = 1e-7, y = 0.3; constraint y ≤ 0.2
    def evaluate(values):
        x, y = values
        return Outcome((math.log10(x) + 7) ** 2 + (y - 0.3) ** 2 + 1.0,
                       {"y_limit": y - 0.2})

    coords = (Coordinate("x", tuple(np.geomspace(1e-9, 1e-5, 9)), log=True),
              Coordinate("y", tuple(np.linspace(-1, 1, 11))))
    found = search(evaluate, coords)
    assert found.best[0] == pytest.approx(1e-7, rel=0.01)
    assert found.best[1] == pytest.approx(0.2, abs=2e-3)
    assert found.active == ("y_limit",)


def test_grid_flags():
    unstable = np.zeros((4, 5), bool)
    unstable[3, 4] = True
    assert grid_flags((2, 3), (4, 5), {"unstable": unstable}) == {
        "on_edge": False, "next_to_unstable": True}
    assert grid_flags((1, 1), (4, 5), {"unstable": unstable}) == {
        "on_edge": False, "next_to_unstable": False}
    assert grid_flags((0, 2), (4, 5), {"unstable": unstable})["on_edge"]


def test_plan_verb(tmp_path, capsys):
    path = tmp_path / "drum.toml"
    path.write_text(DRUM + DRUM_POWER_PLAN.format(max_power=3e-11))
    plot = tmp_path / "plan.png"
    assert main(["plan", str(path), "--json", "--plot", str(plot)]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["active_constraints"] == ["max_power_w"]
    assert data["optimum"]["parameters"][0]["value"] == pytest.approx(3e-11, rel=5e-3)
    assert plot.stat().st_size > 0
    assert main(["plan", str(path), "--plot", str(plot)]) == 2  # exists, no --force
    bad = tmp_path / "none.toml"
    bad.write_text(DRUM + DRUM_POWER_PLAN.format(max_power=1e-20))
    assert main(["plan", str(bad)]) == 3
    assert "max_power_w excludes every one" in capsys.readouterr().out


def test_plan_verb_in_a_fresh_interpreter(tmp_path):
    path = tmp_path / "drum.toml"
    path.write_text(DRUM + DRUM_POWER_PLAN.format(max_power=3e-11))
    done = run_cli("plan", str(path), "--no-refine")
    assert done.returncode == 0, done.stderr
    assert "active constraints: max_power_w" in done.stdout


def test_scenario_reference_loads_plan_of_bundled_drum():
    scenario = load_scenario(SCENARIOS / "drum_microwave_mK.toml")
    assert scenario.plan is None  # the bundled scenarios carry no plan: nothing changes


@pytest.mark.parametrize("d", [-2.0, -4.0, -9.0])
def test_bistable_window_against_the_branches(d):
    from conftest import scenario_for_cubic

    from simulator.model.operating_point import bistable_drive_window, operating_point

    low, high = bistable_drive_window(d)
    for p, branches in ((0.95 * low, 1), (np.sqrt(low * high), 3), (1.05 * high, 1)):
        assert len(operating_point(scenario_for_cubic(d=d, p=p)).branches) == branches
    assert np.isnan(bistable_drive_window(-1.7)[0])  # above −√3: never bistable
    # 5 % below the window: inside a 10 % margin, outside a 1 % one
    from simulator.workflows.plan_limits import near_bistable

    near = scenario_for_cubic(d=d, p=0.95 * low)
    point = operating_point(near)
    assert near_bistable(near, point, 0.1) and not near_bistable(near, point, 0.01)


def test_worker_processes_give_the_same_plan():
    scenario = _with_plan(DRUM, DRUM_POWER_PLAN.format(max_power=3e-11))
    one = plan_scenario(scenario, refine=False)
    two = plan_scenario(scenario, refine=False, workers=2)
    assert [o.objective for o in two.found.grid_outcomes] == [
        o.objective for o in one.found.grid_outcomes]
    assert two.found.active == one.found.active


def test_run_report_has_the_best_operating_point(tmp_path):
    from simulator.workflows.run import run_scenario

    scenario = _with_plan(DRUM, DRUM_POWER_PLAN.format(max_power=3e-11))
    result = run_scenario(scenario, tmp_path / "run", progress=False, workers=1)
    data = json.loads((tmp_path / "run" / "plan.json").read_text())
    assert data["active_constraints"] == ["max_power_w"]
    assert (tmp_path / "run" / "plan.png").stat().st_size > 0
    page = result.report.read_text()
    assert "Best operating point" in page and "scenario&#x27;s own point" in page


def _plan_of(text, **keys):
    import dataclasses

    scenario = _with_plan(text, '[plan]\n[plan.parameters]\n"drive.power_w" = [1e-6]\n')
    return base_of(scenario), dataclasses.replace(scenario.plan, **keys)


def test_circulating_power_heating():
    # P_circ = n̄ ħω FSR (common practice for a Fabry–Pérot cavity, FSR = c/2L)
    from scipy.constants import c, h

    base, plan = _plan_of(MEMBRANE, objective="occupation", heating_k_per_w=2.0,
                          free_spectral_range_hz=15e9)
    out = evaluate_plan_point(base, plan, [("drive.power_w", 1e-6)])
    photons = out.quantities["photon_number"]
    circulating = photons * h * c / 1064e-9 * 15e9
    assert out.quantities["bath_temperature_k"] == pytest.approx(4.2 + 2.0 * circulating)


def test_stability_margin_and_regime_constraints():
    base, plan = _plan_of(MEMBRANE, objective="occupation", max_growth_rate_hz=-1.0)
    out = evaluate_plan_point(base, plan, [("drive.power_w", 1e-9)])
    growth = out.quantities["growth_rate_hz"]  # −Γ_eff/2 of a barely cooled mode
    assert -1.0 < growth < 0
    assert out.violations["stability"] > 0 and "stability" in out.violated
    strong = evaluate_plan_point(base, plan, [("drive.power_w", 1e-5)])
    assert strong.quantities["growth_rate_hz"] < -1.0 and strong.violations["stability"] < 0
    # thermal jitter g0√(2n + 1) of a hot membrane is a few per cent of κ/2: "marginal"
    assert out.quantities["regime"] == "marginal" and out.violations["regime"] == 0
    import dataclasses

    strict = evaluate_plan_point(base, dataclasses.replace(plan, regime="linear"),
                                 [("drive.power_w", 1e-9)])
    assert "regime" in strict.violated


def test_occupation_error_objective_is_the_cramer_rao_bound():
    from simulator.analysis.feasibility import occupation_bound

    base, plan = _plan_of(MEMBRANE, objective="occupation_error", duration_s=4.0)
    out = evaluate_plan_point(base, plan, [("drive.power_w", 1e-6)])
    bound = occupation_bound(System(base.replace("drive.power_w", 1e-6)), 0)
    assert out.objective == pytest.approx(bound.error_one_second / 2.0)


def test_flatness_of_a_power_in_dbm_is_ten_percent_of_the_power():
    """±10 % of a level in dBm would be tens of decibels; the probe moves the power by ±10 %."""
    from simulator.analysis.planner import in_decibels, relative_change

    best = -70.9
    for change in (-0.1, 0.1):
        probe = best + 10 * math.log10(1 + change)
        assert relative_change("drive.power_dbm", probe, best, 50.0) == pytest.approx(change)
        watts = 1e-3 * 10 ** (probe / 10)
        assert watts / (1e-3 * 10 ** (best / 10)) == pytest.approx(1 + change)
    assert in_decibels("electronics.amplifier_gain_db") and not in_decibels("drive.power_w")
    assert relative_change("drive.power_w", 1.1e-9, 1e-9, 1.0) == pytest.approx(0.1)
