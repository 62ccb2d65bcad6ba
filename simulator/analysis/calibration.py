"""g0 from a phase-modulation calibration tone (frequency-modulation method).

A phase modulation φ0 cos(Ω t) of the drive is, inside the cavity, the same
as a modulation of the cavity frequency by φ̇: it reaches the detector through
the same transfer function as the mechanical motion, which modulates the
cavity frequency by √2 g0 q. Comparing the mechanical sideband's area with
the tone's power in ONE spectrum therefore gives g0² times the occupation,
independently of detection efficiency, gain and drive power (Gorodetsky et
al. 2010). For a two-sided heterodyne spectrum (ν > 0 anti-Stokes) and the
model's conventions (χ_c(ω) = 1/(κ/2 − i(Δ + ω)), angular units):

    anti-Stokes area  c_AS = η κ_ex n̄ (4/κ²) g0² n,
    Stokes area       c_S  = η κ_ex n̄ (4/κ²) g0² (n + 1),
    tone line at ±Ω   P±   = η (φ0²/4) Φ |r(±Ω)|²,   r(ω) = 1 − κ_ex χ_c(ω),

with n̄ = κ_ex Φ |χ_c(0)|², so that

    g0² n = (c_AS/P₊) Q₊,  g0² (n + 1) = (c_S/P₋) Q₋,
    Q± = (φ0²/16) |r(±Ω)|² κ² (κ²/4 + Δ²) / κ_ex².

Here the modulator sits in the drive path only and the local oscillator does
not carry the tone, so the tone also leaves through the cavity's prompt
reflection: |r|² replaces the "motional" response Ω² κ_ex n̄ |χ_c(Ω)|², to
which it reduces when the local oscillator carries the tone too
(``tone_in_local_oscillator=True``: Q± = (φ0²Ω²/16) κ² |χ_c(±Ω)|²).

Tone (power) versus noise (density): both are read from the same averaged
periodogram. The sideband is a density, fitted as a lineshape whose
parameter is its area (density × Hz). The tone is a line: its bin holds
power/ENBW above the background, so its power is (P_bin − background) ×
ENBW, the estimator's equivalent noise bandwidth applied once, with the tone
on a bin centre (no scalloping). The occupation n must include dynamical
back-action: given, or from the fitted linewidth, n = (Γm n_th + A+)/Γ_eff
with A+ = g0² n̄ κ/(κ²/4 + (Δ − Ωm)²) solved together with g0.

Neglected: the tone's own optomechanical response (induced transparency),
of relative size ~ 2 (κ_ex/κ) Γopt / (|r(Ω)| |Ω − Ωm|) in the tone power:
put the tone many effective linewidths away from the mechanical peak.

References
----------
Gorodetsky, Schliesser, Anetsberger, Deléglise, Kippenberg, Opt. Express 18,
23236 (2010) (frequency-modulation calibration of g0).
Weinstein et al., Phys. Rev. X 4, 041003 (2014) (sideband areas n and n + 1).
"""

import dataclasses

import numpy as np

from simulator.analysis.fitting import fit_whittle
from simulator.analysis.thermometry import PARAMETERS, cavity_filter, sideband_model
from simulator.errors import InputError
from simulator.model.units import TWO_PI


@dataclasses.dataclass(frozen=True, kw_only=True)
class Device:
    """What the experimenter knows about the device, in Hz (not g0).

    ``detuning_hz`` is the effective detuning; ``photon_number`` n̄ is needed
    only to infer the occupation from the linewidth (the A+ term).
    """

    cavity_linewidth_hz: float
    external_linewidth_hz: float
    detuning_hz: float
    mechanical_frequency_hz: float
    mechanical_linewidth_hz: float
    bath_occupation: float
    photon_number: float

    @classmethod
    def from_scenario(cls, system, mode=0):
        """Nominal device parameters from a system's (or scenario's) operating point (not g0).

        With several tones, the drive's as its receiver sees it (the calibration tone
        modulates the drive; another tone's receiver with a calibration tone is refused:
        :func:`simulator.model.detected_tone.require_quiet_detection`)."""
        from simulator.analysis.thermometry import Calibration
        from simulator.model.system import as_system

        system = as_system(system, several_tones="detected")
        known = Calibration.from_scenario(system, mode)
        return cls(photon_number=system.point.photon_number, **{
            f.name: getattr(known, f.name) for f in dataclasses.fields(cls)
            if f.name != "photon_number"})

    def response(self, frequency_hz):
        """χ_c(2πν) (s/rad) and the prompt-plus-cavity reflection r(2πν) at offset ν."""
        kappa, kappa_ex, delta, w = (TWO_PI * np.asarray(x, dtype=float) for x in (
            self.cavity_linewidth_hz, self.external_linewidth_hz, self.detuning_hz,
            frequency_hz))
        chi = 1.0 / (kappa / 2 - 1j * (delta + w))
        return chi, 1.0 - kappa_ex * chi

    def tone_factor(self, depth_rad, tone_frequency_hz, *, tone_in_local_oscillator=False):
        """Q₊, Q₋ ((rad/s)²): g0² n = (c_AS/P₊) Q₊ and g0²(n + 1) = (c_S/P₋) Q₋."""
        kappa, kappa_ex, delta = (TWO_PI * x for x in (
            self.cavity_linewidth_hz, self.external_linewidth_hz, self.detuning_hz))
        nu = np.array([tone_frequency_hz, -tone_frequency_hz])
        chi, r = self.response(nu)
        if tone_in_local_oscillator:
            return depth_rad**2 * (TWO_PI * nu) ** 2 / 16 * kappa**2 * np.abs(chi) ** 2
        return (depth_rad**2 / 16 * np.abs(r) ** 2 * kappa**2 * (kappa**2 / 4 + delta**2)
                / kappa_ex**2)

    def stokes_rate_per_coupling(self):
        """A+/g0² (1/(rad/s)): n̄ κ/(κ²/4 + (Δ − Ωm)²) in angular units."""
        kappa, delta, om = (TWO_PI * x for x in (
            self.cavity_linewidth_hz, self.detuning_hz, self.mechanical_frequency_hz))
        return self.photon_number * kappa / (kappa**2 / 4 + (delta - om) ** 2)


@dataclasses.dataclass(frozen=True, kw_only=True)
class ToneCalibration:
    """g0 from the tone, per sideband and chosen, with one-sigma errors (Hz)."""

    coupling_hz: float  # the sideband estimate with the smaller error
    coupling_error_hz: float
    coupling_anti_stokes_hz: float
    coupling_anti_stokes_error_hz: float
    coupling_stokes_hz: float
    coupling_stokes_error_hz: float
    occupation: float  # used for the anti-Stokes estimate (given or from the linewidth)
    tone_power_upper: float  # shot-noise units × Hz, at +f (anti-Stokes side)
    tone_power_upper_error: float
    tone_power_lower: float  # at −f (Stokes side)
    tone_power_lower_error: float
    fit: object

    def as_dict(self):
        """``{name: (value, error)}`` (the validation harness's format)."""
        out = {"coupling_hz": (self.coupling_hz, self.coupling_error_hz),
               "coupling_anti_stokes_hz": (self.coupling_anti_stokes_hz,
                                           self.coupling_anti_stokes_error_hz),
               "coupling_stokes_hz": (self.coupling_stokes_hz, self.coupling_stokes_error_hz),
               "tone_power_upper": (self.tone_power_upper, self.tone_power_upper_error),
               "tone_power_lower": (self.tone_power_lower, self.tone_power_lower_error)}
        out.update(self.fit.as_dict())
        return out


def tone_power(psd, frequency_hz, background):
    """Power of a line on a bin centre: (P_bin − background) × ENBW, with its error.

    Parameters
    ----------
    psd : simulator.analysis.psd.PSDEstimate
    frequency_hz : float
        The line's frequency, which must be a bin centre (within 0.1 % of the
        resolution): off a bin the window's scalloping loses power.
    background : float
        Expected density of everything else at that bin.

    Returns
    -------
    (float, float)
        Power (density units × Hz) and its standard error: a bin holding a
        line of density L over noise of density S averages K segments of
        |s + n|², variance (S² + 2 S L)/K.
    """
    k = int(np.argmin(np.abs(psd.frequency_hz - frequency_hz)))
    if abs(psd.frequency_hz[k] - frequency_hz) > 1e-3 * psd.resolution_hz:
        raise InputError(f"tone at {frequency_hz!r} Hz is not on a frequency bin (nearest "
                         f"{psd.frequency_hz[k]!r} Hz, spacing {psd.resolution_hz!r} Hz); "
                         "expected a segment length that puts it on a bin centre")
    line = psd.density[k] - background
    error = np.sqrt(max(background**2 + 2 * background * line, 0.0) / psd.averages)
    return float(line * psd.noise_bandwidth_hz), float(error * psd.noise_bandwidth_hz)


def calibrate_coupling(psd, device, *, depth_rad, tone_frequency_hz, occupation=None,
                       sample_rate_hz=None, tone_in_local_oscillator=False,
                       band_linewidths=40.0):
    """g0 of one mode from its sidebands and the calibration tone in one heterodyne PSD.

    Parameters
    ----------
    psd : simulator.analysis.psd.PSDEstimate
        Two-sided, ν > 0 anti-Stokes, any units (they cancel).
    device : Device
        Known cavity, detuning and mode parameters.
    depth_rad, tone_frequency_hz : float
        The modulation φ0 cos(2π f t); ±f must be bin centres.
    occupation : float, optional
        The mode's occupation including dynamical back-action; default: from
        the fitted linewidth, n = (Γm n_th + A+)/Γ_eff.
    sample_rate_hz : float, optional
        For records of this simulator (integrate-and-dump samples): divide
        out their response sinc²(ν/fs) at the sideband and at the tone.
    tone_in_local_oscillator : bool
        The local oscillator carries the tone too (modulator before the split).
    band_linewidths : float
        Half-width of each fitted band, in fitted-linewidth units (≥ 20 bins).

    Returns
    -------
    ToneCalibration

    Notes
    -----
    See the module docstring for the relation. The sidebands are fitted with
    the reference lineshape model of :mod:`simulator.analysis.thermometry`
    (cavity filter removed point by point, Whittle likelihood) with the tone
    bins masked; the fitted model at the tone bins is the background of the
    tone. Errors by linear propagation of the fit covariance (scaled by
    :func:`bin_correlation` for the window) and the tone errors (independent).
    """
    if psd.sided != "two-sided":
        raise InputError("the tone calibration needs a two-sided (IQ heterodyne) spectrum; "
                         f"got a {psd.sided} one")
    if not (depth_rad > 0 and tone_frequency_hz > 0):
        raise InputError(f"depth_rad = {depth_rad!r}, tone_frequency_hz = "
                         f"{tone_frequency_hz!r}; expected both positive")
    fit = _fit_sidebands(psd, device, tone_frequency_hz, band_linewidths)
    model = sideband_model(device)
    tones = [tone_power(psd, s * tone_frequency_hz,
                        float(model(np.array([s * tone_frequency_hz]), fit.values)[0]))
             for s in (+1, -1)]
    q = device.tone_factor(depth_rad, tone_frequency_hz,
                           tone_in_local_oscillator=tone_in_local_oscillator)
    if sample_rate_hz is not None:
        def response(x):
            return np.sinc(x / sample_rate_hz) ** 2
    else:
        def response(x):
            return 1.0

    def couplings(theta, p_up, p_down):
        _, centre, width, c_s, c_as = theta
        k_as = c_as / response(centre) / (p_up / response(tone_frequency_hz)) * q[0]
        k_s = c_s / response(centre) / (p_down / response(tone_frequency_hz)) * q[1]
        n = occupation if occupation is not None else _occupation(device, width, k_as)
        return np.sqrt(max(k_as / n, 0.0)) / TWO_PI, np.sqrt(max(k_s / (n + 1), 0.0)) / TWO_PI, n

    theta = np.asarray(fit.values, dtype=float)
    g_as, g_s, n = couplings(theta, tones[0][0], tones[1][0])
    errors = _propagate(couplings, theta, fit.covariance * bin_correlation(psd.window), tones)
    pick = 0 if errors[0] <= errors[1] else 1
    return ToneCalibration(
        coupling_hz=float((g_as, g_s)[pick]), coupling_error_hz=float(errors[pick]),
        coupling_anti_stokes_hz=float(g_as), coupling_anti_stokes_error_hz=float(errors[0]),
        coupling_stokes_hz=float(g_s), coupling_stokes_error_hz=float(errors[1]),
        occupation=float(n), tone_power_upper=tones[0][0], tone_power_upper_error=tones[0][1],
        tone_power_lower=tones[1][0], tone_power_lower_error=tones[1][1], fit=fit)


def bin_correlation(window, segment_samples=4096):
    """Σ_ℓ |ρ_ℓ|²: variance inflation of a smooth-spectrum fit from correlated bins.

    Adjacent bins of a tapered periodogram are correlated, ρ_ℓ = Σ w² e^{−2πiℓn/L}
    / Σ w² (Hann: ρ₁ = −2/3, ρ₂ = 1/6, so Σ|ρ|² = 35/18 ≈ 1.94; boxcar: 1),
    while a Whittle fit counts every bin as independent (Nørrelykke &
    Flyvbjerg, Rev. Sci. Instrum. 81, 075103 (2010)); the fit covariance of
    a lineshape spanning many bins is scaled by this factor.
    """
    from simulator.analysis.psd import taper

    w2 = taper(window, segment_samples) ** 2
    rho = np.fft.fft(w2) / np.sum(w2)
    return float(np.sum(np.abs(rho) ** 2))


def _occupation(device, width_hz, k_as):
    """n from Γ_eff n = Γm n_th + A+, A+ = g0² n̄ κ/(…) and g0² = K_AS/n (a quadratic)."""
    gamma, gm = TWO_PI * abs(width_hz), TWO_PI * device.mechanical_linewidth_hz
    a_plus = k_as * device.stokes_rate_per_coupling()  # A+ · n
    thermal = gm * device.bath_occupation
    return (thermal + np.sqrt(thermal**2 + 4 * gamma * a_plus)) / (2 * gamma)


def _propagate(couplings, theta, covariance, tones):
    """One-sigma errors of (g_AS, g_S) from the fit covariance and the tone errors."""
    n_par = theta.size
    x0 = np.concatenate([theta, [tones[0][0], tones[1][0]]])
    cov = np.zeros((n_par + 2, n_par + 2))
    cov[:n_par, :n_par] = covariance
    cov[n_par, n_par], cov[n_par + 1, n_par + 1] = tones[0][1] ** 2, tones[1][1] ** 2
    jac = np.zeros((2, n_par + 2))
    for i in range(n_par + 2):
        h = 1e-6 * (abs(x0[i]) if x0[i] != 0 else 1.0)
        up, down = x0.copy(), x0.copy()
        up[i] += h
        down[i] -= h
        jac[:, i] = (np.array(couplings(up[:n_par], *up[n_par:])[:2])
                     - np.array(couplings(down[:n_par], *down[n_par:])[:2])) / (2 * h)
    return np.sqrt(np.clip(np.diag(jac @ cov @ jac.T), 0.0, None))


def _fit_sidebands(psd, device, tone_frequency_hz, band_linewidths):
    """Whittle fit of both sidebands near ±Ωm, the tone bins masked."""
    f, p, df = psd.frequency_hz, psd.density, psd.resolution_hz
    omega = device.mechanical_frequency_hz
    floor0 = float(np.median(p))
    near = np.abs(np.abs(f) - omega) < 0.5 * abs(abs(tone_frequency_hz) - omega) + 3 * df
    up = near & (f > 0)
    excess = p[up] - floor0
    if excess.size < 10 or np.max(excess) <= 0:
        raise InputError(f"no mechanical sideband near +{omega:.6g} Hz above the floor; "
                         "expected a record that resolves it")
    half_power = np.count_nonzero(excess > 0.5 * np.max(excess))
    width0 = max(half_power * df, 2 * df)
    half_band = max(band_linewidths * width0, 20 * df)
    band = (np.abs(np.abs(f) - omega) < half_band) & (
        np.abs(np.abs(f) - tone_frequency_hz) > 3 * df)
    fb, pb = f[band], p[band]
    filt = cavity_filter(fb, device.cavity_linewidth_hz, device.detuning_hz)
    areas = [max(np.sum(((pb - floor0) / filt)[side]) * df, 1e-6 * floor0 * width0)
             for side in (fb < 0, fb > 0)]
    initial = [floor0, omega, width0, *areas]
    return fit_whittle(sideband_model(device), fb, pb, psd.averages, initial, names=PARAMETERS,
                       lower=[0, 0.5 * omega, 0, 0, 0],
                       upper=[np.inf, 1.5 * omega, np.inf, np.inf, np.inf])
