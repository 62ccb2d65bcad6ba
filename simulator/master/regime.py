"""Regime verdict: can the linear engine be trusted for this scenario?

Pure formulas on the operating point (no QuTiP). Linearisation keeps
−g0 ᾱ (δa + δa†)(b + b†) and drops −g0 δa†δa (b + b†); what is dropped matters
when a single photon or the thermal motion moves the cavity resonance by a
noticeable fraction of its linewidth. Per mechanical mode the verdict looks at

- g0/κ: single-photon coupling against the cavity linewidth; of order one is
  the single-photon strong-coupling regime (Rabl, PRL 107, 063601 (2011);
  Nunnenkamp, Børkje, Girvin, PRL 107, 063602 (2011));
- the polaron shift g0²/Ωm (the cavity shift per photon from the static
  displacement one photon causes) against the broader of κ and Γm: once it
  is resolved, a second photon is off resonance (photon blockade, Rabl 2011)
  and the cavity spectrum grows phonon sidebands (Nunnenkamp et al. 2011);
- the thermal jitter of the cavity frequency g0 √(2n + 1) (rms of
  g0 (b + b†) for occupation n) against κ/2: beyond it the transduction of
  motion into the field is no longer linear.

Each ratio below :data:`MARGINAL` is harmless; from :data:`MARGINAL` to
:data:`NONLINEAR` it gives corrections of about that relative size
(marginal); above :data:`NONLINEAR` the linear engine is not trustworthy. The
thresholds are common practice for a first-order error estimate, not
published values. The intracavity photon number n̄ is reported with the
verdict: at n̄ ≲ 1 the field is not a large coherent amplitude and the
dropped term is as large as the kept one relative to g0.
"""

import dataclasses
import math

MARGINAL = 0.01
NONLINEAR = 0.1
LEVELS = ("linear", "marginal", "nonlinear")


@dataclasses.dataclass(frozen=True, kw_only=True)
class RegimeCheck:
    """One dimensionless ratio of the verdict, with what it compares."""

    mode: str
    name: str
    value: float
    meaning: str

    @property
    def level(self):
        """``"linear"``, ``"marginal"`` or ``"nonlinear"`` from the thresholds."""
        if not self.value < NONLINEAR:
            return "nonlinear"
        return "marginal" if self.value >= MARGINAL else "linear"


@dataclasses.dataclass(frozen=True, kw_only=True)
class RegimeVerdict:
    """Whether the linear engine applies, and why.

    Attributes
    ----------
    level : str
        The worst level among the checks: ``"linear"``, ``"marginal"`` or
        ``"nonlinear"``.
    trustworthy : bool
        False only for ``"nonlinear"``.
    reason : str
        One sentence naming the deciding ratios.
    photon_number : float
        n̄ at the operating point.
    checks : tuple of RegimeCheck
    """

    level: str
    trustworthy: bool
    reason: str
    photon_number: float
    checks: tuple

    def to_dict(self):
        """Plain data for JSON."""
        return {"level": self.level, "trustworthy": self.trustworthy, "reason": self.reason,
                "photon_number": self.photon_number,
                "checks": [{"mode": c.mode, "name": c.name, "value": c.value,
                            "level": c.level, "meaning": c.meaning} for c in self.checks]}


def regime_checks(point, occupations=None):
    """The dimensionless ratios of the verdict, per mode (see module doc).

    Parameters
    ----------
    point : simulator.model.operating_point.OperatingPoint
    occupations : sequence of float, optional
        Mode occupations (e.g. the linear steady state); default the bath
        occupations, the larger value for a cooled mode.
    """
    kappa = point.cavity_linewidth_hz
    checks = []
    for j, mode in enumerate(point.modes):
        g0, om, gm = mode.single_photon_coupling_hz, mode.frequency_hz, mode.linewidth_hz
        n = mode.bath_occupation if occupations is None else occupations[j]
        polaron = g0**2 / om
        checks += [
            RegimeCheck(mode=mode.name, name="g0/κ", value=g0 / kappa,
                        meaning="single-photon coupling against the cavity linewidth"),
            RegimeCheck(mode=mode.name, name="(g0²/Ωm)/max(κ, Γm)",
                        value=polaron / max(kappa, gm),
                        meaning="polaron shift per photon against the broader linewidth"),
            RegimeCheck(mode=mode.name, name="g0·√(2n+1)/(κ/2)",
                        value=g0 * math.sqrt(2 * max(n, 0.0) + 1) / (kappa / 2),
                        meaning="thermal jitter of the cavity frequency against κ/2"),
        ]
    return tuple(checks)


def regime_verdict(point, occupations=None, *, master_advice=None):
    """Regime verdict for an operating point; see the module doc.

    Parameters
    ----------
    point : simulator.model.operating_point.OperatingPoint
    occupations : sequence of float, optional
        Mode occupations to use in the thermal-jitter check.
    master_advice : str, optional
        What to say instead of "use the master equation (inspect --master)"
        when the verdict is nonlinear (e.g. why the master equation cannot
        help either, for occupations beyond its Fock space).

    Returns
    -------
    RegimeVerdict
    """
    checks = regime_checks(point, occupations)
    worst = max((LEVELS.index(c.level) for c in checks), default=0)
    level = LEVELS[worst]
    deciding = [c for c in checks if LEVELS.index(c.level) == worst] if worst else []
    listed = "; ".join(f"{c.mode}: {c.name} = {c.value:.3g} ({c.meaning})" for c in deciding)
    n_bar = f"n̄ = {point.photon_number:.4g} intracavity photons"
    if level == "linear":
        largest = max(checks, key=lambda c: c.value, default=None)
        biggest = f" (largest: {largest.name} = {largest.value:.2g})" if largest else ""
        reason = (f"linear engine trustworthy: every nonlinearity ratio is below "
                  f"{MARGINAL:g}{biggest}; {n_bar}")
    elif level == "marginal":
        reason = (f"linear engine usable with corrections of about the ratio's size: "
                  f"{listed}; {n_bar}")
    else:
        reason = (f"linear engine NOT trustworthy, nonlinear optomechanics: {listed}; "
                  f"{n_bar}; " + (master_advice or "use the master equation (inspect --master)"))
    return RegimeVerdict(level=level, trustworthy=level != "nonlinear", reason=reason,
                         photon_number=point.photon_number, checks=checks)
