"""The report of an inspection: the :class:`Inspection` type, its plain data and its text.

:func:`simulator.workflows.inspection.inspect_scenario` assembles it;
here it turns into plain data (``to_dict``, for ``noisechain inspect
--json``) and into the lines printed on the terminal (``to_text``), with the
small helpers that word its feasibility, tone and cooling-limit lines.
"""

import dataclasses
import math

from simulator.linear.tone_rates import tone_rows, tone_text
from simulator.model.detected_tone import detected_tone_names
from simulator.model.units import photon_energy_j
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
            # the fluctuations' photons, the mean field removed (docs/physics.md)
            whose = (" (fluctuations about the mean field; the drive's field)"
                     if d.get("detected_tone") not in (None, "drive")
                     else " (fluctuations about the mean field)")
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
            if "tones" in d and not self.scenario.detection.backaction_evading:
                lines.append(f"  (g, cooperativities, Ωm/κ: the detected tone "
                             f"{d['detected_tone']}'s; damping, spring, occupations, "
                             "n_min: every tone's)")
            for label, key in rows:
                if key in mode:
                    value = mode[key]
                    text = "inf" if value is None else f"{value + 0.0:.6g}"  # no "-0"
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
            elif self.scenario.detection.scheme == "homodyne":
                lines.append("  time to resolve the asymmetry    none from homodyne: one "
                             "quadrature folds both sidebands onto |Ω| (heterodyne separates "
                             "them)")
        if self.tone_sets:
            from simulator.analysis.joint_feasibility import tone_set_text

            lines += tone_set_text(self.tone_sets)
        if self.quadratures is not None:
            lines += [""] + self.quadratures.text() + _resolution_text(self.resolution)
        if self.protocol is not None:
            names = detected_tone_names(self.scenario)  # several recorded: the first's
            seen = f", the channel of the detected tone {names[0]}" if len(names) > 1 else ""
            lines += ["", f"protocol ([schedule], first mode{seen})", f"  {self.protocol.text()}"]
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
