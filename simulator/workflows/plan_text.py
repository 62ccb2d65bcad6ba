"""A plan's result as plain data (``noisechain plan --json``) and as terminal text."""

import math

from simulator.analysis.planner import relative_change

UNITS = {"asymmetry_time": "s", "occupation_error": "", "occupation": "",
         "recorded_tones_time": "s", "thermal_variance_time": "s"}


def describe_objective(plan, mode_name, scenario=None):
    """The objective in words, e.g. "time to resolve the asymmetry of drum at 5σ"
    (``scenario`` names the tones recorded together, for ``recorded_tones_time``)."""
    if plan.objective == "asymmetry_time":
        return (f"time to resolve the sideband asymmetry of mode {mode_name} at "
                f"{plan.significance:g} standard deviations")
    if plan.objective == "recorded_tones_time":
        from simulator.analysis.joint_feasibility import detected_tone_sets

        sets = detected_tone_sets(scenario) if scenario is not None else ()
        tones = " and ".join(sets[-1]) if sets else "the tones"
        return (f"joint time T of {tones} recorded together (mode {mode_name}: "
                f"n/(n+1) told from 1 at {plan.significance:g}σ)")
    if plan.objective == "thermal_variance_time":
        return (f"time for the thermal variance n_th + ½ of mode {mode_name} to "
                f"{plan.relative_error:g} of itself")
    if plan.objective == "occupation_error":
        return (f"Cramér–Rao error of the occupation of mode {mode_name} after "
                f"{plan.duration_s:g} s")
    return f"steady-state occupation of mode {mode_name}"


def _point(coords, values):
    """Each parameter of a point: path, value set there, number in its unit."""
    return [{"path": c.path, "value": v, "number": v / c.scale, "unit": c.unit}
            for c, v in zip(coords, values, strict=True)]


def _outcome(outcome):
    return {"objective": outcome.objective, "feasible": outcome.feasible,
            "violated": list(outcome.violated),
            "violations": dict(outcome.violations), "quantities": dict(outcome.quantities)}


def plan_dict(result):
    """Plain data of a :class:`simulator.workflows.plan.PlanResult`."""
    scenario, found = result.scenario, result.found
    plan = scenario.plan
    mode = scenario.mechanics[plan.mode].name
    coords = found.coordinates
    data = {
        "scenario": scenario.scenario.name,
        "objective": plan.objective,
        "objective_description": describe_objective(plan, mode, scenario),
        "units": UNITS[plan.objective],
        "feasible": result.feasible,
        "message": found.message,
        "parameters": [{"path": c.path, "low": c.low, "high": c.high, "log": c.log,
                        "discrete": c.discrete, "unit": c.unit, "scale": c.scale,
                        "coarse_points": len(c.grid)} for c in coords],
        "evaluations": found.evaluations,
        "coarse_points": len(found.grid_values),
        "refined": found.refined,
        "wall_time_s": result.wall_time_s,
        "own_point": dict(_outcome(result.own), parameters=_point(
            coords, [scenario.get(c.path) for c in coords])),
    }
    if result.feasible:
        best = found.best_outcome.objective
        data["optimum"] = dict(_outcome(found.best_outcome),
                               parameters=_point(coords, found.best))
        data["active_constraints"] = list(found.active)
        data["at_bounds"] = list(found.at_bounds)
        data["flatness"] = [{"path": p.path, "value": p.value, "ratio": p.ratio,
                             "change": _change(p, found),
                             "feasible": p.outcome.feasible,
                             "violated": list(p.outcome.violated),
                             "inside_bounds": p.inside_bounds} for p in found.flatness]
        with_own = result.own.objective
        data["own_point"]["ratio_to_optimum"] = (with_own / best if best > 0
                                                 and math.isfinite(with_own) else None)
    data["map"] = {
        "axes": [{"path": c.path, "numbers": [v / c.scale for v in c.grid], "log": c.log,
                  "unit": c.unit} for c in result.map_axes],
        "objective": [o.objective for o in result.map_outcomes],
        "violated": [list(o.violated) for o in result.map_outcomes],
        "violations": {name: [o.violations.get(name, 0.0) for o in result.map_outcomes]
                       for name in dict.fromkeys(n for o in result.map_outcomes
                                                 for n in o.violations)},
    }
    return data


def _change(probe, found):
    """Relative change of the probed parameter from the optimum (±0.1, of its range at
    zero, of the power for a level in dBm)."""
    j = [c.path for c in found.coordinates].index(probe.path)
    best, coord = found.best[j], found.coordinates[j]
    return relative_change(probe.path, probe.value, best, coord.high - coord.low)


def _plain_unit(path):
    """The unit of a parameter path in words ("Hz" for drive.detuning_hz), or ""."""
    suffix = path.rsplit("_", 1)[-1]
    return {"hz": "Hz", "w": "W", "k": "K", "s": "s", "m": "m", "kg": "kg",
            "dbm": "dBm"}.get(suffix, "")


def _where(parameters):
    parts = []
    for p in parameters:
        unit = f" × {p['unit']}" if p["unit"] else ""
        plain = _plain_unit(p["path"])
        shown = f"{p['number']:.4g}{unit}" + (f" ({p['value']:.4g} {plain})"
                                              if unit and plain else f" {plain}" if plain
                                              else "")
        parts.append(f"{p['path']} = {shown}".rstrip())
    return ", ".join(parts)


def plan_text(d):
    """The terminal report of :func:`plan_dict`'s data."""
    unit = f" {d['units']}" if d["units"] else ""
    lines = [f"plan for {d['scenario']}: minimise the {d['objective_description']}"]
    if not d["feasible"]:
        lines.append(f"  {d['message']}")
        lines.append("  relax that constraint or move the bounds of [plan.parameters]")
    else:
        opt = d["optimum"]
        lines.append(f"  best: {opt['objective']:.4g}{unit}  at  {_where(opt['parameters'])}")
        q = opt["quantities"]
        lines.append(f"  there: {q.get('photon_number', math.nan):.4g} intracavity photons, "
                     f"growth rate {q.get('growth_rate_hz', math.nan):.4g} Hz, regime "
                     f"{q.get('regime', '?')}, occupation {q.get('occupation', math.nan):.4g}")
        if "x2_backaction_heating" in q:  # a back-action-evading pair
            lines.append(f"  the pair there: X2 heated by {q['x2_backaction_heating']:.4g} "
                         f"quanta, X1's counter-rotating residual "
                         f"{q['x1_counter_rotating']:.4g} quanta")
        active = ", ".join(d["active_constraints"]) or (
            "none (the optimum is on the edge of the searched range)" if d["at_bounds"]
            else "none (an interior optimum)")
        lines.append(f"  active constraints: {active}")
        if d["at_bounds"]:
            lines.append(f"  on a bound of {', '.join(d['at_bounds'])}: a wider range may "
                         "do better")
        for p in d["flatness"]:
            note = "" if p["feasible"] else f" (infeasible: {', '.join(p['violated'])})"
            value = f"{p['value']:.4g} {_plain_unit(p['path'])}".rstrip()
            lines.append(f"  flatness: {p['path']} {p['change']:+.0%} ({value}): "
                         f"objective × {p['ratio']:.3g}{note}")
    own = d["own_point"]
    ratio = own.get("ratio_to_optimum")
    compare = f" ({ratio:.3g} × the best)" if ratio is not None else ""
    failing = f"; violates {', '.join(own['violated'])}" if own["violated"] else ""
    lines.append(f"  the scenario's own point: {own['objective']:.4g}{unit}{compare}"
                 f"{failing}")
    lines.append(f"  {d['evaluations']} points evaluated ({d['coarse_points']} on the coarse "
                 f"grid{', then refined' if d['refined'] else ''}) in {d['wall_time_s']:.3g} s")
    return "\n".join(lines)
