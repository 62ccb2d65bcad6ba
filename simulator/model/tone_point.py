"""Operating point of several drive tones on one or more cavity modes.

Tone k drives cavity mode c(k) with photon flux Φk at detuning Δ0k from the
bare resonance. The static displacement of every mechanical mode shifts every
cavity mode it couples to, so the intracavity photon numbers solve, together,

    n_k = κex,c Φk / (κc²/4 + (Δ0k + δc)²),     δc = Σc' S_cc' N_c',
    N_c = Σ_{k on c} n_k,     S_cc' = Σj 2 g0_cj g0_c'j Ωj / (Ωj² + Γj²/4),

with Δk = Δ0k + δc the effective detuning of tone k. The intracavity intensity
of two tones on one mode beats at their spacing; the mechanics responds to the
time average only, which holds when the spacing is far from every mechanical
resonance (the condition checked by :mod:`simulator.model.tone_validity`).
With one tone this is the cubic of :mod:`simulator.model.operating_point`.

Several solutions are multistability; they are ordered by total photon number
Σ n_k and chosen with ``drive.bistable_branch``. When the shifts reduce to one
unknown (all tones on one cavity mode, or a single mechanical mode, the usual
cases) every solution is found by bracketing; otherwise by Newton iterations
from a set of starting points (the lowest and highest shifts, each tone on its
resonance), which finds the solutions reached from those starts.

References
----------
Aspelmeyer, Kippenberg, Marquardt, Rev. Mod. Phys. 86, 1391 (2014), Sec. V.A
(static bistability; here summed over tones and modes).
"""

import dataclasses

import numpy as np
from scipy.optimize import brentq, root

from simulator.errors import OperatingPointError
from simulator.model.units import angular, ordinary, photon_energy_j
from simulator.scenario.tone_sections import PRIMARY_CAVITY, PRIMARY_TONE

# Points of the bracketing grid: evenly over the whole range, and geometrically
# spaced on both sides of each tone's resonance from 10⁻³ to 10⁷ half-linewidths.
_EVEN_POINTS = 4001
_RESONANCE_POINTS = 400
# Two solutions of the multi-dimensional search are one when their shifts differ
# by less than this fraction of the smallest half-linewidth.
_SAME_SOLUTION = 1e-6


@dataclasses.dataclass(frozen=True, kw_only=True)
class CavityModePoint:
    """Operating-point quantities of one cavity mode."""

    name: str
    linewidth_hz: float
    external_linewidth_hz: float
    bath_occupation: float
    static_shift_hz: float  # δc/2π: effective minus bare detuning of its tones
    photon_number: float  # N_c, summed over its tones


@dataclasses.dataclass(frozen=True, kw_only=True)
class TonePoint:
    """Operating-point quantities of one drive tone."""

    name: str
    cavity_mode: int  # index into OperatingPoint.cavity_modes
    frequency_hz: float  # carrier
    input_photon_flux: float
    photon_number: float
    detuning_bare_hz: float
    detuning_effective_hz: float
    coupling_rates_hz: tuple  # g/2π = g0·√n_k / 2π per mechanical mode


def cavity_table(scenario):
    """(name, linewidth, external linewidth, bath occupation) of every cavity mode, Hz."""
    c = scenario.cavity
    rows = [(PRIMARY_CAVITY, c.linewidth_hz, c.external_linewidth_hz, c.bath_occupation)]
    rows += [(m.name, m.linewidth_hz, m.external_linewidth_hz, m.bath_occupation)
             for m in scenario.cavity_modes]
    return rows


def coupling_matrix_hz(scenario):
    """g0/2π of every (cavity mode, mechanical mode) pair, shape (cavity modes, mechanics)."""
    names = [row[0] for row in cavity_table(scenario)]
    mech = [m.name for m in scenario.mechanics]
    g0 = np.zeros((len(names), len(mech)))
    g0[0] = [m.coupling_hz for m in scenario.mechanics]
    for pair in scenario.couplings:
        g0[names.index(pair.cavity_mode), mech.index(pair.mechanics)] = pair.coupling_hz
    return g0


def tone_table(scenario):
    """(name, cavity-mode index, carrier frequency Hz, power W, given detuning Hz) per tone."""
    drive = scenario.drive
    f_cavity = {PRIMARY_CAVITY: drive.carrier_frequency_hz - drive.detuning_hz}
    f_cavity.update({m.name: m.frequency_hz for m in scenario.cavity_modes})
    names = [row[0] for row in cavity_table(scenario)]
    rows = [(PRIMARY_TONE, 0, drive.carrier_frequency_hz, drive.power_w, drive.detuning_hz)]
    rows += [(t.name, names.index(t.cavity_mode), f_cavity[t.cavity_mode] + t.detuning_hz,
              t.power_w, t.detuning_hz) for t in scenario.tones]
    return rows


def shift_matrix(scenario):
    """S (rad/s per photon): static shift of cavity mode c per photon in mode c'."""
    g0 = angular(coupling_matrix_hz(scenario))
    om = angular(np.array([m.frequency_hz for m in scenario.mechanics]))
    gm = angular(np.array([m.linewidth_hz for m in scenario.mechanics]))
    weight = 2.0 * om / (om**2 + gm**2 / 4.0)
    return (g0 * weight) @ g0.T


def solve_tones(scenario):
    """Every operating point of a scenario with several tones.

    Returns
    -------
    list of (tones, cavity_modes)
        One entry per solution, ordered by total photon number: a tuple of
        :class:`TonePoint` and one of :class:`CavityModePoint`.
    """
    cav = cavity_table(scenario)
    kappa = angular(np.array([row[1] for row in cav]))
    kappa_ex = angular(np.array([row[2] for row in cav]))
    table = tone_table(scenario)
    on = np.array([row[1] for row in table])
    flux = np.array([row[3] / photon_energy_j(row[2]) for row in table])
    given = angular(np.array([row[4] for row in table]))
    s = shift_matrix(scenario)
    drive_rate = kappa_ex[on] * flux  # κex Φk

    def photons(shift):
        return drive_rate / (kappa[on] ** 2 / 4 + (given + shift[on]) ** 2)

    def per_mode(n):
        return np.bincount(on, weights=n, minlength=len(cav))

    if scenario.drive.detuning_reference == "effective":
        n = drive_rate / (kappa[on] ** 2 / 4 + given**2)
        shift = s @ per_mode(n)
        solutions = [(given - shift[on], shift, n)]
    else:
        solutions = [(given, sh, photons(sh)) for sh in _shift_solutions(
            s, photons, per_mode, on, given, kappa)]
    out = []
    g0 = coupling_matrix_hz(scenario)
    for bare, shift, n in solutions:
        tones = tuple(TonePoint(
            name=row[0], cavity_mode=int(on[k]), frequency_hz=row[2],
            input_photon_flux=float(flux[k]), photon_number=float(n[k]),
            detuning_bare_hz=float(ordinary(bare[k])),
            detuning_effective_hz=float(ordinary(bare[k] + shift[on[k]])),
            coupling_rates_hz=tuple(float(x) for x in g0[on[k]] * np.sqrt(n[k])))
            for k, row in enumerate(table))
        modes = tuple(CavityModePoint(
            name=row[0], linewidth_hz=row[1], external_linewidth_hz=row[2],
            bath_occupation=row[3], static_shift_hz=float(ordinary(shift[c])),
            photon_number=float(per_mode(n)[c])) for c, row in enumerate(cav))
        out.append((tones, modes))
    out.sort(key=lambda item: sum(t.photon_number for t in item[0]))
    return out


def _shift_solutions(s, photons, per_mode, on, given, kappa):
    """Every static-shift vector δ with δ = S·N(δ) (rad/s), bare detunings given."""
    driven = np.unique(on)
    peak = per_mode(photons_peak(photons, on, given, len(s)))  # the largest N_c
    top = s @ peak
    if not np.any(s[np.ix_(driven, driven)]):
        return [s @ per_mode(photons(np.zeros(len(s))))]
    sub = s[np.ix_(driven, driven)]
    rank = np.linalg.matrix_rank(sub)
    if rank == 1:
        # δ_D = a·t for one scalar t: S_DD = a aᵀ (positive semidefinite, rank one)
        lam, vec = np.linalg.eigh(sub)
        a = np.zeros(len(s))
        a[driven] = np.abs(vec[:, -1]) * np.sqrt(lam[-1])

        def f(t):
            return t - a @ per_mode(photons(a * t))

        t_hi = a @ peak
        centres = [(-given[k] / a[on[k]], kappa[on[k]] / (2 * a[on[k]]))
                   for k in range(len(on)) if a[on[k]] > 0]
        ts = _bracketed_roots(f, 0.0, t_hi, centres)
        return [s @ per_mode(photons(a * t)) for t in ts]
    return _newton_solutions(s, photons, per_mode, driven, top, on, given, kappa)


def photons_peak(photons, on, given, n_cavities):
    """Photon number of each tone with its cavity mode shifted onto it (the largest)."""
    out = np.empty(len(on))
    for k in range(len(on)):
        shift = np.zeros(n_cavities)
        shift[on[k]] = -given[k]
        out[k] = photons(shift)[k]
    return out


def _bracketed_roots(f, lo, hi, centres):
    """Every sign change of f on [lo, hi], refined by Brent's method."""
    grid = [np.linspace(lo, hi, _EVEN_POINTS)]
    offsets = np.geomspace(1e-3, 1e7, _RESONANCE_POINTS)
    for centre, half in centres:
        grid += [centre + half * offsets, centre - half * offsets, [centre]]
    t = np.unique(np.clip(np.concatenate(grid), lo, hi))
    values = np.array([f(x) for x in t])
    roots = [x for x, v in zip(t, values, strict=True) if v == 0]
    for i in np.flatnonzero(values[:-1] * values[1:] < 0):
        roots.append(brentq(f, t[i], t[i + 1], xtol=1e-15 * max(abs(hi), 1.0),
                            rtol=4 * np.finfo(float).eps))
    return sorted(roots)


def _newton_solutions(s, photons, per_mode, driven, top, on, given, kappa):
    """Solutions of δ = S·N(δ) from several starting points (rank of S above one)."""
    scale = kappa[driven].min() / 2

    def residual(x):
        shift = np.zeros(len(s))
        shift[driven] = x * scale
        return (shift - s @ per_mode(photons(shift)))[driven] / scale

    starts = [np.zeros(len(driven)), top[driven] / scale]
    for k in range(len(on)):
        start = np.zeros(len(s))
        start[on[k]] = -given[k]
        starts.append(start[driven] / scale)
    found = []
    for x0 in starts:
        sol = root(residual, x0, method="hybr")
        if not sol.success or np.max(np.abs(residual(sol.x))) > 1e-9 * (1 + np.max(np.abs(sol.x))):
            continue
        if all(np.max(np.abs(sol.x - y)) > _SAME_SOLUTION * (1 + np.max(np.abs(y)))
               for y in found):
            found.append(sol.x)
    if not found:
        raise OperatingPointError(
            "no static operating point found for the tones on several cavity modes: the "
            "search for the radiation-pressure shifts did not converge from any start; "
            "lower the tone powers or check the detunings")
    out = []
    for x in found:
        shift = np.zeros(len(s))
        shift[driven] = x * scale
        out.append(s @ per_mode(photons(shift)))
    return out
