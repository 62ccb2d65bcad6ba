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
from simulator.model import laser_noise
from simulator.model.system import as_system
from simulator.scenario.loader import scenario_from_dict

CAVITY = "thermal cavity input"
LASER = "classical laser noise"
OVERLAP = "other modes' lines overlapping"
STRONG = "coupling past the weak limit"


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
    system = as_system(system, stage="simulator.linear.occupation_gap.occupation_gaps")
    system = system.require_stable()
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
