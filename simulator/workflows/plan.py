"""The best operating point: ``noisechain plan`` and the ``[plan]`` section.

"Can I resolve the quantum sideband asymmetry with my device, at which
detuning and power, for how long?" The scenario's ``[plan]`` names the free
parameters (bounds, spacing, coarse grid), the objective and the
constraints; :func:`plan_scenario` evaluates every point of the coarse grid
with :func:`evaluate_plan_point`, refines the best feasible one and reports
the optimum, the active constraints, how flat the optimum is, a map around it
and the scenario's own point for comparison. The search is the physics-free
:func:`simulator.analysis.planner.search`.

Objectives (all minimised): the time to resolve the sideband asymmetry at
``significance`` standard deviations
(:func:`simulator.analysis.feasibility.asymmetry_time`), the Cramér–Rao error
of the occupation after ``duration_s``
(:func:`simulator.analysis.feasibility.occupation_bound`), the exact
steady-state occupation, or with several tones the time of the tones recorded
together (``recorded_tones_time``, the joint bound of
:func:`simulator.analysis.joint_feasibility.joint_bound`), or the time for the
error of the mode's thermal variance n_th + ½ to fall to ``relative_error`` of
it (``thermal_variance_time``,
:func:`simulator.analysis.bae_feasibility.thermal_variance_time`: X1's for a
back-action-evading pair, whose power and detuning are the ``pair.`` paths of
:mod:`simulator.scenario.pair_paths`). Each tone's power
and detuning are free parameters like the drive's (``tones.<name>.power_w``,
``tones.<name>.power_dbm``, ``tones.<name>.detuning_hz`` or ``tones[i]....``).

Constraints, each reported by name: ``max_power_w``, ``max_photon_number``,
``stability`` (largest growth rate at most ``max_growth_rate_hz``; an
unstable point always fails), ``bistability_margin`` (the photon number stays
single-valued when the power and the detuning change by up to that fraction),
``regime`` (the linear engine's verdict, :mod:`simulator.master.regime`), and
``signal`` (the record carries a finite bound at all), ``max_occupation`` (the
mode's steady-state occupation) and, for a back-action-evading pair,
``max_backaction_heating`` (the variance the cavity's noise drives into X2,
:func:`simulator.linear.quadratures.quadrature_budget`). An optional heating
model raises every mode's bath temperature linearly with the intracavity
photon number or the circulating power: in practice absorption heating, not
the optics, is what limits the drive power (common practice).
"""

import dataclasses
import functools
import math
import time

from simulator.analysis.planner import Coordinate, Outcome, search
from simulator.errors import InputError, OperatingPointError, ScenarioError
from simulator.workflows.plan_limits import heated, near_bistable
from simulator.workflows.plan_text import plan_dict, plan_text


def base_of(scenario):
    """The scenario without its ``[sweep]`` and ``[plan]`` (cheaper to derive points from)."""
    return dataclasses.replace(scenario, sweep=None, plan=None)


def check_plan(scenario):
    """Refuse a plan that cannot be evaluated, before any work."""
    plan = scenario.plan
    if plan is None:
        raise ScenarioError("the scenario has no [plan] section; expected [plan] with "
                            "[plan.parameters] to find the best operating point (an "
                            "example: scenarios/drum_microwave_plan.toml; "
                            "docs/tutorial-feasibility.md, section 4a)",
                            source=scenario.source, key="plan")
    if plan.objective == "asymmetry_time" and scenario.detection.scheme != "heterodyne":
        raise ScenarioError(f"objective \"asymmetry_time\" with detection.scheme = "
                            f"{scenario.detection.scheme!r}: the asymmetry needs heterodyne "
                            "detection of both sidebands; expected scheme = \"heterodyne\" "
                            "or another objective", source=scenario.source,
                            key="plan.objective")
    if plan.objective == "recorded_tones_time":
        from simulator.analysis.joint_feasibility import detected_tone_sets

        if not detected_tone_sets(scenario):
            raise ScenarioError("objective \"recorded_tones_time\" needs [[tones]] recorded "
                                "by an iq or homodyne receiver (record.kind = \"if\" and a "
                                "scenario without [[tones]] have no joint record); expected "
                                "[[tones]] or another objective", source=scenario.source,
                                key="plan.objective")
    if plan.objective == "asymmetry_time" and scenario.detection.backaction_evading:
        raise ScenarioError("objective \"asymmetry_time\" with detection.backaction_evading: "
                            "a back-action-evading pair measures one quadrature, with no "
                            "sideband asymmetry; expected the objective \"occupation\" or "
                            "\"occupation_error\"", source=scenario.source,
                            key="plan.objective")
    if plan.max_backaction_heating is not None and not scenario.detection.backaction_evading:
        raise ScenarioError("max_backaction_heating limits the heating of the conjugate "
                            "quadrature X2 of a back-action-evading pair; expected "
                            "detection.backaction_evading = true, or max_occupation",
                            source=scenario.source, key="plan.max_backaction_heating")
    if plan.heating_per_photon_k > 0 or plan.heating_k_per_w > 0:
        for i, mode in enumerate(scenario.mechanics):
            if mode.bath_temperature_k is None:
                raise ScenarioError("the heating model raises a bath temperature; expected "
                                    "bath_temperature_k rather than bath_occupation",
                                    source=scenario.source,
                                    key=f"mechanics[{i}].bath_temperature_k")
    return plan


def coordinates_of(scenario):
    """The free parameters of ``[plan.parameters]`` as search coordinates (values checked)."""
    from simulator.workflows.sweep import parameter_axes

    plan = scenario.plan
    coords = []
    for axis in parameter_axes(scenario, plan.parameters, "plan"):
        spec = plan.parameters[axis.path]
        scale = float(base_of(scenario).get(axis.unit)) if axis.unit else 1.0
        coords.append(Coordinate(path=axis.path, grid=axis.values, log=axis.log,
                                 discrete=isinstance(spec, tuple), scale=scale,
                                 unit=axis.unit))
    return tuple(coords)


def evaluate_plan_point(scenario, plan, assignments):
    """Objective and constraint violations at one point; see the module notes.

    Parameters
    ----------
    scenario : Scenario
        The base (its ``[plan]`` and ``[sweep]`` are ignored; see :func:`base_of`).
    plan : simulator.scenario.plan_section.Plan
    assignments : sequence of (path, value)

    Returns
    -------
    simulator.analysis.planner.Outcome
    """
    from simulator.model.system import System

    inf = math.inf
    try:
        for path, value in assignments:
            scenario = scenario.replace(path, value)
        scenario = heated(scenario, plan)
        system = System(scenario)
    except ScenarioError as exc:
        return Outcome(inf, {"valid": 1.0}, {"error": exc.detail})
    point, verdict = system.point, system.stability
    drive = scenario.drive
    violations = {}
    # with several tones: their summed power, and the fullest cavity mode's photons
    power = drive.power_w + sum(tone.power_w for tone in scenario.tones)
    photons = max((c.photon_number for c in point.cavity_modes), default=point.photon_number)
    if plan.max_power_w is not None:
        violations["max_power_w"] = (power - plan.max_power_w) / plan.max_power_w
    if plan.max_photon_number is not None:
        violations["max_photon_number"] = ((photons - plan.max_photon_number)
                                           / plan.max_photon_number)
    scale = abs(plan.max_growth_rate_hz) + scenario.mechanics[plan.mode].linewidth_hz
    margin = (verdict.growth_rate_hz - plan.max_growth_rate_hz) / scale
    violations["stability"] = margin if verdict.stable else max(margin, 1.0)
    violations["bistability_margin"] = float(near_bistable(scenario, point,
                                                            plan.bistability_margin))
    quantities = {"photon_number": photons, "growth_rate_hz":
                  verdict.growth_rate_hz, "bistable": point.bistable,
                  "bath_temperature_k": scenario.mechanics[plan.mode].bath_temperature_k}
    objective = inf
    violations["regime"] = 0.0
    limits = _stable_limits(plan)
    violations.update({name: 0.0 for name in limits})  # an unstable point fails "stability"
    if verdict.stable:
        try:
            objective, occupations = _objective(system, plan)
            if system.scenario.detection.backaction_evading:
                from simulator.analysis.bae_feasibility import pair_quantities

                quantities.update(pair_quantities(system))
        except (ArithmeticError, ValueError, OperatingPointError) as exc:
            # a numerical failure at this point (recorded with it), not of the search
            quantities["error"] = f"{type(exc).__name__}: {exc}"
            return Outcome(inf, dict(violations, signal=1.0), quantities)
        from simulator.master.regime import LEVELS, regime_verdict

        level = regime_verdict(point, occupations).level
        violations["regime"] = float(LEVELS.index(level) > LEVELS.index(plan.regime))
        quantities.update(regime=level, occupation=occupations[plan.mode])
        for name, (key, limit) in limits.items():
            violations[name] = (quantities[key] - limit) / limit
    violations["signal"] = 0.0 if math.isfinite(objective) or not verdict.stable else 1.0
    return Outcome(float(objective), violations, quantities)


def _stable_limits(plan):
    """Constraint name → (quantity it limits, limit), for the limits read at a stable point."""
    limits = {"max_occupation": ("occupation", plan.max_occupation),
              "max_backaction_heating": ("x2_backaction_heating",
                                         plan.max_backaction_heating)}
    return {name: limit for name, limit in limits.items() if limit[1] is not None}


def _objective(system, plan):
    """The objective's value and every mode's occupation, at a stable point."""
    from simulator.analysis import feasibility
    from simulator.linear.steady_state import steady_state

    steady = steady_state(system)
    occupations = [m.occupation for m in steady.modes]
    if plan.objective == "occupation":
        return occupations[plan.mode], occupations
    if plan.objective == "recorded_tones_time":
        from simulator.analysis.joint_feasibility import detected_tone_sets, joint_bound

        tones = detected_tone_sets(system.scenario)[-1]  # all of them together
        return joint_bound(system, tones, plan.mode,
                           significance=plan.significance).duration_s, occupations
    seen = system.detected.point  # the detected tone's (detection.tone)
    if (seen.photon_number == 0 or seen.modes[plan.mode].coupling_rate_hz == 0
            if system.several_tones else system.scenario.drive.power_w == 0
            or system.scenario.mechanics[plan.mode].coupling_hz == 0):
        return math.inf, occupations  # the record carries no trace of the mode
    if plan.objective == "thermal_variance_time":
        from simulator.analysis.bae_feasibility import thermal_variance_time

        return thermal_variance_time(system, plan.mode,
                                     plan.relative_error).duration_s, occupations
    if plan.objective == "asymmetry_time":
        return feasibility.asymmetry_time(system, plan.mode, plan.significance,
                                          steady=steady).duration_s, occupations
    bound = feasibility.occupation_bound(system, plan.mode)
    return float(bound.error_after(plan.duration_s)), occupations


@functools.lru_cache(maxsize=4)
def _plan_from_text(text):
    from simulator.scenario.loader import parse_scenario

    scenario = parse_scenario(text, source="<plan>")
    return base_of(scenario), scenario.plan


def _grid_task(common, payload):
    """One coarse-grid point in a worker process: the Outcome as plain data."""
    base, plan = _plan_from_text(common)
    return dataclasses.asdict(evaluate_plan_point(base, plan, payload))


@dataclasses.dataclass(frozen=True)
class PlanResult:
    """The best operating point of a scenario's ``[plan]``; see :func:`plan_scenario`."""

    scenario: object
    found: object  # simulator.analysis.planner.Search
    own: Outcome  # the scenario's own point
    map_outcomes: tuple  # outcomes on the map grid (see map_axes)
    map_axes: tuple  # the Coordinates spanning the map (one or two)
    wall_time_s: float

    @property
    def feasible(self):
        """True when a feasible optimum was found."""
        return self.found.best is not None

    def to_dict(self):
        """Plain data for JSON (see :mod:`simulator.workflows.plan_text`)."""
        return plan_dict(self)

    def to_text(self):
        """Human-readable summary for the terminal."""
        return plan_text(self.to_dict())


def plan_scenario(scenario, *, workers=1, dask=None, refine=True):
    """Best operating point of ``scenario`` under its ``[plan]``.

    Parameters
    ----------
    scenario : Scenario
        With a ``[plan]`` section.
    workers : int
        Processes for the coarse grid (1: this process, the default: a modest
        grid is cheaper here than the start of worker processes).
    dask : str, optional
        A Dask scheduler for the coarse grid (as for sweeps).
    refine : bool
        Run the local refinement after the coarse grid.

    Returns
    -------
    PlanResult
        ``feasible`` is false when no grid point satisfies every constraint;
        ``found.message`` then names the constraints that exclude everything.
    """
    from simulator.workflows import tasks

    start = time.perf_counter()
    plan = check_plan(scenario)
    coords = coordinates_of(scenario)
    base = base_of(scenario)
    paths = [c.path for c in coords]

    def evaluate(values):
        return evaluate_plan_point(base, plan, list(zip(paths, values, strict=True)))

    def evaluate_many(points):
        if (workers or 1) == 1 and dask is None:
            return [evaluate(v) for v in points]
        payloads = [list(zip(paths, v, strict=True)) for v in points]
        raw = tasks.run_in_memory(_grid_task, scenario.to_toml(), payloads,
                                  workers=workers, dask=dask)
        return [Outcome(**r) for r in raw]

    if workers is not None and workers < 1:
        raise InputError(f"--workers {workers}: expected a positive number of worker "
                         "processes")
    found = search(evaluate, coords, evaluate_many=evaluate_many, refine=refine)
    own = evaluate([base.get(p) for p in paths])
    map_axes, map_outcomes = _map(found, coords, evaluate_many)
    return PlanResult(scenario=scenario, found=found, own=own, map_outcomes=map_outcomes,
                      map_axes=map_axes, wall_time_s=time.perf_counter() - start)


def _map(found, coords, evaluate_many):
    """Outcomes on a 1-D or 2-D grid through the optimum (the coarse grid when it is one).

    Spanned by the first two continuous parameters on their coarse grids, the
    others held at the optimum (or, with no feasible point, at their first
    grid value).
    """
    import itertools

    spanning = [j for j, c in enumerate(coords) if not c.discrete and len(c.grid) > 1][:2]
    if not spanning:
        return (), ()
    if len(spanning) == len(coords):
        return tuple(coords[j] for j in spanning), tuple(found.grid_outcomes)
    centre = found.best or found.grid_values[0]
    points = []
    for combo in itertools.product(*(coords[j].grid for j in spanning)):
        point = list(centre)
        for j, v in zip(spanning, combo, strict=True):
            point[j] = v
        points.append(tuple(point))
    return tuple(coords[j] for j in spanning), tuple(evaluate_many(points))


def plan_part(scenario, out, wrote, figures):
    """The run's plan: ``plan.json``, the map ``plan.png`` and the report section (HTML)."""
    from simulator.io import jsontext
    from simulator.io.files import atomic_write_text
    from simulator.report import html
    from simulator.report.plan_plots import plan_html, plot_plan

    try:
        data = jsontext.plain(plan_scenario(scenario).to_dict())
    except ScenarioError as exc:  # the rest of the run stands; the report says why
        return html.warnings_block([f"the [plan] cannot be evaluated: {exc}"])
    atomic_write_text(wrote(out / "plan.json"), jsontext.dumps(data, indent=2))
    if data["map"]["axes"]:
        figures.append((wrote(plot_plan(data, out / "plan.png", overwrite=True)),
                        "The planner's objective around its optimum, with the boundaries "
                        "of the constraints."))
    return plan_html(data)
