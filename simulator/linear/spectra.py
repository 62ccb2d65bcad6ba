"""Analytic output spectra of the linear model, split into a noise budget by source.

What a spectrum analyser (or a Welch estimate of an ideal record) would show,
computed from input-output theory on the scenario's single state-space model.
With the Fourier convention x(t) = ∫dω/2π e^(−iωt) x(ω), the output field
z = (X_out + iY_out)/√2 = a_out has the symmetrised two-sided density

    S̄_zz(ω) = u S(ω) u†,   u = (1, i)/√2,   S(ω) = H(ω) N H(ω)†,

and ω > 0 is light above the drive (anti-Stokes). The normal-ordered output
photon-flux density is N_out(ω) = S̄_zz(ω) − ½ (the commutator of a_out is a
delta function), and the detected spectra in shot-noise units are

    heterodyne (two-sided in the optical offset ν):  S(ν) = 1 + η N_out(ν),
    homodyne at angle θ (one-sided, f ≥ 0):          S(f) = 1 + η (2 S̄_θθ(f) − 1),

with X_θ = cos θ X_out + sin θ Y_out, θ measured from the amplitude quadrature
of the intracavity field (its mean is real in the model), η the detection
efficiency.

Noise budget. For each physical source k (input indices I_k) the transfer is
split as H_k = H_k⁰ + H_kᵐ, where H_k⁰ is the path that does not pass through
the mechanics (the model with its optomechanical coupling switched off) and
H_kᵐ = H_k − H_k⁰ the path through the mechanics. For a projection u,

    u S u† = Σ_k [u H⁰N H⁰† u† + u HᵐN Hᵐ† u† + 2 Re(u H⁰ N Hᵐ† u†)]_k
             (+ correlations between sources, where N couples them).

The budget lists the shot-noise floor (the vacuum ½ of every source carried by
its direct path, plus the detection loss; exactly 1 because the uncoupled
input-output map is unitary), then per source its normal-ordered imprecision
u H⁰(N − ½)H⁰† u† (zero for a vacuum input), its motion (back-action driven, or
thermal for a mechanical bath) and the imprecision × back-action cross term.
The cross term of the external-port vacuum is the interference that makes the
Stokes and anti-Stokes sideband areas differ by one quantum.

References
----------
Gardiner and Collett, Phys. Rev. A 31, 3761 (1985) (input-output theory).
Khalili, Miao, Yang, Safavi-Naeini, Painter, Chen, Phys. Rev. A 86, 033840
(2012) (sideband asymmetry as imprecision–back-action interference).
Weinstein et al., Phys. Rev. X 4, 041003 (2014).
Aspelmeyer, Kippenberg, Marquardt, Rev. Mod. Phys. 86, 1391 (2014), Sec. VII.
"""

import numpy as np

from simulator.errors import InputError
from simulator.linear.budget import (
    CHUNK,
    FLOOR,
    Paths,
    budget_pieces,
    detected_budget,
    source_groups,
)
from simulator.linear.spectrum import SpectralLine, Spectrum
from simulator.model.laser_noise import device_eigenvalues
from simulator.model.statespace import StateSpace
from simulator.model.system import as_system
from simulator.model.tone import tone_response
from simulator.model.units import angular, ordinary
from simulator.scenario.tone_sections import offset_words

HETERODYNE_AXIS = "optical offset from the drive (> 0: anti-Stokes, above the drive)"
HOMODYNE_AXIS = "baseband frequency f >= 0"
SHOT_NOISE_UNITS = "shot-noise units (vacuum = 1)"
# every cavity-port spectrum says so: the default of `noisechain spectrum` is the record.
# It is what an ideal detector sees behind the loss η (S = 1 + η N_out), hence the words.
AT_CAVITY = ("at the cavity port (seen through the detection efficiency η; before the "
             "amplifier, filter and sampling)")


def adaptive_grid(model, *, span_hz=None, one_sided=False, points_per_decade=48,
                  closest=1e-3, coarse_points=2001):
    """Frequency grid (Hz) that resolves every resonance of ``model``.

    Parameters
    ----------
    model : simulator.model.statespace.StateSpace
    span_hz : float, optional
        Largest |frequency| on the grid. Default: the farthest resonance plus
        ten of the broadest half-linewidths, which takes in the whole cavity.
    one_sided : bool
        Return f >= 0 only (homodyne); otherwise a two-sided axis.
    points_per_decade : int
        Density of the log-spaced offsets around each resonance.
    closest : float
        Smallest offset from a resonance, in units of its half-linewidth.
    coarse_points : int
        Points of the uniform grid laid over the whole span.

    Returns
    -------
    ndarray
        Sorted, unique frequencies (Hz).

    Notes
    -----
    The poles of H(ω) = C(−iω − A)⁻¹B + D sit at ω = −Im λ + i Re λ for each
    eigenvalue λ of A, so each resonance is centred at −Im λ with half-width
    |Re λ|. Around each one, offsets γ·10^k are laid from ``closest``·γ out to
    the span, on both sides: a 1 Hz mechanical peak next to a MHz-wide cavity
    gets as many points per linewidth as the cavity does.
    """
    lam = np.linalg.eigvals(model.A)
    centres, halfwidths = -lam.imag, np.maximum(-lam.real, 1e-300)
    if span_hz is None:  # from the device's resonances, not the laser-noise filters
        core = device_eigenvalues(model)
        span = float(np.max(np.abs(core.imag)) + 10.0 * np.max(np.maximum(-core.real,
                                                                           1e-300)))
    else:
        if not np.isfinite(span_hz) or span_hz <= 0:
            raise InputError(f"span_hz = {span_hz!r}; expected a positive frequency in Hz")
        span = float(angular(span_hz))
    grids = [np.linspace(-span, span, int(coarse_points))]
    for centre, gamma in zip(centres, halfwidths, strict=True):
        decades = max(np.log10(2.0 * span / gamma) - np.log10(closest), 1.0)
        offsets = gamma * np.logspace(np.log10(closest), np.log10(closest) + decades,
                                      int(np.ceil(decades * points_per_decade)) + 1)
        grids.append(centre + np.concatenate([-offsets[::-1], [0.0], offsets]))
    omega = np.concatenate(grids)
    omega = omega[np.abs(omega) <= span]
    if one_sided:
        omega = np.abs(omega)
    omega = np.unique(omega)
    keep = np.concatenate([[True], np.diff(omega) > 1e-12 * span])
    return ordinary(omega[keep])


def provenance(scenario, scheme, efficiency, angle=None):
    """Scenario, engine, scheme, efficiency and version of a linear spectrum."""
    from simulator import __version__

    out = {"scenario": scenario.scenario.name, "engine": "linear", "scheme": scheme,
           "detection_efficiency": efficiency, "software_version": __version__,
           "scenario_toml": scenario.to_toml()}
    if angle is not None:
        out["quadrature_angle_rad"] = angle
    return out


def _efficiency(scenario, efficiency):
    eta = scenario.detection.efficiency if efficiency is None else efficiency
    if not 0.0 <= eta <= 1.0:
        raise InputError(f"detection efficiency = {eta!r}; expected a number in [0, 1]")
    return float(eta)


def _grid(frequency_hz, model, one_sided):
    if frequency_hz is None:
        return adaptive_grid(model, one_sided=one_sided)
    return checked_grid(frequency_hz, one_sided, "homodyne")


def checked_grid(frequency_hz, one_sided, what):
    """``frequency_hz`` as a float array, or :class:`InputError` if it is not a non-empty 1-D
    array of finite frequencies, or has negative ones for a one-sided (``what``) spectrum."""
    f = np.asarray(frequency_hz, dtype=float)
    if f.ndim != 1 or f.size == 0 or not np.all(np.isfinite(f)):
        raise InputError(f"frequency grid of shape {f.shape}; expected a non-empty "
                         "one-dimensional array of finite frequencies in Hz")
    if one_sided and np.any(f < 0):
        raise InputError(f"{what} frequency grid has negative values (min {f.min()!r} "
                         "Hz); a one-sided spectrum needs f >= 0")
    return f


def heterodyne_spectrum(system, frequency_hz=None, *, efficiency=None):
    """Heterodyne spectrum of the output field with its noise budget.

    Parameters
    ----------
    system : simulator.model.system.System
        Or a scenario, built into one.
    frequency_hz : array_like, optional
        Optical offsets ν from the drive (Hz), two-sided. Default: the
        adaptive grid of :func:`adaptive_grid`.
    efficiency : float, optional
        Detection efficiency η; default ``scenario.detection.efficiency``.

    Returns
    -------
    simulator.linear.spectrum.Spectrum
        Two-sided density in shot-noise units, S(ν) = 1 + η N_out(ν); the
        contributions sum to the total to round-off and cross terms may be
        negative.

    Notes
    -----
    S̄_zz = u H N H† u† with u = (1, i)/√2 and N_out = S̄_zz − ½; see the
    module docstring for the budget. ν > 0 is anti-Stokes (area ∝ n),
    ν < 0 Stokes (area ∝ n + 1).

    References
    ----------
    Weinstein et al., Phys. Rev. X 4, 041003 (2014) (heterodyne sideband spectra).
    """
    system = as_system(system, several_tones="detected").require_stable()
    scenario, model = system.scenario, system.model
    eta = _efficiency(scenario, efficiency)
    f = _grid(frequency_hz, model, one_sided=False)
    u = np.array([1.0, 1.0j]) / np.sqrt(2.0)
    total, parts = detected_budget(model, angular(f), u, 1.0, eta)
    axis = f"optical {offset_words(scenario, above=True)}"  # HETERODYNE_AXIS with one tone
    return Spectrum(frequency_hz=f, axis=axis, sided="two-sided",
                    units=SHOT_NOISE_UNITS, total=total, quantity=f"heterodyne output {AT_CAVITY}",
                    contributions=parts, calibration={"detection_efficiency": eta},
                    lines=tone_lines(model, scenario, u, eta),
                    provenance=provenance(scenario, "heterodyne", eta) | {"at": "cavity"})


def homodyne_spectrum(system, frequency_hz=None, *, quadrature_angle=np.pi / 2,
                      efficiency=None):
    """Homodyne spectrum of one output quadrature with its noise budget.

    Parameters
    ----------
    system : simulator.model.system.System
        Or a scenario, built into one.
    frequency_hz : array_like, optional
        Frequencies f >= 0 (Hz). Default: the one-sided adaptive grid.
    quadrature_angle : float
        θ (rad) of X_θ = cos θ X_out + sin θ Y_out, from the amplitude
        quadrature of the intracavity field; π/2 (default) is the phase
        quadrature, which carries the motion for a resonant drive.
    efficiency : float, optional
        As in :func:`heterodyne_spectrum`.

    Returns
    -------
    simulator.linear.spectrum.Spectrum
        One-sided density in shot-noise units, S(f) = 1 + η(2 S̄_θθ(f) − 1).
    """
    system = as_system(system, several_tones="detected").require_stable()
    scenario, model = system.scenario, system.model
    eta = _efficiency(scenario, efficiency)
    theta = float(quadrature_angle)
    if not np.isfinite(theta):
        raise InputError(f"quadrature_angle = {quadrature_angle!r}; expected a finite "
                         "angle in radians")
    f = _grid(frequency_hz, model, one_sided=True)
    u = np.array([np.cos(theta), np.sin(theta)], dtype=complex)
    total, parts = detected_budget(model, angular(f), u, 2.0, eta)
    return Spectrum(frequency_hz=f, axis=HOMODYNE_AXIS, sided="one-sided",
                    units=SHOT_NOISE_UNITS, total=total,
                    quantity=f"homodyne output {AT_CAVITY}, quadrature angle "
                    f"{np.degrees(theta):.6g} deg",
                    contributions=parts, calibration={"detection_efficiency": eta},
                    lines=tone_lines(model, scenario, u, eta, one_sided=True),
                    provenance=provenance(scenario, "homodyne", eta, theta) | {"at": "cavity"})


def measured_spectrum(system, *, frequency_hz=None, quadrature_angle=None):
    """The spectrum of the system's own detection scheme (heterodyne or homodyne).

    The one call the command line makes; see :func:`heterodyne_spectrum` and
    :func:`homodyne_spectrum`. The homodyne quadrature angle defaults to the
    scenario's ``detection.quadrature_angle_rad``, as in its records.
    """
    system = as_system(system, several_tones="detected")
    detection = system.scenario.detection
    if quadrature_angle is None:
        quadrature_angle = detection.quadrature_angle_rad
    if detection.scheme == "homodyne":
        return homodyne_spectrum(system, frequency_hz, quadrature_angle=quadrature_angle)
    return heterodyne_spectrum(system, frequency_hz)


def photon_flux_density(model, frequency_hz, *, floor=False):
    """Normal-ordered output photon-flux density N_out(ν) (photons/s per Hz).

    Parameters
    ----------
    model : simulator.model.statespace.StateSpace
    frequency_hz : array_like
        Optical offsets ν from the drive (Hz).
    floor : bool
        Return instead the part that does not pass through the mechanics,
        Σ_k u H_k⁰(N_k − ½)H_k⁰† u† (zero for vacuum inputs): the background
        under the sidebands.

    Notes
    -----
    Summed from the budget pieces without the vacuum ½ (the direct path
    carries exactly ½: the uncoupled input-output map is unitary), so a
    sideband far below the shot noise keeps its relative precision.
    """
    omega = angular(frequency_hz)
    flat = omega.reshape(-1)
    u = np.array([1.0, 1.0j]) / np.sqrt(2.0)
    groups = source_groups(model)
    paths = Paths(model, u)
    out = np.empty(flat.size)
    for start in range(0, flat.size, CHUNK):
        w = flat[start:start + CHUNK]
        pieces = budget_pieces(paths, w, groups)[1]
        keep = [v for k, v in pieces.items()
                if k != FLOOR and (not floor or k.endswith(": imprecision"))]
        out[start:start + w.size] = np.sum(keep, axis=0) if keep else 0.0
    return out.reshape(omega.shape)


def state_spectrum(model, frequency_hz, states=None):
    """Symmetrised two-sided spectral density matrix of model states (per Hz).

    ``S[..., i, j]`` with ∫ S df over the whole axis equal to the stationary
    covariance V (Parseval); quadrature units squared per Hz.

    Parameters
    ----------
    model : simulator.model.statespace.StateSpace
    frequency_hz : array_like
    states : sequence of str, optional
        State names; default all states.
    """
    names = model.states if states is None else tuple(states)
    rows = [model.index(name) for name in names]
    select = np.zeros((len(rows), len(model.states)))
    select[np.arange(len(rows)), rows] = 1.0
    probe = StateSpace(A=model.A, B=model.B, N=model.N, C=select,
                       D=np.zeros((len(rows), len(model.inputs))), states=model.states,
                       inputs=model.inputs, outputs=names, coupling=model.coupling)
    return probe.output_spectrum(angular(frequency_hz))


def tone_lines(model, scenario, projection, efficiency, *, one_sided=False):
    """The calibration tone as spectral lines (power, not density) of a detected spectrum.

    Parameters
    ----------
    model : StateSpace
        The scenario's linear model (outputs ``output.X/Y``).
    scenario : simulator.scenario.loader.Scenario
    projection : ndarray (2,)
        u of the detected field: (1, i)/√2 for heterodyne, (cos θ, sin θ) for
        homodyne.
    efficiency : float
        Detection efficiency η.
    one_sided : bool
        Homodyne: one line at +f on the f ≥ 0 axis.

    Returns
    -------
    tuple of simulator.linear.spectrum.SpectralLine
        Empty without a tone. Powers in shot-noise units × Hz: a line has no
        bandwidth, so it compares with a density S over a band B as S·B, and
        an estimator shows it at height power/ENBW.

    Notes
    -----
    φ_tone = φ0 cos Ωt = Re[φ0 e^{−iΩt}] gives the output u·out(t) =
    c₊ e^{−iΩt} + c₋ e^{iΩt}, c± = (φ0/2) u·H(±Ω). Heterodyne
    (S = 1 + η(S̄_zz − ½)): lines η|c₊|² at ν = +f (anti-Stokes side) and
    η|c₋|² at ν = −f. Homodyne (S = 1 + η(2S̄_θθ − 1)): η φ0²|u·H(Ω)|²/2 at f.
    """
    tone = scenario.drive.calibration_tone
    if tone.depth_rad == 0:
        return ()
    f = tone.frequency_hz
    upper = 0.5 * tone_response(model, scenario, +1.0) @ projection
    if one_sided:
        return (SpectralLine(name="calibration tone", frequency_hz=f,
                             power=float(2.0 * efficiency * abs(upper) ** 2)),)
    lower = 0.5 * tone_response(model, scenario, -1.0) @ projection
    return (SpectralLine(name="calibration tone, upper (anti-Stokes side)", frequency_hz=f,
                         power=float(efficiency * abs(upper) ** 2)),
            SpectralLine(name="calibration tone, lower (Stokes side)", frequency_hz=-f,
                         power=float(efficiency * abs(lower) ** 2)))
