"""Sideband summary: Stokes and anti-Stokes lines of each mode, and the occupation.

In the heterodyne spectrum a mode of occupation n scatters drive photons into
an anti-Stokes sideband at ν ≈ +Ωm (area ∝ n) and a Stokes sideband at
ν ≈ −Ωm (area ∝ n + 1), each filtered by the cavity. In weak coupling

    N_out(ν) − floor(ν) ≈ F(ν) · S_bb(ν),   F(ν) = κ_ex g² / (κ²/4 + (2πν + Δ)²),

with S_bb the mechanical spectrum whose area is n (ν > 0) or n + 1 (ν < 0).

The line of a sideband is taken from the spectrum itself, not from a fit. The
normal-ordered output density N_out(ω) is a rational function of ω whose
poles are the eigenvalues of the drift matrix: ω_k = iλ_k. Near the mode's
pole it is c/(ω − ω_k) + c̄/(ω − ω̄_k) + (smooth), i.e. on the real axis

    Im(c) · L(ν) + Re(c) · D(ν),

a Lorentzian L of unit area (centre Re ω_k/2π, FWHM −2 Im ω_k/2π) and its
dispersive partner D = (ν − ν0)/(π((ν − ν0)² + (w/2)²)). In quanta, the
sideband area is Im(c/F) and the dispersive weight Re(c/F), with F continued
analytically to the complex pole (it differs from F at the centre by order
γ/κ); the dispersive weight is the Fano asymmetry, zero for vacuum inputs at the
anti-Stokes line and large where classical noise the detector also sees
interferes with the motion it drives. The weight is what a Lorentzian plus
dispersive fit over a span of many linewidths (but much less than κ)
returns, and it is unambiguous; the integral of the cavity-corrected
spectrum over a wide window is not, once the dispersive part meets the
cavity's frequency dependence. The residue is computed from the right and
left eigenvectors of λ_k alone: c = Res(u·H) N (u·H(ω̄_k))†, with
Res(u·H) = i (u C v_k)(w_k B)/(w_k v_k).

The ratio of the areas R = n/(n + 1) gives the occupation n = R/(1 − R),
reported beside the exact Lyapunov occupation.

References
----------
Safavi-Naeini et al., Phys. Rev. Lett. 108, 033602 (2012) (sideband asymmetry
as a thermometer).
Weinstein et al., Phys. Rev. X 4, 041003 (2014) (heterodyne sideband spectra).
Marquardt, Chen, Clerk, Girvin, Phys. Rev. Lett. 99, 093902 (2007) (rates A±).
"""

import dataclasses

import numpy as np
import scipy.linalg

from simulator.errors import InputError
from simulator.linear.record_budget import record_sidebands
from simulator.linear.steady_state import mode_eigenvalues, steady_state
from simulator.model.optomechanics import device_size, mode_states
from simulator.model.system import as_system
from simulator.model.units import angular, ordinary

# |w_k v_k| below this (unit-norm vectors of the cavity–mechanics block) is an
# eigenvalue at an exceptional point: no isolated Lorentzian line, no area.
DEFECTIVE = 1e-8
# The mode's share of its pole's residue projector, p = Σ_mode v_i w_i / (w v),
# is 1 for a mechanical line, about ½ past normal-mode splitting (with the
# cavity or another mode) and large near an exceptional point; beyond this
# distance from 1 the weights say little about n.
HYBRID = 0.1
NO_LINE = complex(np.nan, np.nan)
# A line whose Stokes weight is below this (in quanta; a line the light reaches has n + 1 ≥ 1)
# is dark: a combination of degenerate modes that does not couple to the cavity.
DARK = 1e-9
# Two eigenvalues closer than this fraction of their size are the same pole.
SAME_POLE_RTOL = 1e-9


@dataclasses.dataclass(frozen=True, kw_only=True)
class Sideband:
    """One sideband of one mode.

    ``frequency_hz`` and ``linewidth_hz`` (FWHM) are those of the mode's pole
    of the spectrum (an eigenvalue of the drift matrix); ``area_quanta`` is
    the Lorentzian weight in phonon quanta (n for anti-Stokes, n + 1 for
    Stokes, in weak coupling and without classical noise); ``dispersive_quanta``
    the weight of the dispersive partner on the same scale (the Fano
    asymmetry); ``area_above_floor`` the Lorentzian weight of the detected
    spectrum itself, in shot-noise units × Hz (η Im c).
    """

    frequency_hz: float
    linewidth_hz: float
    area_quanta: float
    dispersive_quanta: float
    area_above_floor: float
    # at the digitiser (simulator.linear.record_budget.record_sidebands): where the line
    # falls on the record's axis, its area there (shot-noise units × Hz, through the
    # efficiency, filter and sinc²) and its Lorentzian peak over the rest of the record
    record_frequency_hz: float = float("nan")
    record_area: float = float("nan")
    record_peak_to_background: float = float("nan")


@dataclasses.dataclass(frozen=True, kw_only=True)
class SidebandSummary:
    """Stokes and anti-Stokes sidebands of one mode and what they imply."""

    mode: str
    stokes: Sideband
    anti_stokes: Sideband
    ratio: float  # anti-Stokes / Stokes area = n/(n+1)
    occupation_from_ratio: float  # R/(1 − R)
    occupation_from_area: float  # anti-Stokes area in quanta (needs g, κ_ex)
    steady_state_occupation: float  # exact Lyapunov value
    warning: str = ""  # why the weights are not to be read as n and n + 1, if so
    gap: object = None  # simulator.linear.occupation_gap.OccupationGap: why n_R differs from n

    def to_dict(self):
        """Plain data for JSON (Hz, quanta, shot-noise units × Hz)."""
        out = dataclasses.asdict(self)
        out["gap"] = None if self.gap is None else self.gap.to_dict() | {
            "explanation": self.gap.text()}
        return out


def cavity_response(frequency_hz, linewidth_hz, detuning_hz):
    """The cavity's power response (κ/2)² / ((κ/2)² + (ν + Δ)²) at optical offset ν.

    One at the cavity resonance (ν = −Δ); all arguments in Hz (the ratio is
    the same in angular units). Complex ``frequency_hz`` continues it
    analytically (to a pole of the spectrum).
    """
    half = linewidth_hz / 2
    return half**2 / (half**2 + (np.asarray(frequency_hz) + detuning_hz) ** 2)


def cavity_filter(point, mode_index, frequency_hz):
    """Cavity filter F(ν) = κ_ex g² / (κ²/4 + (2πν + Δ)²) (photons/s per quantum).

    The scale 4 κ_ex g²/κ² times :func:`cavity_response`.

    Parameters
    ----------
    point : simulator.model.operating_point.OperatingPoint
    mode_index : int
    frequency_hz : array_like
        Optical offsets ν from the drive (Hz); complex values continue F
        analytically (to a pole of the spectrum).
    """
    kappa, kappa_ex, g = angular([point.cavity_linewidth_hz, point.external_linewidth_hz,
                                  point.modes[mode_index].coupling_rate_hz])
    return 4 * kappa_ex * g**2 / kappa**2 * cavity_response(
        frequency_hz, point.cavity_linewidth_hz, point.detuning_effective_hz)


def sideband_summary(system, *, at_digitiser=True):
    """Sideband summary of every mechanical mode of ``system``.

    Parameters
    ----------
    system : simulator.model.system.System
        Or a scenario, built into one.
    at_digitiser : bool
        Also give each line's record frequency, area and contrast at the
        digitiser (:func:`simulator.linear.record_budget.record_sidebands`).

    Returns
    -------
    tuple of SidebandSummary
        One per mode, in scenario order; NaN for a mode the light does not
        couple to (g = 0, e.g. no drive) or whose pole is defective (an
        exceptional point: the line is not a Lorentzian). ``warning`` says
        when the line is a mechanics-cavity hybrid and its weights are not
        to be read as n and n + 1.

    Notes
    -----
    The areas equal n and n + 1 in weak coupling (g ≪ κ), to about 1e-4 of n
    at g/κ < 0.01. Past it the line is no longer exactly a Lorentzian of
    weight n or n + 1 (the self-energy varies across it) and the summary
    reports what the weights give (n from the ratio 3 % low at g/κ = 0.08
    for the demo scenario) beside the exact occupation. With classical noise on the
    drive that also reaches the detector the areas carry its interference
    with the motion it drives: the false asymmetry (docs/laser-noise.md).
    """
    system = as_system(system, several_tones="detected").require_stable()
    scenario, point, model = system.scenario, system.point, system.model
    if scenario.detection.backaction_evading:
        raise InputError(
            "the sideband summary does not apply to a back-action-evading pair: both "
            "motional sidebands fall on the cavity frequency and the record measures one "
            "quadrature; its budget is simulator.linear.quadratures.quadrature_budget")
    steady = steady_state(system)
    eta = scenario.detection.efficiency
    n_tones = max(len(point.tones), 1)  # every tone's field is part of the device
    poles = _Poles(model, len(point.modes), n_tones)
    stokes_index = [poles.index_of(lam)
                    for lam in mode_eigenvalues(model, len(point.modes), n_tones)]
    summaries = []
    for j, mode in enumerate(point.modes):
        sides = {}
        for sign in (+1, -1):
            k = poles.anti_stokes_partner(stokes_index[j]) if sign > 0 else stokes_index[j]
            coupled = mode.coupling_rate_hz != 0.0  # else no line: NaN weights
            residue = poles.residue(k) if coupled else NO_LINE
            weight = residue / cavity_filter(point, j, poles.pole_hz(k)) if coupled else NO_LINE
            if coupled and sign < 0 and abs(weight) < DARK:
                coupled, residue, weight = False, NO_LINE, NO_LINE
                sides[+1] = dataclasses.replace(sides[+1], area_quanta=np.nan,
                                                dispersive_quanta=np.nan,
                                                area_above_floor=np.nan)
            sides[sign] = Sideband(
                frequency_hz=poles.frequency_hz(k), linewidth_hz=poles.linewidth_hz(k),
                area_quanta=float(np.imag(weight)), dispersive_quanta=float(np.real(weight)),
                area_above_floor=float(eta * np.imag(residue)))
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = np.float64(sides[+1].area_quanta) / sides[-1].area_quanta
            implied = ratio / (1.0 - ratio)
        warning = _warning(poles, stokes_index[j], j) if coupled else ""
        if mode.coupling_rate_hz != 0.0 and not coupled:
            warning = ("the mode's line does not reach the output (its weights vanish): it "
                       "is a combination of degenerate modes that the light does not couple "
                       "to; the coupled combination carries the lines of both")
        summaries.append(SidebandSummary(
            mode=mode.name, stokes=sides[-1], anti_stokes=sides[+1], ratio=float(ratio),
            occupation_from_ratio=float(implied),
            occupation_from_area=float(sides[+1].area_quanta),
            steady_state_occupation=steady.modes[j].occupation, warning=warning))
    if at_digitiser:
        return record_sidebands(system, tuple(summaries))
    return tuple(summaries)


def _warning(poles, k, j):
    """Why the weights of mode j's line (pole k) are not to be read as n and n + 1, or ""."""
    if poles.defective(k):
        return ("the mode's pole is defective (an exceptional point, or a noise resonance "
                "exactly on the line): the line is no Lorentzian and has no weights")
    share = poles.participation(k, j)
    if abs(share - 1) > HYBRID:
        return (f"the line is a hybrid, not the mode alone (its share of the pole is "
                f"{share:.3g}, not 1: normal-mode splitting with the cavity or another "
                "mode, or near an exceptional point); its weights are not n and n + 1")
    near = poles.noise_resonance_near(k)
    if near is not None:
        return (f"a laser-noise resonance at {near[0]:.6g} Hz (width {near[1]:.3g} Hz) "
                "overlaps the line: it is not a Lorentzian plus its dispersive partner, "
                "and the weights are not n and n + 1")
    return ""


class _Poles:
    """Poles ω_k = iλ_k of the heterodyne output density and their residues."""

    def __init__(self, model, n_modes, n_tones=1):
        self.model = model
        self.device = device_size(n_modes, n_tones)
        # balance first: with laser-noise filter states the raw eigenvectors of a
        # simple eigenvalue can be nearly orthogonal to its left ones (scaling only)
        balanced, (self.scale, _) = scipy.linalg.matrix_balance(
            model.A, permute=False, separate=True)
        self.lam, self.left_b, self.right_b = scipy.linalg.eig(balanced, left=True, right=True)
        self.device_lam = np.linalg.eigvals(model.A[:self.device, :self.device])
        u = np.array([1.0, 1.0j]) / np.sqrt(2.0)  # heterodyne projection (spectra.py)
        self.uc, self.ud = u @ model.C, u @ model.D

    def anti_stokes_partner(self, k):
        """Index of the eigenvalue λ̄_k (its pole iλ̄_k lies at ν > 0)."""
        return int(np.argmin(np.abs(self.lam - np.conj(self.lam[k]))))

    def pole_hz(self, k):
        """The complex pole ω_k/2π = iλ_k/2π."""
        return complex(ordinary(1j * self.lam[k]))

    def frequency_hz(self, k):
        return float(ordinary(np.real(1j * self.lam[k])))

    def linewidth_hz(self, k):
        return float(ordinary(-2.0 * np.real(self.lam[k])))

    def index_of(self, lam):
        """Index of the eigenvalue of the whole drift nearest ``lam``."""
        return int(np.argmin(np.abs(self.lam - lam)))

    def participation(self, k, mode_index):
        """Mode ``mode_index``'s share Σ v_i w_i / (w v) of the residue projector of λ_k."""
        v, w = self.right_b[:, k] * self.scale, self.left_b[:, k].conj() / self.scale
        device = slice(0, self.device)
        quads = mode_states(mode_index)
        return complex(w[quads] @ v[quads] / (w[device] @ v[device]))

    def defective(self, k):
        """True at an exceptional point: left and right vectors orthogonal.

        Checked on the cavity–mechanics block (a mode at its exceptional
        point) and on the whole, balanced drift (a noise filter pole exactly
        on the mode's: a double pole, whose line is no Lorentzian).
        """
        v, w = self.right_b[:, k] * self.scale, self.left_b[:, k].conj() / self.scale
        vb, wb = self.right_b[:, k], self.left_b[:, k].conj()
        return any(abs(y @ x) < DEFECTIVE * np.linalg.norm(y) * np.linalg.norm(x)
                   for x, y in ((v[:self.device], w[:self.device]), (vb, wb)))

    def noise_resonance_near(self, k):
        """A pole of the noise filters (not of the cavity or mechanics) within the
        half-width |Re λ_k| of pole k, as its (frequency, FWHM) in Hz, or None."""
        for lam in self.lam:
            if np.min(np.abs(self.device_lam - lam)) <= SAME_POLE_RTOL * abs(lam) + 1e-12:
                continue  # an eigenvalue of the cavity–mechanics block
            if abs(lam - self.lam[k]) < abs(self.lam[k].real):
                return (float(ordinary(abs(lam.imag))), float(ordinary(-2 * lam.real)))
        return None

    def residue(self, k):
        """c: residue of N_out(ω) at ω_k = iλ_k (ω in rad/s, N_out per Hz)."""
        model, vb, wb = self.model, self.right_b[:, k], self.left_b[:, k].conj()
        if self.defective(k):
            return NO_LINE
        v, w = self.scale * vb, wb / self.scale
        res_h = 1j * (self.uc @ v) * (w @ model.B) / (wb @ vb)
        mirror = np.conj(1j * self.lam[k])  # ω̄_k, where u·H is analytic
        n = model.A.shape[0]
        h = self.uc @ np.linalg.solve(-1j * mirror * np.eye(n) - model.A, model.B) + self.ud
        return complex(res_h @ model.N @ h.conj())
