"""Everything the linear engine says about a scenario, in one frozen report.

:func:`inspect_scenario` runs operating point, linear model, stability and
steady state, and collects the regime warnings an experimenter should read.
The report converts to plain data (``to_dict``) for ``noisechain inspect
--json`` and to text for the terminal (the :class:`Inspection` type and its text:
:mod:`simulator.workflows.inspection_text`).
"""

import math
import warnings as python_warnings

from simulator.linear.laser_effects import occupation_report
from simulator.linear.steady_state import STRONG_COUPLING_TOLERANCE, steady_state
from simulator.model import laser_noise
from simulator.model.system import as_system
from simulator.model.tone_validity import ToneNoiseWarning, ToneSpacingWarning
from simulator.scenario.plausibility import plausibility_warnings
from simulator.workflows.inspection_text import (  # noqa: F401 (part of this module's API)
    LONG_INTEGRATION_S,
    Inspection,
    _finite,
    _long_time_hint,
    _resolution_text,
    _with_field_occupations,
    backaction_limit_not_applicable,
)


def master_equation_advice(point, occupations):
    """Advice for a nonlinear regime: the master equation, or why it cannot help.

    A thermal state of n quanta needs about ln(1/ε)/ln((n+1)/n) ≈ n ln(1/ε)
    Fock levels to keep a tail ε out of the truncation (ε a quarter of the
    engine's tolerance, as in simulator.master.hilbert.expected_cutoffs);
    beyond the size the engine handles the master equation is not applicable
    either.
    """
    from simulator.master.hilbert import DEFAULT_TOLERANCE, MAX_DIMENSION

    quanta = [m.bath_occupation for m in point.modes] if occupations is None else occupations
    n = max(quanta, default=0.0)
    if not n > 0:
        return None
    levels = math.log(4.0 / DEFAULT_TOLERANCE) / math.log1p(1.0 / n)
    if levels <= MAX_DIMENSION:
        return None
    return (f"the master equation: not applicable ({n:.3g} quanta need about "
            f"{levels:.2g} Fock levels per mode, the engine handles {MAX_DIMENSION} in "
            "all; the motion is classical here: treat the nonlinear transduction "
            "classically, or lower the occupation)")


def _tone_warnings(caught):
    """The several-tone validity warnings caught while the model was built, as report
    lines (so `inspect --json` carries them); any other warning is passed on."""
    lines = []
    for w in caught:
        if issubclass(w.category, (ToneSpacingWarning, ToneNoiseWarning)):
            lines.append(str(w.message))
        else:
            python_warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    return list(dict.fromkeys(lines))


def inspect_scenario(system, *, feasibility=True):
    """Operating point, stability, steady state and warnings of ``scenario``.

    ``feasibility=False`` leaves out the Cramér–Rao bounds (the costliest
    part, a few tenths of a second), for callers such as sweeps that do not
    report them.

    Unlike :func:`simulator.linear.steady_state.steady_state`, an unstable operating
    point does not raise: the report says so and carries no steady state.
    """
    with python_warnings.catch_warnings(record=True) as caught:
        python_warnings.simplefilter("always", ToneSpacingWarning)
        python_warnings.simplefilter("always", ToneNoiseWarning)
        system = as_system(system, several_tones="detected")
        system.model  # noqa: B018  (built here: the tone checks warn when it is)
    with python_warnings.catch_warnings():  # said once, in the report, not per bound step
        python_warnings.simplefilter("ignore", ToneSpacingWarning)
        python_warnings.simplefilter("ignore", ToneNoiseWarning)
        return _inspect(system, _tone_warnings(caught), feasibility)


def _inspect(system, warnings, feasibility):
    """:func:`inspect_scenario` of a built ``system``, its tone warnings ``warnings``."""
    scenario, point, verdict = system.scenario, system.point, system.stability
    if point.bistable:
        warnings.append(
            "the intracavity photon number is bistable (branches "
            + ", ".join(f"{b:.4g}" for b in point.branches)
            + f"); using the {point.branch} branch, set drive.bistable_branch to choose")
    warnings += plausibility_warnings(scenario)
    steady = steady_state(system) if verdict.stable else None
    if steady is not None:
        for ms in steady.modes:
            exact, weak = ms.occupation, ms.weak_coupling_occupation
            if not math.isfinite(weak) or abs(weak - exact) > STRONG_COUPLING_TOLERANCE * exact:
                warnings.append(
                    f"mode {ms.name}: weak-coupling occupation {weak:.4g} differs from the "
                    f"exact {exact:.4g} by more than {STRONG_COUPLING_TOLERANCE:.0%}; the "
                    "system is near or in strong coupling and the rate-equation "
                    "diagnostics do not apply")
    quadratures, resolution = None, ()
    if scenario.detection.backaction_evading and steady is not None:
        # one quadrature measured: its budget, and its resolution beside one tone's
        from simulator.analysis.bae_feasibility import resolution_comparison
        from simulator.linear.quadratures import quadrature_budget

        quadratures = quadrature_budget(system)
        warnings += pair_tuning_warnings(system, steady)
        resolution = resolution_comparison(system) if feasibility else ()
        feasibility = False  # the sideband bounds do not apply to one quadrature
    asked = steady is not None and feasibility
    feasibility = _feasibility(system, steady) if asked else ()
    bounded = {f["mode"] for f in feasibility}
    warnings += [f"mode {m.name}: no measurement-time bound: the detected light does not "
                 "couple to it (g = 0, or no drive power), so the record holds none of its "
                 "motion" for m in scenario.mechanics if asked and m.name not in bounded]
    warnings += [f"mode {f['mode']}: the record carries too little information about this "
                 "mode for a finite measurement-time bound (reported as infinite, null in "
                 "JSON); raise the drive power or the coupling"
                 for f in feasibility if not (math.isfinite(f["occupation_error_1s"]) and
                                              math.isfinite(f["asymmetry_time_s"] or 0.0))]
    from simulator.master.regime import LEVELS, regime_verdict  # pure formulas, no QuTiP

    occupations = None if steady is None else [ms.occupation for ms in steady.modes]
    regime = max((regime_verdict(p, occupations,
                                 master_advice=master_equation_advice(p, occupations))
                  for p in _tone_points(system)), key=lambda v: LEVELS.index(v.level))
    laser = (() if steady is None or laser_noise.is_quiet(scenario)
             else _explained(system, occupation_report(system, steady)))
    warnings += [f"mode {ms.name}: the apparent (sideband ratio) occupation is not to be "
                 f"trusted: {entry['apparent_occupation_warning']}"
                 for ms, entry in zip(steady.modes if steady else (), laser, strict=False)
                 if "apparent_occupation_warning" in entry]
    tone_sets = (_tone_sets(system, feasibility) if steady is not None and feasibility
                 else ())
    protocol = (_protocol_bound(scenario, warnings)
                if steady is not None and feasibility and scenario.schedule is not None
                else None)
    return Inspection(system=system, steady=steady,
                      warnings=tuple(warnings), feasibility=feasibility, regime=regime,
                      laser=laser, tone_sets=tone_sets, quadratures=quadratures,
                      resolution=resolution, protocol=protocol)


def pair_tuning_warnings(system, steady):
    """A back-action-evading pair whose half-spacing ν misses the mode (a list of text).

    In the pair's frame the mode keeps the term (Ωm − ν) b†b (docs/physics.md,
    "Back-action evasion"): X1 turns into X2 at the rate δ = Im λ of the mode's
    eigenvalue there, the effective frequency less ν. Once it turns by more
    than a radian within the amplitude's decay time 2/Γeff (|δ| > Γeff/2), X1
    takes X2's back-action and the pair evades nothing; the tolerance on the
    tones' spacing is the mechanical linewidth, not the cavity's.
    """
    lower, upper = sorted(t.detuning_effective_hz for t in system.point.tones)
    nu = (upper - lower) / 2
    mode = steady.modes[0]
    delta = mode.effective_frequency_hz - nu
    if abs(delta) <= mode.effective_linewidth_hz / 2:
        return []
    return [f"mode {mode.name}: the pair's half-spacing ν = {nu:.9g} Hz misses the mode's "
            f"effective frequency {mode.effective_frequency_hz:.9g} Hz by {delta:.3g} Hz, more "
            f"than half its linewidth ({mode.effective_linewidth_hz:.3g} Hz): X1 turns into "
            "X2 within the motion's decay time and takes its back-action, so the pair does "
            "not evade it here; expected the tones' spacing 2 × the effective frequency "
            "within the mechanical linewidth"]


def _tone_sets(system, feasibility):
    """Bounds of the added tones recorded each alone and all together, for every mode
    with a bound (simulator.analysis.joint_feasibility); empty with fewer than two."""
    from simulator.analysis.joint_feasibility import detected_tone_sets, tone_set_bounds

    sets = detected_tone_sets(system.scenario)
    if not sets:
        return ()
    names = [m.name for m in system.scenario.mechanics]
    return tuple(b for f in feasibility
                 for b in tone_set_bounds(system.scenario, sets, names.index(f["mode"])))


def _protocol_bound(scenario, warnings):
    """Heating-rate bound of the schedule, or None with a warning saying why not."""
    from simulator.analysis.protocol_bound import heating_rate_bound
    from simulator.errors import InputError, OperatingPointError

    try:
        bound = heating_rate_bound(scenario)
    except (InputError, OperatingPointError) as error:
        warnings.append(f"no heating-rate bound for the schedule: {error}")
        return None
    if not (math.isfinite(bound.heating_rate_error) and bound.heating_rate_error > 0):
        warnings.append("no heating-rate bound for the schedule: its record does not "
                        "determine the heating rate (a detection without the anti-Stokes "
                        "line, or segments that leave Γm and Γm·n_th unresolved)")
        return None
    return bound


def _tone_points(system):
    """The operating point seen from each tone (the detected one first), for the regime
    checks: with several tones every cavity mode a tone drives is checked."""
    point = system.point
    if not point.several_tones:
        return (point,)
    from simulator.model.detected_tone import tone_point_of

    return (point,) + tuple(tone_point_of(system.scenario, point, k)
                            for k in range(len(point.tones)))


def _explained(system, laser):
    """The laser report, each apparent occupation with the causes of its gap to the exact one."""
    if system.several_tones or not any("apparent_occupation_from_asymmetry" in entry
                                       for entry in laser):
        return laser  # the split of the gap by cause takes one tone only
    from simulator.linear.occupation_gap import occupation_gaps

    return tuple(entry | {"apparent_occupation_gap": gap.to_dict() | {
        "explanation": gap.text()}} for entry, gap in zip(laser, occupation_gaps(system),
                                                           strict=True))


def _feasibility(system, steady):
    """Per-mode measurement-time bounds (simulator.analysis.feasibility)."""
    from simulator.analysis import feasibility as fz

    scenario = system.scenario
    # a mode without coupling or drive leaves no trace in the record: no bound
    informative = [j for j, mode in enumerate(scenario.mechanics)
                   if mode.coupling_hz != 0 and scenario.drive.power_w != 0]
    if system.several_tones:  # the detected tone's coupling (detection.tone)
        informative = [j for j, mode in enumerate(system.point.modes)
                       if mode.coupling_rate_hz != 0]
    out = []
    for j, bound in zip(informative, fz.occupation_bounds(system, informative, steady=steady),
                        strict=True):
        entry = {"mode": bound.mode, "occupation_error_1s": bound.error_one_second,
                 "parameters": list(bound.paths), "significance": fz.ASYMMETRY_SIGNIFICANCE,
                 "asymmetry_time_s": None}
        if scenario.detection.scheme == "heterodyne":
            entry["asymmetry_time_s"] = fz.asymmetry_time(system, j, steady=steady).duration_s
        out.append(entry)
    return tuple(out)
