"""Why the occupation from the sideband ratio differs from the exact steady-state one.

The sideband summary (:mod:`simulator.linear.sidebands`) reads n from the
ratio R of the anti-Stokes and Stokes line weights, n_R = R/(1 − R), beside the
exact Lyapunov occupation n. The weights are n and n + 1 only for a single mode,
weakly coupled, whose other noise inputs are vacuum. Each other cause is
measured here by re-solving the model without it, with nothing else changed:

- thermal cavity input (``cavity.bath_occupation`` set to 0): the cavity's
  own noise drives the motion and reaches the detector directly; the two
  interfere (noise squashing). In weak coupling with resolved sidebands and a
  red-detuned drive the anti-Stokes weight becomes n − 2 n_c and the Stokes
  weight stays n + 1, so n_R − n = −2 n_c (1 + n)/(1 + 2 n_c) ≈ −2 n_c, with
  n_c = (κ_0/κ) n_bath the cavity's thermal occupation (Weinstein et al.,
  Phys. Rev. X 4, 041003 (2014); the same interference of the vacuum is the
  asymmetry of Safavi-Naeini et al., Phys. Rev. Lett. 108, 033602 (2012)).
  Derivation (adiabatic cavity, rotating-wave beam splitter, internal bath
  a_0): the output's a_0 part is a_0 √(κ_ex κ_0)/κ · (−γ + 2iω)/(Γ/2 − iω),
  whose Lorentzian weight, divided by the filter Γ_opt κ_ex/κ, is
  −n_c (Γ + γ)/Γ; the motion's own line is (γ n_th)/Γ = n − n_c Γ_opt/Γ; the
  sum is n − 2 n_c. The Stokes line sees the cavity noise only through the
  counter-rotating rate, smaller by κ²/(16 Ωm²).
- classical laser noise (:func:`simulator.linear.laser_effects.without_laser_noise`):
  the same interference with classical noise (docs/laser-noise.md).
- other modes' lines overlapping (every other mode removed, at the same
  effective detuning so that the operating point stays).
- other tones (several ``[[tones]]``; below, :func:`tone_occupation_gaps`): the
  ratio is the detected tone's, and the other tones, replaced by the damping,
  heating and spring they add, are a cause of their own.
- coupling past the weak limit: what remains with all three removed — the
  mode alone with vacuum inputs, whose weights differ from n and n + 1 only
  as the self-energy varies across the line (order g/κ).

Each term is the change of n_R − n when its cause is removed; the sum of the
terms equals the difference up to the interplay of the causes, reported as the
remainder.
"""

import dataclasses

import numpy as np

from simulator.errors import OperatingPointError, ScenarioError
from simulator.linear.laser_effects import without_laser_noise
from simulator.linear.sidebands import sideband_summary
from simulator.linear.weak_coupling import optical_spring, scattering_rates
from simulator.model import laser_noise
from simulator.model.system import as_system
from simulator.model.units import angular, ordinary, photon_energy_j
from simulator.scenario.loader import scenario_from_dict

CAVITY = "thermal cavity input"
LASER = "classical laser noise"
OVERLAP = "other modes' lines overlapping"
STRONG = "coupling past the weak limit"
OTHER_TONES = "other tones beyond their rates"


@dataclasses.dataclass(frozen=True, kw_only=True)
class OccupationGap:
    """n_R − n of one mode, split by cause (see the module notes)."""

    mode: str
    from_ratio: float
    steady_state: float
    terms: dict  # cause -> its share of n_R − n
    remainder: float  # n_R − n − Σ terms: the causes' interplay
    cavity_thermal_occupation: float  # n_c = (κ_0/κ) n_bath
    closed_form_cavity_term: float  # −2 n_c (1 + n)/(1 + 2 n_c), or NaN where it does not apply

    @property
    def difference(self):
        """n_R − n."""
        return self.from_ratio - self.steady_state

    def to_dict(self):
        """Plain data for JSON."""
        return {"difference": self.difference, "terms": dict(self.terms),
                "remainder": self.remainder,
                "cavity_thermal_occupation": self.cavity_thermal_occupation,
                "closed_form_cavity_term": self.closed_form_cavity_term}

    def text(self):
        """One line: the difference and its causes."""
        d = self.difference
        if not np.isfinite(d):
            return "no difference to explain (the ratio gives no occupation)"
        side = "below" if d < 0 else "above"
        parts = []
        for cause, value in self.terms.items():
            note = ""
            if cause == CAVITY and np.isfinite(self.closed_form_cavity_term):
                note = (f" (≈ −2 n_cav(1 + n)/(1 + 2 n_cav) = "
                        f"{self.closed_form_cavity_term:+.4g}, n_cav = "
                        f"{self.cavity_thermal_occupation:.4g})")
            parts.append(f"{cause} {value:+.4g}{note}")
        return (f"n from the ratio is {abs(d):.4g} {side} the steady state: "
                + ", ".join(parts) + f"; remainder {self.remainder:+.2g}")


def occupation_gaps(system, summaries=None):
    """The gap n_R − n of every mode, split by cause.

    Parameters
    ----------
    system : simulator.model.system.System
        Or a scenario, built into one.
    summaries : tuple of SidebandSummary, optional
        The system's own sideband summary, if already computed.

    Returns
    -------
    tuple of OccupationGap
        One per mode, in scenario order.
    """
    system = as_system(system, several_tones=True).require_stable()
    if system.several_tones:  # the detected tone's ratio, other tones a cause of their own
        return tone_occupation_gaps(system)
    summaries = (sideband_summary(system, at_digitiser=False) if summaries is None
                 else summaries)
    base = _plain(system.scenario)
    return tuple(_gap(system, base, j, s) for j, s in enumerate(summaries))


def _gap(system, base, j, summary):
    scenario, point = system.scenario, system.point
    gap = summary.occupation_from_ratio - summary.steady_state_occupation
    removals = []
    if scenario.cavity.bath_occupation > 0:
        removals.append((CAVITY, _without_cavity_bath))
    if not laser_noise.is_quiet(scenario):
        removals.append((LASER, without_laser_noise))
    if len(scenario.mechanics) > 1:
        removals.append((OVERLAP, lambda sc: _mode_alone(sc, j, point.detuning_effective_hz)))
    terms = {}
    quiet = base
    for cause, remove in removals:
        terms[cause] = gap - _gap_of(remove(base), 0 if cause == OVERLAP else j)
        quiet = remove(quiet)
    alone = 0 if len(scenario.mechanics) > 1 else j
    terms[STRONG] = _gap_of(quiet, alone) if removals else gap
    n_c = (1.0 - point.external_linewidth_hz / point.cavity_linewidth_hz) * \
        scenario.cavity.bath_occupation
    n = summary.steady_state_occupation
    closed = (-2.0 * n_c * (1.0 + n) / (1.0 + 2.0 * n_c)
              if point.detuning_effective_hz < 0 and all(
                  m.sideband_resolution > 1 for m in point.modes) else float("nan"))
    return OccupationGap(mode=summary.mode, from_ratio=summary.occupation_from_ratio,
                         steady_state=summary.steady_state_occupation, terms=terms,
                         remainder=gap - sum(terms.values()), cavity_thermal_occupation=n_c,
                         closed_form_cavity_term=closed)


def _gap_of(scenario, j):
    """n_R − n of mode j; NaN if the scenario without a cause has no steady state."""
    try:
        s = sideband_summary(scenario, at_digitiser=False)[j]
    except (OperatingPointError, ScenarioError):
        return float("nan")
    return s.occupation_from_ratio - s.steady_state_occupation


def _plain(scenario):
    """The scenario without its sweep (a swept path may name what a removal takes away)."""
    data = scenario.to_dict()
    data.pop("sweep", None)
    return scenario_from_dict(data, source=scenario.source)


def _without_cavity_bath(scenario):
    return scenario.replace("cavity.bath_occupation", 0.0)


def _mode_alone(scenario, j, detuning_effective_hz):
    """Mode j alone, driven at the same effective detuning (the same operating point)."""
    data = scenario.to_dict()
    if len(data["mechanics"]) == 1:
        return scenario
    data["mechanics"] = [data["mechanics"][j]]
    data["drive"]["detuning_reference"] = "effective"
    data["drive"]["detuning_hz"] = float(detuning_effective_hz)
    return scenario_from_dict(data, source=scenario.source)


# Several tones: the ratio-occupation gap of the detected tone.
#
# With several tones (``[[tones]]``) the receiver reads the sidebands of one
# tone, ``detection.tone``, while the occupation n is set by all of them. The
# gap n_R − n of that tone's sideband ratio splits as above, with one more
# cause:
#
# - other tones (``OTHER_TONES``): every tone but the detected one replaced by
#   what it does to the motion in weak coupling, a damping Σk (A−,k − A+,k),
#   a heating Σk [A+,k (n_c,k + 1) + A−,k n_c,k] and an optical spring
#   (Marquardt, Chen, Clerk & Girvin, Phys. Rev. Lett. 99, 093902 (2007),
#   Eqs. (3)–(5); rates add over tones, Aspelmeyer, Kippenberg & Marquardt,
#   Rev. Mod. Phys. 86, 1391 (2014), Sec. VII), folded into the mode's
#   linewidth, bath occupation and frequency. The line keeps its width and
#   the mode its occupation to weak-coupling accuracy; what the term measures
#   is what the other tones do beyond their rates: their scattering through
#   the shared mechanics (counter-rotating terms, strong coupling) seen in the
#   detected tone's lines.
#
# The detected tone then stands alone as the ``[drive]`` of a one-tone scenario
# (its cavity mode, frequency, power and effective detuning), and the causes
# above (thermal cavity input of its mode,
# other mechanical modes, coupling past the weak limit) split the rest.


def tone_occupation_gaps(system):
    """:class:`OccupationGap` of every mode for the detected tone's record (module doc).

    Parameters
    ----------
    system : System or Scenario
        With several tones (without, this is
        :func:`simulator.linear.occupation_gap.occupation_gaps`).
    """
    whole = as_system(system, several_tones=True).require_stable()
    if not whole.several_tones:
        return occupation_gaps(whole)
    summaries = sideband_summary(whole, at_digitiser=False)
    alone = detected_alone(whole)
    rest = occupation_gaps(alone)
    gaps = []
    for summary, part in zip(summaries, rest, strict=True):
        gap = summary.occupation_from_ratio - summary.steady_state_occupation
        terms = {OTHER_TONES: gap - part.difference, **part.terms}
        gaps.append(OccupationGap(
            mode=summary.mode, from_ratio=summary.occupation_from_ratio,
            steady_state=summary.steady_state_occupation, terms=terms,
            remainder=gap - sum(terms.values()),
            cavity_thermal_occupation=part.cavity_thermal_occupation,
            closed_form_cavity_term=part.closed_form_cavity_term))
    return tuple(gaps)


def detected_alone(system):
    """One-tone scenario: the detected tone as the drive, the others folded into the modes.

    Each mechanical mode j gets Γ' = Γ + Σ_{k≠d} (A−,k − A+,k),
    Γ' n' = Γ n_th + Σ_{k≠d} [A+,k (n_c,k + 1) + A−,k n_c,k] and
    Ω' = Ω + Σ_{k≠d} δΩ_k (the tones' optical springs), at the detected tone's
    effective detuning; the coupling g0 is that of the detected tone's mode.
    """
    from simulator.model.detected_tone import detected_index
    from simulator.model.tone_point import coupling_matrix_hz

    scenario, point = system.scenario, system.point
    d = detected_index(scenario, point)
    tone = point.tones[d]
    cav = point.cavity_modes[tone.cavity_mode]
    g0 = coupling_matrix_hz(scenario)[tone.cavity_mode]
    data = scenario.to_dict()
    for key in ("tones", "cavity_modes", "couplings", "sweep", "plan", "schedule"):
        data.pop(key, None)
    data["drive"] = {"frequency_hz": float(tone.frequency_hz),
                     "power_w": float(tone.input_photon_flux
                                      * photon_energy_j(tone.frequency_hz)),
                     "detuning_hz": float(tone.detuning_effective_hz),
                     "detuning_reference": "effective"}
    data["cavity"] = {"linewidth_hz": float(cav.linewidth_hz),
                      "external_linewidth_hz": float(cav.external_linewidth_hz),
                      "bath_occupation": float(cav.bath_occupation)}
    data.setdefault("detection", {})["tone"] = "drive"
    for j, mode in enumerate(point.modes):
        damping, heating, spring = _others(point, d, j)
        entry = data["mechanics"][j]
        entry.pop("bath_temperature_k", None)
        width = mode.linewidth_hz + damping
        entry["linewidth_hz"] = float(width)
        entry["bath_occupation"] = float((mode.linewidth_hz * mode.bath_occupation + heating)
                                         / width)
        entry["frequency_hz"] = float(mode.frequency_hz + spring)
        entry["coupling_hz"] = float(g0[j])
    return scenario_from_dict(data, source=scenario.source)


def _others(point, detected, j):
    """Damping, heating (quanta × Hz) and spring (Hz) the tones other than ``detected`` add
    to mode ``j`` in weak coupling."""
    mode = point.modes[j]
    damping = heating = spring = 0.0
    for k, tone in enumerate(point.tones):
        if k == detected:
            continue
        cav = point.cavity_modes[tone.cavity_mode]
        n_c = (1.0 - cav.external_linewidth_hz / cav.linewidth_hz) * cav.bath_occupation
        args = {"g": float(angular(tone.coupling_rates_hz[j])),
                "kappa": float(angular(cav.linewidth_hz)),
                "detuning": float(angular(tone.detuning_effective_hz)),
                "frequency": float(angular(mode.frequency_hz))}
        down, up = scattering_rates(**args)
        damping += float(ordinary(down - up))
        heating += float(ordinary(up * (n_c + 1) + down * n_c))
        spring += float(ordinary(optical_spring(**args)))
    return damping, heating, spring

