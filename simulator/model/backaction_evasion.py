"""Two tones at ±Ωm about one cavity mode: the back-action-evading measurement.

A lower tone at ω̄ − ν and an upper tone at ω̄ + ν on one cavity mode, with ν
near the frequency Ωm of one mechanical mode, share the cavity's noise band
around ω̄: this is the configuration the per-tone model
(:func:`simulator.model.optomechanics.several_tones_model`) refuses. With the
cavity in the frame rotating at ω̄ and the mechanics in the frame rotating at
ν, and the terms rotating at ±2ν dropped (valid for κ ≪ 4Ωm),

    H = −Δ̄ a†a + (Ωm − ν) b†b − G−(a b† + a† b) − G+(a b + a† b†),

G∓ = g0 √n∓ the couplings of the lower and upper tone, Δ̄ = ω̄ − ω_cavity
(effective). With the mean fields real this reads, in quadratures,
H_int = −(G− + G+) X_a X1 − (G− − G+) Y_a X2: for G− = G+ and ν = Ωm the
mechanical quadrature X1 commutes with H, so it is measured in the cavity's
phase quadrature Y_a without back-action, which all goes into X2.

The counter-rotating terms, −G+ e^(−2iνt) a†b − G− e^(2iνt) a†b† + h.c.,
scatter the cavity's input noise from the bands at ω̄ ± 2ν (the lower tone's
Stokes and the upper tone's anti-Stokes process, both a distance 2Ωm off the
cavity) into the mechanics. Those bands are independent of the band at ω̄ and
the cavity's response is flat across them (κ and the mechanical width are
small against 2Ωm), so they act as an extra phase-insensitive bath of the
mechanics, the weak-coupling rates of the off-resonant processes
(Marquardt, Chen, Clerk & Girvin, Phys. Rev. Lett. 99, 093902 (2007), Eq. (3);
the spring: Aspelmeyer, Kippenberg & Marquardt, Rev. Mod. Phys. 86, 1391
(2014), Eq. (75); both recalled from memory):

    A+,low = G−² κ / (κ²/4 + (Δ̄ − ν − Ωm)²),   A−,up = G+² κ / (κ²/4 + (Δ̄ + ν + Ωm)²),

with Δ∓ = Δ̄ ∓ ν the tones' detunings: extra damping A−,up − A+,low, spring
G−²(Δ− − Ωm)/(κ²/4 + (Δ− − Ωm)²) + G+²(Δ+ + Ωm)/(κ²/4 + (Δ+ + Ωm)²) and a
quadrature diffusion
(A−,up + A+,low)(n_c + ½) on X1 and X2 alike. :func:`backaction_evading_model`
adds them as the stated correction (``counter_rotating=True``, the default):
the source "counter-rotating back-action" of the budget, of relative size
about ½ (κ/4Ωm)² of the back-action on X2 for equal couplings. What is still
left out: the mechanical sidebands those processes put at ω̄ ± 2ν (outside the
receiver's band around ω̄), and corrections of relative order (κ/4Ωm)⁴ and
(G/Ωm)² (tests/test_bae_system.py compares with the exact periodic computation:
10⁻⁶ of the variances in its test device).

References
----------
Clerk, Marquardt & Jacobs, New J. Phys. 10, 095010 (2008), Secs. 2–3 (the
two-tone scheme and its rotating-wave Hamiltonian); Aspelmeyer, Kippenberg &
Marquardt, Rev. Mod. Phys. 86, 1391 (2014), Sec. VI.E.
"""

import dataclasses

import numpy as np

from simulator.errors import ScenarioError
from simulator.model.operating_point import operating_point
from simulator.model.statespace import StateSpace
from simulator.model.units import angular, ordinary

# Largest κ/4Ωm accepted: the dropped counter-rotating terms scale as its square.
MAX_SIDEBAND_RATIO = 0.25
# Largest |Ωm − ν| accepted, as a fraction of Ωm: beyond it the pair is no pair about ±Ωm.
MAX_FRAME_OFFSET = 0.5
COUNTER_ROTATING = "counter-rotating back-action"  # the correction's source in the budget
# The names of optomechanics.CAVITY_STATES and OUTPUTS, repeated: that module dispatches a
# declared pair here, so importing it back would make a cycle (tests/test_bae_system.py
# checks they agree).
CAVITY_STATES = ("cavity.X", "cavity.Y")
OUTPUTS = ("output.X", "output.Y")


def is_backaction_evading(scenario):
    """True when the scenario declares its two tones a back-action-evading pair."""
    return bool(scenario.detection.backaction_evading)


@dataclasses.dataclass(frozen=True, kw_only=True)
class PairParameters:
    """The pair and its mechanical mode; rates in rad/s (angular)."""

    kappa: float
    kappa_ex: float
    n_cavity: float  # loss-weighted thermal occupation of the cavity's input, (κin/κ) n_bath
    cavity_bath_occupation: float
    mean_detuning: float  # Δ̄, effective
    nu: float  # half the tones' spacing
    omega: float  # Ωm
    gamma: float  # Γm
    n_bath: float
    g_minus: float  # coupling of the lower tone, g0 √n−
    g_plus: float  # of the upper tone
    mean_frequency_hz: float  # ω̄/2π, where the receiver's reference sits
    mode: str

    @property
    def sideband_ratio(self):
        """κ/4Ωm: the counter-rotating terms scale as its square."""
        return self.kappa / (4 * self.omega)

    def counter_rotating_rates(self):
        """(A+ of the lower tone, A− of the upper tone, their spring) in rad/s: the
        off-resonant scattering the rotating-wave model drops (module notes)."""
        lo = self.mean_detuning - self.nu - self.omega  # lower tone's Stokes band
        hi = self.mean_detuning + self.nu + self.omega  # upper tone's anti-Stokes band
        k2 = self.kappa**2 / 4
        a_plus = self.g_minus**2 * self.kappa / (k2 + lo**2)
        a_minus = self.g_plus**2 * self.kappa / (k2 + hi**2)
        spring = self.g_minus**2 * lo / (k2 + lo**2) + self.g_plus**2 * hi / (k2 + hi**2)
        return a_plus, a_minus, spring


def pair_parameters(scenario, point):
    """The pair of ``point.tones`` as :class:`PairParameters`, or :class:`ScenarioError`
    if the scenario is not a pair the rotating-wave model describes."""
    from simulator.model import laser_noise

    tones = point.tones
    if len(tones) != 2 or tones[0].cavity_mode != tones[1].cavity_mode:
        raise ScenarioError("the back-action-evading model takes the drive and one "
                            "[[tones]] table on the same cavity mode; expected exactly two "
                            "tones on one mode", key="tones", source=scenario.source)
    if len(point.modes) != 1:
        raise ScenarioError(f"the back-action-evading model takes one mechanical mode; "
                            f"found {len(point.modes)}", key="mechanics",
                            source=scenario.source)
    if scenario.detection.tone != tones[0].name:
        raise ScenarioError(
            f"{scenario.detection.tone!r} with detection.backaction_evading: the receiver's "
            "reference sits at the mean frequency of the pair; expected detection.tone = "
            f"{tones[0].name!r} (the default)", key="detection.tone", source=scenario.source)
    if not laser_noise.is_quiet(scenario):
        raise ScenarioError(
            "classical noise on the pair's tones (drive.phase_noise, drive.intensity_noise, "
            "a tone's own noise tables or noise_source), a calibration tone or a noisy local "
            "oscillator with detection.backaction_evading is not modelled yet; expected "
            "quiet tones",
            key="drive", source=scenario.source)
    lower, upper = sorted(tones, key=lambda t: t.detuning_effective_hz)
    cav, mode = point.cavity_modes[lower.cavity_mode], point.modes[0]
    kappa, kappa_ex, om, gm = angular([cav.linewidth_hz, cav.external_linewidth_hz,
                                       mode.frequency_hz, mode.linewidth_hz])
    d_low, d_up = angular([lower.detuning_effective_hz, upper.detuning_effective_hz])
    nu = (d_up - d_low) / 2
    if kappa / (4 * om) > MAX_SIDEBAND_RATIO or abs(om - nu) > MAX_FRAME_OFFSET * om:
        raise ScenarioError(
            f"κ/4Ωm = {kappa / (4 * om):.3g} and half the tones' spacing ν/2π = "
            f"{nu / (2 * np.pi):.6g} Hz against Ωm/2π = {mode.frequency_hz:.6g} Hz; the "
            f"rotating-wave model needs κ/4Ωm ≤ {MAX_SIDEBAND_RATIO:g} and ν near Ωm",
            key="tones", source=scenario.source)
    g_minus, g_plus = (float(angular(t.coupling_rates_hz[0])) for t in (lower, upper))
    return PairParameters(
        kappa=float(kappa), kappa_ex=float(kappa_ex),
        n_cavity=(1 - cav.external_linewidth_hz / cav.linewidth_hz) * cav.bath_occupation,
        cavity_bath_occupation=cav.bath_occupation, mean_detuning=float((d_up + d_low) / 2),
        nu=float(nu), omega=float(om), gamma=float(gm), n_bath=mode.bath_occupation,
        g_minus=g_minus, g_plus=g_plus,
        mean_frequency_hz=(lower.frequency_hz + upper.frequency_hz) / 2, mode=mode.name)


def backaction_evading_model(scenario, point=None, *, counter_rotating=True):
    """The rotating-wave linear model of two tones about one cavity mode.

    Parameters
    ----------
    scenario : simulator.scenario.loader.Scenario
        The ``[drive]`` and exactly one ``[[tones]]`` table on the same cavity
        mode, one mechanical mode.
    point : simulator.model.operating_point.OperatingPoint, optional
        Its operating point (computed when left out).
    counter_rotating : bool
        Add the counter-rotating terms as the stated correction (module notes);
        False gives the pure rotating-wave model.

    Returns
    -------
    simulator.model.statespace.StateSpace
        States ``cavity.X, cavity.Y`` (frame of the tones' mean frequency) and
        ``<mode>.X1, <mode>.X2`` (frame rotating at half the tones' spacing,
        X1 the quadrature the cavity's Y measures); inputs ``external.X/Y,
        internal.X/Y, <mode>.bath.X1/X2`` and, with the correction,
        ``<mode>.counter_rotating.X1/X2``; outputs ``output.X/Y``.
    """
    point = point or operating_point(scenario)
    p = pair_parameters(scenario, point)
    c, d = p.g_minus + p.g_plus, p.g_minus - p.g_plus
    a_plus, a_minus, spring = p.counter_rotating_rates() if counter_rotating else (0, 0, 0)
    kappa, kappa_ex, mean = p.kappa, p.kappa_ex, p.mean_detuning
    dm, gm = p.omega - p.nu + spring, p.gamma + a_minus - a_plus
    kappa_in = max(kappa - kappa_ex, 0.0)
    A = np.array([[-kappa / 2, -mean, 0.0, -d],
                  [mean, -kappa / 2, c, 0.0],
                  [0.0, -d, -gm / 2, dm],
                  [c, 0.0, -dm, -gm / 2]])
    coupling = np.zeros((4, 4))
    coupling[0, 3], coupling[1, 2], coupling[2, 1], coupling[3, 0] = -d, c, -d, c
    extra = 2 if counter_rotating else 0
    B = np.zeros((4, 6 + extra))
    B[0:2, 0:2] = np.sqrt(kappa_ex) * np.eye(2)
    B[0:2, 2:4] = np.sqrt(kappa_in) * np.eye(2)
    B[2:4, 4:6] = np.sqrt(p.gamma) * np.eye(2)
    intensities = [0.5, 0.5] + [p.cavity_bath_occupation + 0.5] * 2 + [p.n_bath + 0.5] * 2
    name = p.mode
    inputs = ["external.X", "external.Y", "internal.X", "internal.Y",
              f"{name}.bath.X1", f"{name}.bath.X2"]
    sources = [("external port vacuum", (0, 1)), ("internal loss bath", (2, 3)),
               (f"{name} thermal bath", (4, 5))]
    if counter_rotating:
        B[2:4, 6:8] = np.sqrt(a_plus + a_minus) * np.eye(2)
        intensities += [p.n_cavity + 0.5] * 2
        inputs += [f"{name}.counter_rotating.X1", f"{name}.counter_rotating.X2"]
        sources.append((COUNTER_ROTATING, (6, 7)))
    C = np.hstack([-np.sqrt(kappa_ex) * np.eye(2), np.zeros((2, 2))])
    D = np.hstack([np.eye(2), np.zeros((2, 4 + extra))])
    return StateSpace(
        A=A, B=B, N=np.diag(intensities), C=C, D=D,
        states=(*CAVITY_STATES, f"{name}.X1", f"{name}.X2"), inputs=tuple(inputs),
        outputs=OUTPUTS, coupling=coupling, sources=tuple(sources))


def pair_point(scenario, point):
    """The operating point as the pair's receiver sees it: one field at the mean frequency.

    The drive's one-tone fields become the pair's: frequency ω̄/2π (the
    receiver's reference), the input flux and intracavity photons of both
    tones, the mean detunings, and per mechanical mode g = g0 √(n− + n+) with
    its cooperativity 4g²/(κΓm). The tones are kept.
    """
    p = pair_parameters(scenario, point)
    lower, upper = sorted(point.tones, key=lambda t: t.detuning_effective_hz)
    mode = point.modes[0]
    g_hz = float(ordinary(np.hypot(p.g_minus, p.g_plus)))
    kappa_hz = point.cavity_modes[lower.cavity_mode].linewidth_hz
    cooperativity = 4 * g_hz**2 / (kappa_hz * mode.linewidth_hz)
    quantum = cooperativity / mode.bath_occupation if mode.bath_occupation > 0 else np.inf
    seen = dataclasses.replace(mode, coupling_rate_hz=g_hz, cooperativity=cooperativity,
                               quantum_cooperativity=float(quantum))
    return dataclasses.replace(
        point, drive_frequency_hz=p.mean_frequency_hz,
        input_photon_flux=lower.input_photon_flux + upper.input_photon_flux,
        photon_number=lower.photon_number + upper.photon_number,
        detuning_bare_hz=(lower.detuning_bare_hz + upper.detuning_bare_hz) / 2,
        detuning_effective_hz=float(ordinary(p.mean_detuning)), modes=(seen,))


def lab_mechanics(scenario, point, model):
    """Effective frequency and linewidth (Hz) of the mode in the laboratory frame.

    The model's mechanics rotates at ν; its eigenvalue λ whose eigenvector
    turns as (X1, X2) ∝ (1, i) has Im λ = Ωeff − ν (the sign the 2 × 2 block
    [[−γ, δ], [−δ, −γ]] gives), so Ωeff = ν + Im λ and Γeff = −2 Re λ.
    """
    p = pair_parameters(scenario, point)
    lam, vec = np.linalg.eig(model.A[:4, :4])
    weight = np.abs(vec[2:4]) ** 2 / np.sum(np.abs(vec) ** 2, axis=0)
    sense = np.sign(np.imag(vec[3] / np.where(vec[2] == 0, 1e-300, vec[2])))
    k = int(np.argmax(weight.sum(axis=0) * (sense >= 0)))
    return float(ordinary(p.nu + lam[k].imag)), float(ordinary(-2 * lam[k].real))
