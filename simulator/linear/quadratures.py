"""The measured and the conjugate quadrature of a back-action-evading pair.

With a declared pair (``detection.backaction_evading``, the model of
:mod:`simulator.model.backaction_evasion`) the record measures the mechanical
quadrature X1 through the cavity's phase quadrature; the back-action of the
cavity's amplitude noise goes into the conjugate X2. :func:`quadrature_budget`
splits the stationary variances of X1 and X2 by noise source (one Lyapunov
solution per source: the sources are independent) and refers the measurement
imprecision to X1:

    S_imp(ω) = (κ²/4 + ω²)/(2 η κex c²) + κin n_bath/c²,   c = G− + G+,

the phase quadrature's shot noise (and the internal loss's thermal noise)
divided by the transduction |κex^½ c/(κ/2 − iω)|² of X1 into it, for an ideal
homodyne detector of efficiency η and the pair centred on the cavity, Δ̄ = 0
(a mean detuning changes it at relative order (2Δ̄/κ)²). A heterodyne or
phase-preserving receiver doubles it and its amplifier adds its own noise:
:attr:`QuadratureBudget.record_imprecision_quanta` reads the same quantity
from the record's exact spectrum at the digitiser, whatever Δ̄.
In quanta at the line's peak, n_imp = S_imp(0) Γeff/4 (one quantum of X1
variance gives the Lorentzian peak 4/Γeff); a continuous measurement of the
position with one tone adds at least ½ quantum there, the standard quantum
limit, which the pair evades: n_imp falls as 1/(G− + G+)² with no back-action
on X1.

Closed forms, for equal couplings G, Δ̄ = 0 and ν = Ωm (the rotating-wave
model with the counter-rotating correction; derived from the model's
equations, docs/physics.md "Back-action evasion"):

    Var X1 = n_th + ½ + (A+ + A−)(n_c + ½)/Γm,   A± = G² κ/(κ²/4 + 4Ωm²),
    Var X2 = Var X1 + 4c²(n_c + ½)/(Γm (Γm + κ)),

n_c = (κin/κ) n_bath. The first is the thermal motion plus the residual
counter-rotating back-action, about ½ (κ/4Ωm)² of the second's heating
4c²(n_c + ½)/(Γm(Γm + κ)) ≈ 16 G²/(κΓm) (n_c + ½).

References
----------
Clerk, Marquardt & Jacobs, New J. Phys. 10, 095010 (2008), Sec. 3: the
imprecision of X1 falls as κ/G² with no back-action on X1, all of it heating
X2 (the forms here are ours, from the model's equations; their equation
numbers and quadrature normalisation recalled from memory, not checked).
"""

import dataclasses

import numpy as np

from simulator.linear.record_budget import digitiser_spectrum
from simulator.model.backaction_evasion import COUNTER_ROTATING, lab_mechanics, pair_parameters
from simulator.model.statespace import solve_lyapunov
from simulator.model.system import as_system

# The standard quantum limit of a continuous position measurement with one tone: the
# least noise added at the mechanical resonance, in quanta (common practice; Clerk,
# Devoret, Girvin, Marquardt & Schoelkopf, Rev. Mod. Phys. 82, 1155 (2010), Sec. VI).
STANDARD_QUANTUM_LIMIT = 0.5


@dataclasses.dataclass(frozen=True, kw_only=True)
class QuadratureBudget:
    """Variances of X1 (measured) and X2 (conjugate) by source, and X1's imprecision."""

    mode: str
    x1_variance: float  # exact (Lyapunov), vacuum ½
    x2_variance: float
    x1_by_source: dict  # source name -> variance of X1 it drives
    x2_by_source: dict
    imprecision_per_hz: float  # S_imp(0), X1²/Hz, two-sided, symmetrised
    imprecision_quanta: float  # n_imp = S_imp(0) Γeff/4
    efficiency: float
    sideband_ratio: float  # κ/4Ωm
    record_imprecision_quanta: float  # the same from the record at the digitiser

    @property
    def x2_heating(self):
        """Variance the cavity's noise drives into X2 (the evaded back-action)."""
        return sum(v for k, v in self.x2_by_source.items() if _is_cavity(k))

    @property
    def x1_backaction(self):
        """Variance the cavity's noise drives into X1 through the rotating-wave terms
        (zero for equal couplings on resonance)."""
        return sum(v for k, v in self.x1_by_source.items() if _is_cavity(k))

    @property
    def x1_counter_rotating(self):
        """Variance the counter-rotating terms add to X1: the residual back-action."""
        return self.x1_by_source.get(COUNTER_ROTATING, 0.0)

    def to_dict(self):
        """Plain data for JSON."""
        return {"mode": self.mode, "measured_quadrature": "X1", "x1_variance": self.x1_variance,
                "x2_variance": self.x2_variance, "x1_by_source": dict(self.x1_by_source),
                "x2_by_source": dict(self.x2_by_source),
                "x2_backaction_heating": self.x2_heating,
                "x1_rotating_wave_backaction": self.x1_backaction,
                "x1_counter_rotating_backaction": self.x1_counter_rotating,
                "imprecision_x1_per_hz": self.imprecision_per_hz,
                "imprecision_quanta": self.imprecision_quanta,
                "record_imprecision_quanta": self.record_imprecision_quanta,
                "standard_quantum_limit_quanta": STANDARD_QUANTUM_LIMIT,
                "detection_efficiency": self.efficiency,
                "sideband_ratio_kappa_over_4_omega": self.sideband_ratio}

    def text(self):
        """Lines for the terminal."""
        thermal = sum(v for k, v in self.x1_by_source.items() if k.endswith("thermal bath"))
        return [f"back-action-evading measurement, mode {self.mode} (X1 measured, X2 conjugate)",
                f"  X1 variance                   {self.x1_variance:.6g}   (zero-point 0.5)",
                f"    thermal motion              {thermal:.6g}",
                f"    counter-rotating residual   {self.x1_counter_rotating:.4g}"
                f"   (κ/4Ωm = {self.sideband_ratio:.3g})",
                f"    rotating-wave back-action   {self.x1_backaction:.4g}",
                f"  X2 variance                   {self.x2_variance:.6g}",
                f"    back-action heating         {self.x2_heating:.6g}",
                f"  imprecision referred to X1    {self.imprecision_per_hz:.4g} /Hz = "
                f"{self.imprecision_quanta:.4g} quanta at the line (ideal phase-quadrature "
                f"detector, η = {self.efficiency:g})",
                (f"    in this record              {self.record_imprecision_quanta:.4g} quanta "
                 "(receiver and amplifier included)"
                 if np.isfinite(self.record_imprecision_quanta) else
                 "    in this record              none: no X1 line stands out at the "
                 "record's zero offset (a mistuned pair moves it; see the warnings)"),
                f"    one tone, any power         at least {STANDARD_QUANTUM_LIMIT:g} quanta "
                "with its back-action (standard quantum limit)"]


def _is_cavity(source):
    """True for the cavity's own inputs (the port's vacuum, the internal loss)."""
    return source in ("external port vacuum", "internal loss bath")


def quadrature_budget(system, *, efficiency=None):
    """X1 and X2 of a back-action-evading system, split by source (module notes).

    Parameters
    ----------
    system : simulator.model.system.System
        Or a scenario, built into one; ``detection.backaction_evading`` set.
    efficiency : float, optional
        Detection efficiency η of the imprecision; default ``detection.efficiency``.
    """
    system = as_system(system, several_tones="detected").require_stable()
    scenario, model = system.scenario, system.model
    p = pair_parameters(scenario, system.point)
    eta = scenario.detection.efficiency if efficiency is None else float(efficiency)
    x1, x2 = model.index(f"{p.mode}.X1"), model.index(f"{p.mode}.X2")
    by1, by2 = {}, {}
    for name, idx in model.sources:
        b = model.B[:, list(idx)]
        v = solve_lyapunov(
            model.A, -b @ model.N[np.ix_(idx, idx)] @ b.T)
        by1[name], by2[name] = float(v[x1, x1]), float(v[x2, x2])
    v = model.covariance()
    s_imp = float(imprecision_closed_form(p, 0.0, eta))  # per Hz: S(ω) dω/2π = S df
    width = 2 * np.pi * lab_mechanics(scenario, system.point, model)[1]
    return QuadratureBudget(
        mode=p.mode, x1_variance=float(v[x1, x1]), x2_variance=float(v[x2, x2]),
        x1_by_source=by1, x2_by_source=by2, imprecision_per_hz=s_imp,
        imprecision_quanta=float(s_imp * width / 4), efficiency=eta,
        sideband_ratio=p.sideband_ratio,
        record_imprecision_quanta=(_record_imprecision(system, v[x1, x1], width)
                                   if np.isfinite(s_imp) else np.inf))  # ∞: no coupling


def _record_imprecision(system, variance, width):
    """The record's floor under X1's line at zero offset, in quanta of X1 at the line.

    X1's line is a Lorentzian of energy width Γeff (rad/s ``width``) whose peak
    P holds ``variance``; the floor b follows from the record's density at the
    centre and at LINE_WIDTHS widths away, T = b + P L(f), L(f) = (Γ/2)²/((Γ/2)²
    + (2πf)²) (the floor is flat on the scale of the line: the cavity's κ is
    far wider), and n = b · variance / P. A heterodyne record holds both
    quadratures: X1 is in its phase channel alone, where the signal density is
    twice its share P of the record's density (the I + iQ spectrum averages
    the two channels) over the same, phase-insensitive floor, so n is halved.
    """
    f = LINE_WIDTHS * width / (2 * np.pi)
    shape = (width / 2) ** 2 / ((width / 2) ** 2 + (2 * np.pi * f) ** 2)
    centre, side = digitiser_spectrum(system, [0.0, f]).total
    floor = (side - centre * shape) / (1 - shape)
    channels = 2.0 if system.scenario.detection.scheme == "heterodyne" else 1.0
    signal = channels * (centre - floor)
    # a line below the round-off of the floor is no line: no measurement, ∞
    return float(floor * variance / signal) if signal > ROUNDOFF * floor else np.inf


# Distance from X1's line, in widths, at which the record's floor is read.
LINE_WIDTHS = 20.0
# A line weaker than this fraction of the floor is taken as absent (the difference of two
# densities of the floor's size carries round-off of about 1e-15 of it).
ROUNDOFF = 1e-9


def closed_form_variances(p):
    """(Var X1, Var X2) of the closed forms (module notes) for :class:`PairParameters` ``p``
    with equal couplings, Δ̄ = 0 and ν = Ωm."""
    g, k2 = p.g_minus, p.kappa**2 / 4
    a = g**2 * p.kappa / (k2 + 4 * p.omega**2)
    x1 = p.n_bath + 0.5 + 2 * a * (p.n_cavity + 0.5) / p.gamma
    c = 2 * g
    return x1, x1 + 4 * c**2 * (p.n_cavity + 0.5) / (p.gamma * (p.gamma + p.kappa))


def imprecision_closed_form(p, frequency_hz, efficiency=1.0):
    """S_imp(f) of the module notes (X1²/Hz, two-sided) at offsets ``frequency_hz`` from ω̄
    (the pair centred on the cavity, Δ̄ = 0)."""
    w = 2 * np.pi * np.asarray(frequency_hz, dtype=float)
    c = np.float64(p.g_minus + p.g_plus)
    with np.errstate(divide="ignore", invalid="ignore"):  # no coupling: no measurement, ∞
        return ((p.kappa**2 / 4 + w**2) / (2 * efficiency * p.kappa_ex * c**2)
                + (p.kappa - p.kappa_ex) * p.cavity_bath_occupation / c**2)

