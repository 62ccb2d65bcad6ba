"""The ``[plan]`` section: the best operating point within bounds and constraints.

    [plan]
    objective = "asymmetry_time"          # or "occupation_error", "occupation"
    max_power_w = 5e-9
    [plan.parameters]
    "drive.detuning_hz" = { start = -0.6, stop = 0.2, num = 21,
                            unit = "mechanics[0].frequency_hz" }
    "drive.power_w" = { start = 1e-11, stop = 5e-9, num = 21, log = true }

The free parameters use the syntax of ``[sweep.parameters]``
(:func:`simulator.scenario.sweep_section.parse_parameters`): a range table
gives the bounds (``start``, ``stop``), the spacing of the search coordinate
(``log``), the unit and, in ``num``, the points of the coarse grid along that
parameter; a list of values is a discrete choice, searched on the grid and held
during the local refinement. The search itself is :mod:`simulator.workflows.plan`.
"""

import dataclasses

from simulator.scenario.schema import param
from simulator.scenario.sweep_section import grid_size_problems, parse_parameters

OBJECTIVES = ("asymmetry_time", "occupation_error", "occupation", "recorded_tones_time",
              "thermal_variance_time")
REGIME_LEVELS = ("linear", "marginal", "nonlinear")


@dataclasses.dataclass(frozen=True, kw_only=True)
class Plan:
    """``[plan]``: free parameters, the objective and the constraints of the best point."""

    objective: str = param(
        "what to minimise: the integration time to resolve the quantum sideband asymmetry "
        "(heterodyne), the Cramér–Rao error of the occupation after duration_s, the "
        "steady-state occupation, or with several tones the time T of the tones recorded "
        "together (joint Whittle bound: the sideband ratio told from 1 at significance); "
        "thermal_variance_time: the time for the Cramér–Rao error of the mode's thermal "
        "variance n_th + ½ to fall to relative_error of it (X1's, for a back-action-evading "
        "pair)",
        choices=OBJECTIVES, default="asymmetry_time")
    mode: int = param("index of the mechanical mode the objective is about (0: the first "
                      "[[mechanics]] table)", check="nonnegative", default=0, high=999)
    significance: float = param(
        "standard deviations at which the asymmetry counts as resolved "
        "(objectives asymmetry_time and recorded_tones_time)", check="positive", default=5.0,
        high=100.0)
    duration_s: float = param(
        "integration time of the occupation error (objective occupation_error)", unit="s",
        check="positive", default=1.0, high=1e9)
    relative_error: float = param(
        "the error of the thermal variance n_th + ½ asked for, as a fraction of it "
        "(objective thermal_variance_time)", check="positive", default=0.01, high=0.5)
    parameters: dict = param(
        "parameter path → range {start, stop, num, log, unit} (bounds, spacing, coarse-grid "
        "points) or a list of values (a discrete choice)", parser=parse_parameters,
        accepts="a table: parameter path = {start, stop, num, log = false, unit = path} "
                "or [values], as in [sweep.parameters]")
    max_power_w: float | None = param(
        "largest drive power allowed; left out: no limit", unit="W", check="positive",
        default=None, high=1e3)
    max_photon_number: float | None = param(
        "largest intracavity photon number allowed; left out: no limit", check="positive",
        default=None, high=1e20)
    max_occupation: float | None = param(
        "largest steady-state occupation of the mode allowed, (⟨X²⟩ + ⟨Y²⟩ − 1)/2 (for a "
        "back-action-evading pair it carries the heating of X2); left out: no limit",
        check="positive", default=None, high=1e15)
    max_backaction_heating: float | None = param(
        "back-action-evading pair only: largest variance, in quanta, the cavity's noise "
        "may drive into the conjugate quadrature X2; left out: no limit",
        check="positive", default=None, high=1e15)
    max_growth_rate_hz: float = param(
        "stability margin: the largest eigenvalue real part of the drift matrix, λ/2π, "
        "must stay at or below this (negative: every fluctuation decays at least this "
        "fast); 0: stable is enough", unit="Hz", check="real", default=0.0)
    bistability_margin: float = param(
        "distance from a bistable region: the photon number must stay single-valued "
        "when the drive power and the detuning each change by up to this fraction; 0: "
        "only the point itself", check="unit_interval", default=0.1)
    regime: str = param(
        "worst regime verdict of the linear engine accepted (simulator.master.regime)",
        choices=REGIME_LEVELS, default="marginal")
    heating_per_photon_k: float = param(
        "absorption heating: every mode's bath temperature rises by this per intracavity "
        "photon; 0: none", unit="K", check="nonnegative", default=0.0, high=1e6)
    heating_k_per_w: float = param(
        "absorption heating: every mode's bath temperature rises by this per watt of "
        "circulating power n̄·ħω·FSR (needs free_spectral_range_hz); 0: none", unit="K/W",
        check="nonnegative", default=0.0, high=1e12)
    free_spectral_range_hz: float | None = param(
        "free spectral range c/2L of the cavity, for the circulating power of "
        "heating_k_per_w", unit="Hz", check="positive", default=None, high=1e15)

    def problems(self):
        """Cross-field checks: yields ``(key, message)`` for each inconsistency."""
        yield from grid_size_problems(  # the coarse grid
            self.parameters, "fewer points in num: the planner refines between them")
        if self.heating_k_per_w > 0 and self.free_spectral_range_hz is None:
            yield ("free_spectral_range_hz", "missing while heating_k_per_w > 0; expected "
                   "the free spectral range in Hz (circulating power = n̄·ħω·FSR)")
