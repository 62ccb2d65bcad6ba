"""Feasibility of a back-action-evading pair against one tone on the same device.

The quantity compared is the Cramér–Rao error of the mechanical bath
occupation n_th after one second of the scenario's own record (its receiver,
amplifier noise, efficiency and digitiser; Whittle information,
:func:`simulator.analysis.feasibility.fisher_matrix`), with n_th the only
unknown: the coupling and efficiency calibrated beforehand. For the pair the
record holds X1, whose thermal variance n_th + ½ sits on the imprecision
alone; for one tone the record holds both quadratures with the back-action it
drives. From that error follows the time after which the error is a fifth of
the zero-point variance ½ (the zero-point half-quantum resolved at five
standard deviations).

The single tone is the pair's lower (red-sideband) tone alone, holding the
pair's total intracavity photon number, with the same receiver: the usual
one-tone readout of a sideband-resolved device (a resonant tone would see its
motional sidebands a distance Ωm ≫ κ outside the cavity).

The planner's figure of merit (:func:`thermal_variance_time`, any scenario,
the pair's above all) is the time after which the Cramér–Rao error of the
mode's thermal variance n_th + ½ (X1's, for a pair) is a given fraction of
it, from the same information: T = (σ₁ / (ε (n_th + ½)))², σ₁ the error after
one second. For a pair it carries what limits the pair: the imprecision falls
as 1/(G− + G+)², but the counter-rotating residual, ∝ (κ/4Ωm)² G², sits on
X1's line with the thermal variance and no information about it; with the
floor far below the line the information goes as √(r)/V² (r the line's peak
over the floor, V X1's whole variance), so T is least where the residual is
half the thermal variance (tests/test_bae_plan.py checks both closed forms).
"""

import dataclasses
import math

from simulator.analysis.feasibility import ASYMMETRY_SIGNIFICANCE, fisher_matrix
from simulator.model.units import angular, photon_energy_j
from simulator.scenario.loader import scenario_from_dict

ZERO_POINT_VARIANCE = 0.5  # of X1 (vacuum variance ½)


@dataclasses.dataclass(frozen=True, kw_only=True)
class Resolution:
    """Cramér–Rao error of n_th after 1 s and the time to resolve the zero-point ½."""

    scheme: str
    occupation_error_1s: float
    zero_point_time_s: float

    def to_dict(self):
        """Plain data for JSON."""
        return {"scheme": self.scheme, "occupation_error_1s": self.occupation_error_1s,
                "zero_point_time_s": self.zero_point_time_s,
                "significance": ASYMMETRY_SIGNIFICANCE}


def single_tone_counterpart(system):
    """The scenario of the same device read by the pair's lower tone alone (module notes)."""
    scenario, point = system.scenario, system.point
    lower = min(point.tones, key=lambda t: t.detuning_effective_hz)
    cav = point.cavity_modes[lower.cavity_mode]
    kappa, kappa_ex, delta = angular([cav.linewidth_hz, cav.external_linewidth_hz,
                                      lower.detuning_effective_hz])
    photons = sum(t.photon_number for t in point.tones)
    flux = photons * (kappa**2 / 4 + delta**2) / kappa_ex  # n = κex Φ/(κ²/4 + Δ²)
    data = scenario.to_dict()
    for key in ("tones", "sweep", "plan", "schedule"):
        data.pop(key, None)
    data["detection"] = {**data.get("detection", {}), "backaction_evading": False}
    drive = {k: v for k, v in data["drive"].items() if k != "wavelength_m"}
    drive.update(frequency_hz=lower.frequency_hz, detuning_reference="effective",
                 detuning_hz=lower.detuning_effective_hz,
                 power_w=float(flux * photon_energy_j(lower.frequency_hz)))
    data["drive"] = drive
    return scenario_from_dict(data, source=f"{scenario.source} (single-tone counterpart)")


def bath_error_one_second(system, mode=0):
    """Cramér–Rao error of mode ``mode``'s bath occupation n_th after 1 s of the record,
    n_th the only unknown (∞ when the record carries no information about it)."""
    path = f"mechanics[{mode}].bath_occupation"
    if system.scenario.mechanics[mode].bath_occupation is None:  # n_th itself, not kelvins
        system = system.replace(path, system.point.modes[mode].bath_occupation)
    fisher = float(fisher_matrix(system, [path])[0, 0])
    return 1 / math.sqrt(fisher) if fisher > 0 else math.inf


@dataclasses.dataclass(frozen=True, kw_only=True)
class VarianceTime:
    """Time for the thermal variance n_th + ½ to a relative error (module notes)."""

    mode: str
    thermal_variance: float  # n_th + ½
    error_one_second: float  # σ of n_th (and of n_th + ½) after 1 s
    relative_error: float
    duration_s: float

    def to_dict(self):
        """Plain data for JSON."""
        return dataclasses.asdict(self)


def thermal_variance_time(system, mode=0, relative_error=0.01):
    """:class:`VarianceTime` of ``system``'s record for mode ``mode`` (module notes).

    Parameters
    ----------
    system : simulator.model.system.System
        Or a scenario; with several tones, the detected tone's record.
    mode : int
    relative_error : float
        ε: the error asked for, as a fraction of n_th + ½.
    """
    from simulator.errors import InputError
    from simulator.model.system import as_system

    if not 0 < relative_error < 1:
        raise InputError(f"relative_error = {relative_error!r}; expected a fraction between "
                         "0 and 1 of the thermal variance n_th + ½")
    system = as_system(system, several_tones="detected").require_stable()
    variance = system.point.modes[mode].bath_occupation + ZERO_POINT_VARIANCE
    error = bath_error_one_second(system, mode)
    return VarianceTime(mode=system.point.modes[mode].name, thermal_variance=float(variance),
                        error_one_second=float(error), relative_error=float(relative_error),
                        duration_s=float((error / (relative_error * variance)) ** 2))


def pair_quantities(system):
    """A pair's X2 back-action heating and X1 counter-rotating residual, in quanta
    (:func:`simulator.linear.quadratures.quadrature_budget`), by the names the planner
    and sweeps report them under."""
    from simulator.linear.quadratures import quadrature_budget

    budget = quadrature_budget(system)
    return {"x2_backaction_heating": budget.x2_heating,
            "x1_counter_rotating": budget.x1_counter_rotating}


def _resolution(system, scheme):
    """:class:`Resolution` of ``system``'s record, n_th the only unknown."""
    error = bath_error_one_second(system, 0)
    time = (ASYMMETRY_SIGNIFICANCE * error / ZERO_POINT_VARIANCE) ** 2
    return Resolution(scheme=scheme, occupation_error_1s=float(error),
                      zero_point_time_s=float(time))


def resolution_comparison(system):
    """(:class:`Resolution` of the pair, of the single-tone counterpart)."""
    from simulator.model.system import System, as_system

    system = as_system(system, several_tones="detected")
    single = System(single_tone_counterpart(system)).require_stable()
    return (_resolution(system, "back-action-evading pair"),
            _resolution(single, "one red-sideband tone, same photons"))

