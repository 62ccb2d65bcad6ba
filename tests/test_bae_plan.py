"""The back-action-evading pair's own figure of merit in the planner and in sweeps.

The objective ``thermal_variance_time`` is the time for the Cramér–Rao error
of a mode's thermal variance n_th + ½ (X1's, for a pair; n_th the only
unknown) to fall to a fraction ε of it, from the record's Whittle information
(simulator.analysis.bae_feasibility). Checks:

- the information against the line on a flat floor: X1's symmetrised
  spectrum is a Lorentzian of energy width Γ holding X1's whole variance V
  (thermal + ½ + counter-rotating residual), the imprecision a floor flat on
  its scale, r = V/n_imp the peak over the floor (n_imp = S_imp Γ/4), so for a
  real record (one quadrature) F/T = ∫₀^∞ df (∂ ln S/∂n_th)²
  = r² Γ / (16 V² (1 + r)^{3/2}) (Whittle, J. Roy. Stat. Soc. B 15, 125
  (1953); the integral of a squared Lorentzian in closed form), with V and
  n_imp from the pair's closed forms (simulator.linear.quadratures);
- the planner's best power of a balanced pair at zero temperature: for r ≫ 1,
  F/T ∝ √r/V² with r ∝ V·P and the residual ∝ P, so T is least where the
  counter-rotating residual is half the thermal variance, ¼ quantum at n_th = 0
  (derived here from the closed form above); and against a brute-force grid of
  the same objective;
- a cap on X2's back-action heating, 4c²(n_c + ½)/(Γm(Γm + κ)) ∝ P (closed
  form of simulator.linear.quadratures), sets the best power where the
  heating meets it, and the planner names the cap as the active constraint;
- the pair's own parameter paths, the sweep's new variables and the refusals.
"""

import numpy as np
import pytest
from tone_scenarios import CARRIER_HZ, OMEGA_HZ, scenario_text, tone_table

from simulator.analysis.bae_feasibility import thermal_variance_time
from simulator.errors import InputError, ScenarioError
from simulator.linear.quadratures import (
    closed_form_variances,
    imprecision_closed_form,
    quadrature_budget,
)
from simulator.linear.steady_state import steady_state
from simulator.model.backaction_evasion import pair_parameters
from simulator.model.system import System
from simulator.scenario.labels import axis_label
from simulator.scenario.loader import parse_scenario
from simulator.workflows.plan import evaluate_plan_point, plan_scenario

ETA = 0.8


def pair(photons=1e4, *, n_bath=50.0, scheme="homodyne", plan=""):
    """A balanced pair (equal photon numbers) at ±Ωm on the test device, optical receiver."""
    upper = tone_table("upper", photons, OMEGA_HZ, frequency_hz=CARRIER_HZ + 2 * OMEGA_HZ)
    extra = (f'\n[detection]\nbackaction_evading = true\nefficiency = {ETA!r}\n'
             f'scheme = "{scheme}"\n' + upper + plan)
    return parse_scenario(scenario_text(drive_photons=photons, bath_occupation=n_bath,
                                        linewidth_hz=10.0, extra=extra))


def line_on_flat_floor_error(scenario, receiver_factor):
    """σ of n_th after 1 s from r² Γ/(16 V² (1 + r)^{3/2}) (module notes); the closed-form
    imprecision times ``receiver_factor`` (2 for heterodyne: the field's two quadratures
    share the record, common practice)."""
    p = pair_parameters(scenario, System(scenario).point)
    variance, _ = closed_form_variances(p)
    n_imp = receiver_factor * imprecision_closed_form(p, 0.0, ETA) * p.gamma / 4
    r = variance / n_imp
    return 1 / np.sqrt(r**2 * p.gamma / (16 * variance**2 * (1 + r) ** 1.5))


@pytest.mark.parametrize(("scheme", "factor"), [("homodyne", 1.0), ("heterodyne", 2.0)])
@pytest.mark.parametrize("photons", [1e2, 1e5])
def test_information_against_the_line_on_a_flat_floor(scheme, factor, photons):
    """The record's exact Whittle information (receiver, digitiser, the whole spectrum)
    equals the Lorentzian-on-a-floor closed form to 10⁻³ (measured 4 × 10⁻⁴) from a peak
    300 to 3 × 10⁵ times the floor; T follows as (σ₁/(ε(n_th + ½)))²."""
    scenario = pair(photons, scheme=scheme)
    found = thermal_variance_time(scenario, relative_error=0.02)
    assert found.error_one_second == pytest.approx(line_on_flat_floor_error(scenario, factor),
                                                   rel=1e-3)
    assert found.thermal_variance == pytest.approx(50.5)
    assert found.duration_s == pytest.approx((found.error_one_second / (0.02 * 50.5)) ** 2)


def power_plan(low, high, extra=""):
    return (f'\n[plan]\nobjective = "thermal_variance_time"\nregime = "nonlinear"\n{extra}'
            f'[plan.parameters]\n"pair.power_w" = {{ start = {low!r}, stop = {high!r}, '
            'num = 7, log = true }\n')


def brute_force(scenario, powers):
    """(objective, power) of every feasible point of the same objective."""
    outcomes = [(evaluate_plan_point(scenario, scenario.plan, [("pair.power_w", p)]), p)
                for p in powers]
    return [(o.objective, p) for o, p in outcomes if o.feasible]


def test_best_power_at_zero_temperature_puts_a_quarter_quantum_on_x1():
    """n_th = 0: the error of the zero-point variance ½ is least where the counter-rotating
    residual (∝ P) is ¼ quantum (module notes); the planner finds that power to 1 % from
    an off-centre coarse grid and beats a brute-force grid of 41 points of the same
    objective."""
    base = pair(n_bath=0.0)
    residual = quadrature_budget(base).x1_counter_rotating
    best = base.get("pair.power_w") * 0.25 / residual
    planned = pair(n_bath=0.0, plan=power_plan(best / 7, best * 30))
    result = plan_scenario(planned)
    assert result.feasible and result.found.active == ()
    assert result.found.best[0] == pytest.approx(best, rel=0.01)
    brute = brute_force(planned, np.geomspace(best / 7, best * 30, 41))
    assert result.found.best_outcome.objective <= min(brute)[0] * (1 + 1e-6)
    assert min(brute)[1] == pytest.approx(best, rel=0.075)  # half the grid's step of 14 %
    there = result.found.best_outcome.quantities
    assert there["x1_counter_rotating"] == pytest.approx(0.25, rel=0.02)


def test_capped_backaction_heating_sets_the_power():
    """A cap on X2's heating, which grows as P (4c²(n_c + ½)/(Γm(Γm + κ)), c ∝ √P), is
    met at the power P₀ cap/heating(P₀) below the unconstrained optimum; the planner
    stops there, names the cap as active, and no feasible brute-force point is better."""
    base = pair()
    p = pair_parameters(base, System(base).point)
    heating = closed_form_variances(p)[1] - closed_form_variances(p)[0]
    assert quadrature_budget(base).x2_heating == pytest.approx(heating, rel=1e-9)
    cap = 3e5
    at_cap = base.get("pair.power_w") * cap / heating
    planned = pair(plan=power_plan(at_cap / 20, at_cap * 5, f"max_backaction_heating = {cap}\n"))
    result = plan_scenario(planned)
    assert result.found.active == ("max_backaction_heating",)
    assert result.found.best[0] == pytest.approx(at_cap, rel=2e-3)
    brute = brute_force(planned, np.geomspace(at_cap / 20, at_cap * 5, 25))
    assert result.found.best_outcome.objective <= min(brute)[0] * (1 + 1e-6)
    assert f"X2 heated by {cap:.4g} quanta" in result.to_text()


def test_occupation_limit_reads_the_heated_mode():
    """max_occupation compares the mode's occupation (X1 and X2 together, so X2's heating)
    with its limit: violated by the relative excess, satisfied below it."""
    base = pair()
    occupation = steady_state(base).modes[0].occupation
    for limit in (occupation / 2, occupation * 2):
        planned = pair(plan=power_plan(1e-11, 1e-9, f"max_occupation = {limit!r}\n"))
        outcome = evaluate_plan_point(planned, planned.plan, [])
        assert outcome.quantities["occupation"] == pytest.approx(occupation, rel=1e-12)
        assert outcome.violations["max_occupation"] == pytest.approx(occupation / limit - 1)
    budget = quadrature_budget(base)
    assert occupation == pytest.approx((budget.x1_variance + budget.x2_variance - 1) / 2)


def test_pair_paths_move_both_tones():
    """The pair's power scales both tones (their ratio, so the balance, kept), its mean
    detuning moves both, its spacing offset ν − Ωm moves them apart about their centre."""
    base = pair()
    total = base.drive.power_w + base.tones[0].power_w
    assert base.get("pair.power_w") == pytest.approx(total)
    assert base.get("pair.power_dbm") == pytest.approx(10 * np.log10(total / 1e-3))
    assert base.get("pair.mean_detuning_hz") == 0.0
    assert base.get("pair.spacing_offset_hz") == 0.0
    moved = (base.replace("pair.power_dbm", -70.0).replace("pair.mean_detuning_hz", 2e3)
             .replace("pair.spacing_offset_hz", -30.0))
    assert moved.drive.power_w + moved.tones[0].power_w == pytest.approx(1e-10)
    assert moved.tones[0].power_w / moved.drive.power_w == pytest.approx(
        base.tones[0].power_w / base.drive.power_w, rel=1e-12)
    assert moved.drive.detuning_hz == pytest.approx(2e3 - OMEGA_HZ + 30.0)
    assert moved.tones[0].detuning_hz == pytest.approx(2e3 + OMEGA_HZ - 30.0)
    points = [System(s).point for s in (base, base.replace("pair.power_w", 4 * total))]
    ratios = [t[1].photon_number / t[0].photon_number for t in (p.tones for p in points)]
    assert ratios[1] == pytest.approx(ratios[0], rel=1e-12)
    assert axis_label("pair.spacing_offset_hz") == "pair's spacing offset (ν − Ωm)/2π (Hz)"


def test_pair_paths_and_plan_keys_refused_with_reasons():
    base = pair()
    with pytest.raises(ScenarioError, match="pair.spacing_offset_hz.*above −Ωm"):
        base.replace("pair.spacing_offset_hz", -2 * OMEGA_HZ)
    with pytest.raises(ScenarioError, match="positive, finite total power"):
        base.replace("pair.power_w", 0.0)
    with pytest.raises(ScenarioError, match="the pair's paths are pair.power_w"):
        base.get("pair.centre_hz")
    single = parse_scenario(scenario_text())
    with pytest.raises(ScenarioError, match="backaction_evading = true"):
        single.replace("pair.power_w", 1e-9)
    plan = power_plan(1e-11, 1e-9, "max_backaction_heating = 10.0\n")
    with pytest.raises(ScenarioError, match="plan.parameters.*names the two tones of a "
                                            "back-action-evading pair"):
        parse_scenario(scenario_text(extra=plan))  # a pair path without a pair
    from simulator.workflows.plan import check_plan

    text = scenario_text(extra='\n[plan]\nmax_backaction_heating = 10.0\n[plan.parameters]\n'
                               '"drive.power_w" = { start = 1e-11, stop = 1e-9, num = 3 }\n')
    with pytest.raises(ScenarioError, match="max_backaction_heating.*max_occupation"):
        check_plan(parse_scenario(text))
    with pytest.raises(ScenarioError, match="relative_error"):
        parse_scenario(pair().to_toml() + power_plan(1e-11, 1e-9, "relative_error = 2.0\n"))
    with pytest.raises(InputError, match="relative_error"):
        thermal_variance_time(base, relative_error=0.0)


def test_sweep_stores_the_pair_quantities_and_nothing_else_gains_them(tmp_path):
    """A sweep of the pair's power stores n_th's error after 1 s, X2's heating and X1's
    residual with units and descriptions, equal to the direct computation (X2's heating
    ∝ P); a one-tone sweep has none of them; a resumed sweep gives the same values."""
    import xarray as xr

    from simulator.workflows.sweep import run_sweep

    sweep = '\n[sweep]\n[sweep.parameters]\n"pair.power_dbm" = [-80.0, -74.0]\n'
    scenario = parse_scenario(pair(scheme="heterodyne").to_toml() + sweep)
    ds = run_sweep(scenario, tmp_path / "s", workers=1, progress=False)
    for name in ("thermal_variance_error_1s", "x2_backaction_heating", "x1_counter_rotating"):
        assert ds[name].attrs["description"] and "units" in ds[name].attrs
    point = pair(scheme="heterodyne").replace("pair.power_dbm", -74.0)
    assert float(ds["thermal_variance_error_1s"][1, 0]) == pytest.approx(
        thermal_variance_time(point).error_one_second, rel=1e-12)
    heating = ds["x2_backaction_heating"].values[:, 0]
    assert heating[1] / heating[0] == pytest.approx(10 ** 0.6, rel=1e-6)
    (tmp_path / "s" / "sweep.nc").unlink()
    again = run_sweep(scenario, tmp_path / "s", workers=1, progress=False)
    assert np.array_equal(again["x1_counter_rotating"].values, ds["x1_counter_rotating"].values)
    stored = xr.open_dataset(tmp_path / "s" / "sweep.nc")
    assert stored["x2_backaction_heating"].attrs["description"].startswith("back-action")
    plain = parse_scenario(scenario_text() + '\n[sweep]\n[sweep.parameters]\n'
                                             '"drive.power_w" = [1e-11]\n')
    one = run_sweep(plain, tmp_path / "one", workers=1, progress=False)
    assert not {"x2_backaction_heating", "recorded_tones_time_s"} & set(one.data_vars)
