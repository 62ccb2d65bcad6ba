"""Everything the linear engine says about a scenario, in one frozen report.

:func:`inspect_scenario` runs operating point, linear model, stability and
steady state, and collects the regime warnings an experimenter should read.
The report converts to plain data (``to_dict``) for ``noisechain inspect
--json`` and to text for the terminal.
"""

import dataclasses
import math
import warnings as python_warnings

from simulator.linear.laser_effects import occupation_report
from simulator.linear.steady_state import STRONG_COUPLING_TOLERANCE, steady_state
from simulator.linear.tone_rates import tone_rows, tone_text
from simulator.model import laser_noise
from simulator.model.detected_tone import detected_tone_names
from simulator.model.system import as_system
from simulator.model.tone_validity import ToneNoiseWarning, ToneSpacingWarning
from simulator.model.units import photon_energy_j
from simulator.scenario.plausibility import plausibility_warnings
from simulator.scenario.units import dbm_from_watts, power_text


@dataclasses.dataclass(frozen=True, kw_only=True)
class Inspection:
    """Operating point, stability and (when stable) steady state of a scenario."""

    system: object  # simulator.model.system.System
    steady: object  # SteadyState, or None when unstable
    warnings: tuple
    feasibility: tuple = ()  # per mode: dict of measurement-time bounds (heterodyne)
    regime: object = None  # simulator.master.regime.RegimeVerdict: is the linear engine valid?
    laser: tuple = ()  # per mode: laser-noise occupations (simulator.model.laser_noise)
    tone_sets: tuple = ()  # several recorded tones: bounds of each alone and all together
    quadratures: object = None  # QuadratureBudget of a back-action-evading pair
    resolution: tuple = ()  # its Resolution, and that of one tone on the same device
    protocol: object = None  # simulator.analysis.protocol_bound.HeatingBound of a [schedule]

    @property
    def scenario(self):
        """The scenario inspected."""
        return self.system.scenario

    @property
    def point(self):
        """Its operating point."""
        return self.system.point

    @property
    def stability(self):
        """Its stability verdict."""
        return self.system.stability

    def to_dict(self):
        """Plain data for JSON: numbers in SI units, frequencies in Hz."""
        p, st = self.point, self.steady
        # a back-action-evading pair is demodulated at its mean frequency, no tone's
        detected = None if self.scenario.detection.backaction_evading else \
            detected_tone_names(self.scenario)[0]
        # the power of the tone (or pair) whose photons the point shows: Φ·hf of the
        # detected tone; for a pair (Φ− + Φ+)·hf̄, the sum of both powers up to a
        # fraction (Φ− − Φ+)/(Φ− + Φ+)·Ωm/ω̄; the drive's as given with one tone
        power = (p.input_photon_flux * photon_energy_j(p.drive_frequency_hz)
                 if p.several_tones else self.scenario.drive.power_w)
        modes = []
        for j, mp in enumerate(p.modes):
            entry = {
                "name": mp.name,
                "frequency_hz": mp.frequency_hz,
                "linewidth_hz": mp.linewidth_hz,
                "single_photon_coupling_hz": mp.single_photon_coupling_hz,
                "g_hz": mp.coupling_rate_hz,
                "zero_point_amplitude_m": mp.zero_point_amplitude_m,
                "bath_occupation": mp.bath_occupation,
                "cooperativity": mp.cooperativity,
                "quantum_cooperativity": _finite(mp.quantum_cooperativity),
                "sideband_resolution": mp.sideband_resolution,
            }
            if st is not None:
                ms = st.modes[j]
                entry.update({
                    "optical_damping_hz": ms.optical_damping_hz,
                    "optical_spring_hz": ms.optical_spring_hz,
                    "anti_stokes_rate_hz": ms.anti_stokes_rate_hz,
                    "stokes_rate_hz": ms.stokes_rate_hz,
                    "effective_frequency_hz": ms.effective_frequency_hz,
                    "effective_linewidth_hz": ms.effective_linewidth_hz,
                    "occupation": ms.occupation,
                    "weak_coupling_occupation": _finite(ms.weak_coupling_occupation),
                    "backaction_limit": _finite(ms.backaction_limit),
                })
                why = backaction_limit_not_applicable(ms)
                if why:
                    entry.update(backaction_limit=None, backaction_limit_not_applicable=why)
            if self.laser:
                entry.update(self.laser[j])
            modes.append(entry)
        return {
            "scenario": self.scenario.scenario.name,
            "source": self.scenario.source,
            "drive_frequency_hz": p.drive_frequency_hz,
            "drive_power_w": power,
            "drive_power_dbm": _finite(dbm_from_watts(power)),
            "input_photon_flux_per_s": p.input_photon_flux,
            "photon_number": p.photon_number,
            "photon_number_branches": list(p.branches),
            "bistable": p.bistable,
            "branch": p.branch,
            "detuning_bare_hz": p.detuning_bare_hz,
            "detuning_effective_hz": p.detuning_effective_hz,
            "static_shift_hz": p.static_shift_hz,
            "stable": self.stability.stable,
            "growth_rate_hz": self.stability.growth_rate_hz,
            "instability_cause": self.stability.cause,
            "cavity_occupation": None if st is None else st.cavity_occupation,
            "modes": modes,
            "feasibility": [dict(f) for f in self.feasibility],
            **({"tone_sets": [dataclasses.asdict(b) for b in self.tone_sets]}
               if self.tone_sets else {}),
            **({"detected_tone": detected,
                "tones": _with_field_occupations(tone_rows(p, detected),
                                                 None if detected is None else st)}
               if p.several_tones else {}),
            **({"backaction_evasion": self.quadratures.to_dict() | {
                "resolution": [r.to_dict() for r in self.resolution]}}
               if self.quadratures is not None else {}),
            "regime": None if self.regime is None else self.regime.to_dict(),
            "protocol": (None if self.protocol is None
                         else dataclasses.asdict(self.protocol)),
            "warnings": list(self.warnings),
        }

    def to_text(self):
        """Human-readable report for the terminal."""
        d = self.to_dict()
        lines = [f"scenario {d['scenario']}  ({d['source']})", "",
                 "operating point" + (" (the pair at its mean frequency; occupations "
                                      "from both tones)" if self.scenario.detection
                                      .backaction_evading else
                                      f" (the detected tone, {d['detected_tone']}; "
                                      "occupations from every tone)" if "tones" in d else "")]
        lines.append(f"  drive power            {power_text(d['drive_power_w'])}")
        lines.append(f"  intracavity photons    {d['photon_number']:.6g}"
                     + ("   (bistable: branches " + ", ".join(
                         f"{b:.6g}" for b in d["photon_number_branches"])
                        + f"; using {d['branch']})" if d["bistable"] else ""))
        lines.append(f"  detuning bare          {d['detuning_bare_hz']:.6g} Hz")
        lines.append(f"  detuning effective     {d['detuning_effective_hz']:.6g} Hz"
                     f"   (static shift {d['static_shift_hz']:.6g} Hz)")
        verdict = "stable" if d["stable"] else f"UNSTABLE: {d['instability_cause']}"
        lines.append(f"  stability              {verdict}"
                     f"   (max growth rate {d['growth_rate_hz']:.6g} Hz)")
        if d["cavity_occupation"] is not None:
            whose = " (the drive's field)" if d.get("detected_tone") not in (None, "drive") else ""
            lines.append(f"  cavity occupation      {d['cavity_occupation']:.6g}{whose}")
        rows = [("g (Hz)", "g_hz"), ("bath occupation", "bath_occupation"),
                ("cooperativity", "cooperativity"),
                ("quantum cooperativity", "quantum_cooperativity"),
                ("sideband resolution Ωm/κ", "sideband_resolution"),
                ("optical damping (Hz)", "optical_damping_hz"),
                ("optical spring (Hz)", "optical_spring_hz"),
                ("effective frequency (Hz)", "effective_frequency_hz"),
                ("effective linewidth (Hz)", "effective_linewidth_hz"),
                ("occupation (exact)", "occupation"),
                ("occupation (weak coupling)", "weak_coupling_occupation"),
                ("laser noise η_c n_c", "laser_input_occupation"),
                ("excess from laser noise", "laser_noise_excess_occupation"),
                ("apparent (sideband ratio)", "apparent_occupation_from_asymmetry"),
                ("back-action limit n_min", "backaction_limit")]
        for mode in d["modes"]:
            lines += ["", f"mode {mode['name']}"]
            for label, key in rows:
                if key in mode:
                    value = mode[key]
                    text = "inf" if value is None else f"{value:.6g}"
                    if f"{key}_not_applicable" in mode:
                        text = f"not applicable ({mode[key + '_not_applicable']})"
                    lines.append(f"  {label:<28}{text}")
            if "apparent_occupation_gap" in mode:
                lines.append(f"    {mode['apparent_occupation_gap']['explanation']}")
        lines += tone_text(d.get("tones", ()))
        for f in d["feasibility"]:
            lines += ["", f"feasibility, mode {f['mode']} (Cramér–Rao, Whittle)"]
            lines.append(f"  occupation error after 1 s       "
                         f"{f['occupation_error_1s']:.4g}  (exact model; all of "
                         f"{', '.join(f['parameters'])} unknown)")
            if f.get("asymmetry_time_s") is not None:
                lines.append(f"  time to resolve the asymmetry    "
                             f"{f['asymmetry_time_s']:.4g} s at {f['significance']:g} "
                             "standard deviations")
                lines += _long_time_hint(f)
        if self.tone_sets:
            from simulator.analysis.joint_feasibility import tone_set_text

            lines += tone_set_text(self.tone_sets)
        if self.quadratures is not None:
            lines += [""] + self.quadratures.text() + _resolution_text(self.resolution)
        if self.protocol is not None:
            lines += ["", "protocol ([schedule], first mode)", f"  {self.protocol.text()}"]
        if d["regime"] is not None:
            lines += ["", f"regime (linear engine validity)  {d['regime']['level']}",
                      f"  {d['regime']['reason']}"]
        if d["warnings"]:
            lines += ["", "warnings"] + [f"  - {w}" for w in d["warnings"]]
        return "\n".join(lines)


def _with_field_occupations(rows, steady):
    """Each tone's row with the occupation of its own fluctuation field (its states
    ``cavity.X/Y`` for the drive, ``<tone>.X/Y`` otherwise); ``steady`` None (unstable,
    or a back-action-evading pair, whose one field is the pair's) leaves them out."""
    if steady is None:
        return rows
    names, v = list(steady.states), steady.covariance
    for k, row in enumerate(rows):
        i = names.index("cavity.X" if k == 0 else f"{row['name']}.X")
        row["field_occupation"] = float((v[i, i] + v[i + 1, i + 1] - 1) / 2)
    return rows


def _resolution_text(resolution):
    """The feasibility lines of a back-action-evading pair beside one tone's."""
    if not resolution:
        return []
    lines = ["", "feasibility, bath occupation n_th the only unknown (Cramér–Rao, Whittle)"]
    for r in resolution:
        lines.append(f"  {r.scheme:<38}error after 1 s {r.occupation_error_1s:.4g}; "
                     f"zero-point ½ resolved at {r.to_dict()['significance']:g}σ after "
                     f"{r.zero_point_time_s:.4g} s")
    return lines


# an asymmetry time beyond this gets a hint on why, and where to look for a shorter one
LONG_INTEGRATION_S = 86400.0


def _long_time_hint(f):
    """Lines explaining an integration time beyond a day (empty otherwise)."""
    if f.get("asymmetry_time_s") is None or not f["asymmetry_time_s"] > LONG_INTEGRATION_S:
        return []
    return ["    more than a day: a sideband weak against the record's floor sets it "
            "(`noisechain spectrum` gives each",
            "    line's height over the floor); `noisechain plan` searches detuning and power "
            "for a shorter time."]


def _finite(x):
    return x if math.isfinite(x) else None


def backaction_limit_not_applicable(ms):
    """Why n_min = A+/(A− − A+) does not apply to mode state ``ms``, or ``""``.

    The formula is the floor of sideband cooling: it needs net optical
    damping, A− > A+ (Marquardt, Chen, Clerk, Girvin, PRL 99, 093902 (2007)).
    """
    a_minus, a_plus = ms.anti_stokes_rate_hz, ms.stokes_rate_hz
    if a_minus == 0 and a_plus == 0:
        return "no light scatters: there is no drive or no coupling"
    if not a_minus > a_plus:
        return (f"the Stokes rate {a_plus:.3g} Hz is not below the anti-Stokes rate "
                f"{a_minus:.3g} Hz: the light heats this mode rather than cooling it, "
                "so there is no cooling limit")
    return ""


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
        resolution = resolution_comparison(system) if feasibility else ()
        feasibility = False  # the sideband bounds do not apply to one quadrature
    feasibility = (_feasibility(system, steady) if steady is not None and feasibility
                   else ())
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
