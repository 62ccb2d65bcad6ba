"""Referral of detected spectra to displacement and force (photocurrent and voltage:
:mod:`simulator.linear.photocurrent`).

Displacement of mode j is x_j = √2 x_zpf q_j. The linearised interaction
H = −ħ g (a + a†)(b + b†) = −√2 ħ g X x_j / x_zpf gives the radiation-pressure
force F_j = √2 ħ g X / x_zpf, which enters the model as ṗ_j = ... + 2gX; so
a force F_j adds √2 x_zpf F_j / ħ to ṗ_j. Everything below comes from the
model's own matrices:

- transduction G_j(ω): output quadratures per metre of x_j, through the cavity
  with the coupling switched off. Exactly, out = H⁰ξ + Σ_j G_j x_j, because the
  output reads only cavity states and the uncoupled drift is block diagonal;
- susceptibility χ_j(ω) = x_j/F_j of the full model (optical spring and damping
  included), or of the bare mode, χ = 1/(m(Ωm² + Γm²/4 − ω² − iΓm ω)) for the
  symmetric damping of the model;
- back-action force K_j(ω)ξ: the force on mode j from the inputs through the
  uncoupled cavity.

Symmetrised two-sided references: zero-point motion ħ|Im χ|, standard quantum
limit ħ|χ| (on resonance ħ/(m Ωm Γm)), imprecision S_xx·back-action S_FF ≥ ħ²/4.

References
----------
Braginsky and Khalili, Quantum Measurement (Cambridge University Press, 1992).
Clerk, Devoret, Girvin, Marquardt, Schoelkopf, Rev. Mod. Phys. 82, 1155 (2010),
Secs. II.B, III.B and VI (quantum noise, SQL, imprecision–back-action bound).
Aspelmeyer, Kippenberg, Marquardt, Rev. Mod. Phys. 86, 1391 (2014), Sec. VI.A.
"""

import dataclasses

import numpy as np

from simulator.errors import InputError
from simulator.linear.photocurrent import to_photocurrent, to_voltage  # noqa: F401 (also from here)
from simulator.linear.steady_state import effective_mechanics
from simulator.model.optomechanics import mode_states
from simulator.model.statespace import StateSpace
from simulator.model.system import as_system
from simulator.model.units import HBAR, angular

HBAR_SQUARED_OVER_4 = HBAR**2 / 4


def mode_index(point, mode):
    """Index of ``mode`` (a name or an integer) among the scenario's modes."""
    names = [m.name for m in point.modes]
    if isinstance(mode, (int, np.integer)) and not isinstance(mode, bool):
        if 0 <= mode < len(names):
            return int(mode)
    elif mode in names:
        return names.index(mode)
    raise InputError(f"mechanical mode {mode!r} not found; expected a name among "
                     f"{', '.join(names)} or an index 0..{len(names) - 1}")


def _probe(model, a, b_column, c_row):
    """Scalar-input, vector-output StateSpace sharing the model's drift ``a``."""
    b = np.asarray(b_column, dtype=float).reshape(-1, 1)
    c = np.atleast_2d(np.asarray(c_row, dtype=float))
    return StateSpace(A=a, B=b, N=np.zeros((1, 1)), C=c, D=np.zeros((c.shape[0], 1)),
                      states=model.states, inputs=("probe",),
                      outputs=tuple(f"out{i}" for i in range(c.shape[0])))


def displacement_gain(model, point, j, frequency_hz):
    """Output quadratures (X_out, Y_out) per metre of x_j: G_j(ω), shape (..., 2).

    Units 1/(m·√Hz·...) as quadrature amplitude per metre; |u·G|² multiplies
    S̄_xx (m²/Hz) to give the output quadrature density.
    """
    s = mode_states(j).start  # q of mode j; p follows
    x_zpf = point.modes[j].zero_point_amplitude_m
    uncoupled = model.A - model.coupling
    probe = _probe(model, uncoupled, model.coupling[:, s] / (np.sqrt(2.0) * x_zpf), model.C)
    return probe.transfer(angular(frequency_hz))[..., 0]


def susceptibility(model, point, j, frequency_hz, *, bare=False):
    """Mechanical susceptibility χ_j(ω) = x_j/F_j (m/N), complex.

    ``bare=False`` (default) uses the full model, with optical spring and
    damping; ``bare=True`` the mode alone.
    """
    s = mode_states(j).start  # q of mode j; p follows
    x_zpf = point.modes[j].zero_point_amplitude_m
    b = np.zeros(len(model.states))
    b[s + 1] = np.sqrt(2.0) * x_zpf / HBAR
    c = np.zeros(len(model.states))
    c[s] = np.sqrt(2.0) * x_zpf
    a = model.A - model.coupling if bare else model.A
    return _probe(model, a, b, c).transfer(angular(frequency_hz))[..., 0, 0]


def backaction_force_gain(model, point, j, frequency_hz):
    """Force on mode j (N) per model input, through the uncoupled cavity: K_j(ω)."""
    s = mode_states(j).start  # q of mode j; p follows
    x_zpf = point.modes[j].zero_point_amplitude_m
    row = model.coupling[s + 1, :] * HBAR / (np.sqrt(2.0) * x_zpf)
    probe = StateSpace(A=model.A - model.coupling, B=model.B, N=model.N, C=row[None, :],
                       D=np.zeros((1, len(model.inputs))), states=model.states,
                       inputs=model.inputs, outputs=("force",))
    return probe.transfer(angular(frequency_hz))[..., 0, :]


def _scheme(spectrum, scenario):
    prov = spectrum.provenance
    if prov.get("at") == "record":
        raise InputError("this spectrum is the record at the digitiser (detection chain and "
                         "sampling included); referral needs the spectrum at the cavity port "
                         "(heterodyne_spectrum, homodyne_spectrum, or --at cavity)")
    scheme = prov.get("scheme", scenario.detection.scheme)
    eta = float(prov.get("detection_efficiency", scenario.detection.efficiency))
    theta = float(prov.get("quadrature_angle_rad", np.pi / 2))
    if scheme == "heterodyne" and spectrum.sided != "two-sided":
        raise InputError("a heterodyne spectrum must be two-sided in the optical offset")
    if eta <= 0:
        raise InputError(f"detection efficiency {eta!r} is zero: nothing is transduced")
    return scheme, eta, theta


def transduction(spectrum, system, mode=0):
    """Shot-noise units per (m²/Hz) of mode displacement, on the spectrum's grid.

    Heterodyne (two-sided ν): η|u·G(2πν)|², u = (1, i)/√2. Homodyne
    (one-sided f): η|G_θ(2πf)|², so that S_hom/transduction is the one-sided
    displacement density 2S̄_xx.
    """
    system = as_system(system, stage="simulator.linear.referral.transduction").require_stable()
    j = mode_index(system.point, mode)
    return _gain(spectrum, system, j, spectrum.frequency_hz)


def _gain(spectrum, system, j, frequency_hz):
    scheme, eta, theta = _scheme(spectrum, system.scenario)
    if scheme == "heterodyne":
        u = np.array([1.0, 1.0j]) / np.sqrt(2.0)
    else:
        u = np.array([np.cos(theta), np.sin(theta)])
    gain = displacement_gain(system.model, system.point, j, frequency_hz)
    return eta * np.abs(gain @ u) ** 2


def to_displacement(spectrum, system, mode=0):
    """The detected spectrum referred to the displacement of one mode (m²/Hz).

    Parameters
    ----------
    spectrum : simulator.linear.spectrum.Spectrum
        A heterodyne or homodyne spectrum in shot-noise units (its provenance
        names the scheme, efficiency and quadrature angle).
    system : simulator.model.system.System
        Or a scenario, built into one.
    mode : str or int
        The mechanical mode whose displacement the spectrum is referred to.

    Returns
    -------
    simulator.linear.spectrum.Spectrum
        Same grid and sidedness; total and every contribution divided by the
        transduction (so the shot-noise floor becomes the shot-noise
        imprecision), with reference curves "standard quantum limit" ħ|χ_eff|
        and "zero-point motion" ħ|Im χ_eff| (doubled when one-sided). The
        calibration holds the transduction at the mode's effective frequency
        (shot-noise units per m²/Hz).

    Notes
    -----
    On the heterodyne axis the referred spectrum at ν is imprecision plus the
    quantum (unsymmetrised) displacement spectrum: the imprecision ×
    back-action terms add ±ħ Im χ, so the anti-Stokes side shows n and the
    Stokes side n + 1 quanta.
    """
    system = as_system(system, stage="simulator.linear.referral.to_displacement").require_stable()
    point, model = system.point, system.model
    j = mode_index(point, mode)
    f = spectrum.frequency_hz
    gain = _gain(spectrum, system, j, f)
    chi = susceptibility(model, point, j, f)
    sides = 2.0 if spectrum.sided == "one-sided" else 1.0
    f_mode = effective_mechanics(model, len(point.modes))[0][j]
    at = _gain(spectrum, system, j, np.array([f_mode]))[0]
    return _referred(spectrum, gain, "m^2/Hz", f"displacement of mode {point.modes[j].name}",
                     {"standard quantum limit": sides * HBAR * np.abs(chi),
                      "zero-point motion": sides * HBAR * np.abs(chi.imag)},
                     {"transduction_at_mode_frequency_snu_per_m2_per_hz": float(at),
                      "zero_point_amplitude_m": point.modes[j].zero_point_amplitude_m})


def to_force(spectrum, system, mode=0):
    """The detected spectrum referred to a force on one mode (N²/Hz).

    Displacement referral divided by |χ_eff(ω)|², the full susceptibility of
    the mode. References: "standard quantum limit" ħ/|χ_eff| and "zero-point
    force" ħ|Im χ_eff|/|χ_eff|² (doubled when one-sided).
    """
    system = as_system(system, stage="simulator.linear.referral.to_force").require_stable()
    x = to_displacement(spectrum, system, mode)
    point = system.point
    j = mode_index(point, mode)
    chi2 = np.abs(susceptibility(system.model, point, j, spectrum.frequency_hz)) ** 2
    ref = {"standard quantum limit": x.reference["standard quantum limit"] / chi2,
           "zero-point force": x.reference["zero-point motion"] / chi2}
    return _referred(x, chi2, "N^2/Hz", f"force on mode {point.modes[j].name}", ref, {},
                     replace_reference=True)


def _referred(spectrum, gain, units, quantity, reference, calibration,
              replace_reference=False):
    base = spectrum.quantity.split(" referred to ")[0]
    with np.errstate(divide="ignore", invalid="ignore"):  # no transduction: infinite
        ref = {} if replace_reference else {k: v / gain
                                            for k, v in spectrum.reference.items()}
        ref.update(reference)
        return dataclasses.replace(
            spectrum, units=units, quantity=f"{base} referred to {quantity}",
            total=spectrum.total / gain,
            contributions={k: v / gain for k, v in spectrum.contributions.items()},
            reference=ref, calibration={**spectrum.calibration, **calibration})


@dataclasses.dataclass(frozen=True, kw_only=True)
class MeasurementNoise:
    """Imprecision and back-action of a quadrature measurement of one mode.

    Symmetrised two-sided densities on ``frequency_hz``: ``imprecision``
    (m²/Hz), ``backaction`` (N²/Hz) and their cross-spectrum ``correlation``
    (m·N/Hz, complex). ``product`` = imprecision·backaction, compared with
    ħ²/4 (Braginsky and Khalili 1992; Clerk et al., RMP 82, 1155 (2010)).
    """

    frequency_hz: np.ndarray
    imprecision: np.ndarray
    backaction: np.ndarray
    correlation: np.ndarray
    efficiency: float
    mode: str
    quadrature_angle: float

    @property
    def product(self):
        """S_xx^imp · S_FF^ba ((J·s)², i.e. m²N²/Hz²)."""
        return self.imprecision * self.backaction

    def added_noise(self, chi):
        """Total added displacement noise S_imp + |χ|²S_FF + 2Re(χ* S_xF) (m²/Hz)."""
        return (self.imprecision + np.abs(chi) ** 2 * self.backaction
                + 2.0 * np.real(np.conj(chi) * self.correlation))


def imprecision_backaction(system, frequency_hz, mode=0, *, quadrature_angle=np.pi / 2,
                           scheme="homodyne", efficiency=None):
    """Imprecision and back-action noise of measuring quadrature θ of the output.

    Parameters
    ----------
    system : simulator.model.system.System
        Or a scenario, built into one.
    frequency_hz : array_like
        Frequencies (Hz).
    mode : str or int
    quadrature_angle : float
        θ (rad) of the measured output quadrature, as in
        :func:`simulator.linear.spectra.homodyne_spectrum`.
    scheme : {"homodyne", "heterodyne"}
        Heterodyne measures each quadrature on one arm at efficiency η/2.
    efficiency : float, optional
        η; default ``scenario.detection.efficiency``.

    Returns
    -------
    MeasurementNoise

    Notes
    -----
    With u_θ = (cos θ, sin θ), G_θ = u_θ·G and H⁰ the uncoupled transfer,

        S_imp = [η u_θH⁰NH⁰†u_θ† + (1 − η)/2] / (η |G_θ|²),
        S_FF = K N K†,   S_xF = u_θ H⁰ N K† / G_θ.

    For a lossless cavity driven on resonance, read out in the phase
    quadrature with η = 1, S_imp·S_FF = ħ²/4 at every frequency; a lossy
    chain gives ħ²/(4η κ_ex/κ). Where the quadrature carries no signal
    (G_θ = 0, e.g. the amplitude quadrature at Δ = 0) the imprecision is
    infinite and the correlation undefined (inf or NaN).
    """
    system = as_system(system, stage="simulator.linear.referral.imprecision_backaction")
    system = system.require_stable()
    scenario, point, model = system.scenario, system.point, system.model
    j = mode_index(point, mode)
    if scheme not in ("homodyne", "heterodyne"):
        raise InputError(f"scheme = {scheme!r}; expected 'homodyne' or 'heterodyne'")
    eta = scenario.detection.efficiency if efficiency is None else float(efficiency)
    if not 0.0 < eta <= 1.0:
        raise InputError(f"efficiency = {eta!r}; expected a number in (0, 1]")
    if scheme == "heterodyne":
        eta /= 2.0
    f = np.atleast_1d(np.asarray(frequency_hz, dtype=float))
    u = np.array([np.cos(quadrature_angle), np.sin(quadrature_angle)])
    h0 = np.einsum("p,wpm->wm", u, model.transfer(angular(f), uncoupled=True))
    g = displacement_gain(model, point, j, f) @ u
    k = backaction_force_gain(model, point, j, f)
    direct = np.einsum("wi,ij,wj->w", h0, model.N, h0.conj()).real
    backaction = np.einsum("wi,ij,wj->w", k, model.N, k.conj()).real
    # a quadrature blind to the motion has zero gain: infinite imprecision, not an error
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        imprecision = (eta * direct + (1.0 - eta) / 2.0) / (eta * np.abs(g) ** 2)
        correlation = np.einsum("wi,ij,wj->w", h0, model.N, k.conj()) / g
    return MeasurementNoise(frequency_hz=f, imprecision=imprecision, backaction=backaction,
                            correlation=correlation, efficiency=eta,
                            mode=point.modes[j].name, quadrature_angle=float(quadrature_angle))
