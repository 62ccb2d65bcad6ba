"""Sideband thermometry: occupation from a heterodyne spectrum, three independent ways.

The reference estimator fits the whole two-sided heterodyne spectrum near one
mechanical mode (shot-noise units, ν > 0 anti-Stokes) with

    S(ν) = b + F(ν) [c_S L(ν + Ω) + c_AS L(ν − Ω)],
    F(ν) = (κ/2)² / ((κ/2)² + (ν + Δ)²),   L(x) = (γ/2π) / (x² + γ²/4),

by maximum likelihood on the averaged periodogram (Whittle). The cavity
filter F is removed point by point inside the model instead of dividing
windowed areas by its value at the peak, which biases n by several percent
(common practice: the filter changes across the line; docs/analysis.md).
In weak coupling c_AS/c_S = n/(n + 1) and
c_AS = η (κ_ex/κ)(4g²/κ) n, c_S = η (κ_ex/κ)(4g²/κ)(n + 1).

Three occupation estimates follow:
- asymmetry: n = r/(1 − r), r = c_AS/c_S — needs no calibration;
- calibrated areas: n from c_AS and n + 1 from c_S, given η, κ, κ_ex and g;
- damping: n = (Γm n_th + A+)/γ from the fitted total linewidth, given the
  bath occupation, intrinsic linewidth and the Stokes rate A+.

Uncertainties by linear error propagation from the fit covariance.

References
----------
Safavi-Naeini et al., PRL 108, 033602 (2012) (sideband asymmetry
thermometry); Weinstein et al., PRX 4, 041003 (2014) (heterodyne asymmetry
and its origin); Marquardt et al., PRL 99, 093902 (2007) (rates).
"""

import dataclasses

import numpy as np

from simulator.analysis import line_fit
from simulator.analysis.fitting import fit_whittle
from simulator.analysis.psd import WindowedExpectation
from simulator.errors import InputError
from simulator.linear.sidebands import cavity_response


@dataclasses.dataclass(frozen=True, kw_only=True)
class Calibration:
    """What the experimenter knows about the device, in Hz (public metadata)."""

    cavity_linewidth_hz: float
    external_linewidth_hz: float
    detuning_hz: float  # effective detuning
    efficiency: float
    coupling_rate_hz: float  # g/2π at the operating point
    mechanical_frequency_hz: float
    mechanical_linewidth_hz: float
    bath_occupation: float

    @classmethod
    def from_scenario(cls, system, mode=0):
        """Nominal calibration from a system (or scenario): its operating point, not the truth.

        With several tones, that of the detected tone (``detection.tone``): its
        cavity mode, detuning and g; the occupation is set by every tone."""
        from simulator.model.system import as_system

        system = as_system(system, several_tones="detected")
        point = system.point
        mp = point.modes[mode]
        return cls(cavity_linewidth_hz=point.cavity_linewidth_hz,
                   external_linewidth_hz=point.external_linewidth_hz,
                   detuning_hz=point.detuning_effective_hz,
                   efficiency=system.chain.efficiency,
                   coupling_rate_hz=mp.coupling_rate_hz,
                   mechanical_frequency_hz=mp.frequency_hz,
                   mechanical_linewidth_hz=mp.linewidth_hz,
                   bath_occupation=mp.bath_occupation)

    def area_per_quantum(self):
        """c per phonon: η (κ_ex/κ)(4g²/κ), as a rate in 1/s (areas in shot-noise·Hz)."""
        k, kex, g = self.cavity_linewidth_hz, self.external_linewidth_hz, self.coupling_rate_hz
        return self.efficiency * (kex / k) * 2 * np.pi * 4 * g**2 / k

    def stokes_rate_hz(self):
        """A+/2π = g² κ / (κ²/4 + (Δ − Ω)²) in Hz."""
        k, g = self.cavity_linewidth_hz, self.coupling_rate_hz
        return g**2 * k / (k**2 / 4 + (self.detuning_hz - self.mechanical_frequency_hz) ** 2)


def cavity_filter(frequency_hz, cavity_linewidth_hz, detuning_hz):
    """F(ν) = (κ/2)²/((κ/2)² + (ν + Δ)²): the cavity's power response at offset ν.

    :func:`simulator.linear.sidebands.cavity_response`, the one definition.
    """
    return cavity_response(frequency_hz, cavity_linewidth_hz, detuning_hz)


def sideband_model(cal, sample_rate_hz=None, fano_band_hz=None, smear=None):
    """Model S(ν; θ) for :func:`fit_whittle`, θ named by PARAMETERS (+ FANO_PARAMETERS).

    With ``sample_rate_hz`` the sideband terms carry the sinc²(ν/fs) of
    integrate-and-dump sampling; the white floor does not (its aliases sum
    to a constant: Σ_k sinc²(x + k) = 1). With ``fano_band_hz`` (the half
    width of the fitted band around each line) each sideband also has a
    dispersive partner d D(x), D(x) = (x/π)/(x² + γ²/4), x the offset from
    the line (the shape classical noise gives a line when the detector sees
    it too, docs/laser-noise.md), and the background on each side is a
    quadratic in x/band, b + b₁ x/band + b₂ (x/band)²: that noise shapes the
    floor on the cavity's scale, and a flat floor would let D's 1/x tails
    mimic its slope. With ``smear`` (a
    :class:`simulator.analysis.psd.WindowedExpectation`) the lines are what
    the periodogram expects of them, convolved with its window's kernel, so
    a line a few bins wide is not read as broader than it is; the model is
    then evaluated on that periodogram's bins only (anything else is an
    InputError). The Lorentzian model (no ``fano_band_hz``) carries its
    analytic derivatives as ``model.jacobian(f, θ) -> (S, ∂S/∂θ)``, for
    ``fit_whittle(..., jacobian=model.jacobian)``: the smearing is linear, so
    each derivative is the smeared derivative of the lines.
    """

    def response(f):
        filt = cavity_filter(f, cal.cavity_linewidth_hz, cal.detuning_hz)
        return filt * np.sinc(f / sample_rate_hz) ** 2 if sample_rate_hz else filt

    def smeared(density, f):
        return density(f) if smear is None else smear.at(density, f)

    def lines(f, theta):
        centre, width, c_s, c_as = theta[1:5]
        out = c_s * _lorentzian(f + centre, width) + c_as * _lorentzian(f - centre, width)
        if fano_band_hz:
            d_s, d_as = theta[5:7]
            disp = lambda x: (x / np.pi) / (x**2 + width**2 / 4)  # noqa: E731
            out = out + d_s * disp(f + centre) + d_as * disp(f - centre)
        return response(f) * out

    def background(f, theta):
        if not fano_band_hz:
            return theta[0]
        floor, centre = theta[:2]
        floor_as, s_s, q_s, s_as, q_as = theta[7:]
        x_s, x_as = (f + centre) / fano_band_hz, (f - centre) / fano_band_hz
        return np.where(f > 0, floor_as + s_as * x_as + q_as * x_as**2,
                        floor + s_s * x_s + q_s * x_s**2)

    def model(f, theta):
        return background(f, theta) + smeared(lambda x: lines(x, theta), f)

    def jacobian(f, theta):
        """(S, ∂S/∂θ) of the Lorentzian model, analytically: four smeared densities."""
        centre, width, c_s, c_as = theta[1:5]

        def columns(x):  # one pass of the smearing for all four
            r = response(x)
            return np.stack([r * _lorentzian(x + centre, width),
                             r * _lorentzian(x - centre, width),
                             r * (c_s * _lorentzian_dx(x + centre, width)
                                  - c_as * _lorentzian_dx(x - centre, width)),
                             r * (c_s * _lorentzian_dwidth(x + centre, width)
                                  + c_as * _lorentzian_dwidth(x - centre, width))], axis=-1)

        col_s, col_as, d_centre, d_width = smeared(columns, f).T
        jac = np.stack([np.ones_like(f), d_centre, d_width, col_s, col_as])
        return theta[0] + c_s * col_s + c_as * col_as, jac

    if not fano_band_hz:
        model.jacobian = jacobian
    return model


def _lorentzian(x, width):
    """L(x) = (γ/2π)/(x² + γ²/4): unit area, full width γ."""
    return (width / (2 * np.pi)) / (x**2 + width**2 / 4)


def _lorentzian_dx(x, width):
    """∂L/∂x = −(γ/π) x/(x² + γ²/4)²."""
    return -(width / np.pi) * x / (x**2 + width**2 / 4) ** 2


def _lorentzian_dwidth(x, width):
    """∂L/∂γ = (1/2π)[1/D − γ²/(2D²)], D = x² + γ²/4."""
    d = x**2 + width**2 / 4
    return (1 / d - width**2 / (2 * d**2)) / (2 * np.pi)


LINE_MARGIN_LINEWIDTHS = 5.0  # fitted lines stay this far inside the band (our choice)

PARAMETERS = ("floor", "frequency_hz", "linewidth_hz", "stokes_area", "anti_stokes_area")
FANO_PARAMETERS = ("stokes_dispersive", "anti_stokes_dispersive", "anti_stokes_floor",
                   "stokes_floor_slope", "stokes_floor_curvature", "anti_stokes_floor_slope",
                   "anti_stokes_floor_curvature")  # "floor" is then the Stokes side's


@dataclasses.dataclass(frozen=True, kw_only=True)
class Thermometry:
    """Occupation estimates with one-sigma uncertainties, and the fit behind them."""

    occupation_asymmetry: float
    occupation_asymmetry_error: float
    occupation_anti_stokes_area: float
    occupation_anti_stokes_area_error: float
    occupation_stokes_area: float
    occupation_stokes_area_error: float
    occupation_damping: float
    occupation_damping_error: float
    fit: object

    def as_dict(self):
        """Estimates as ``{name: (value, error)}`` (the validation harness's format)."""
        out = {}
        for name in ("occupation_asymmetry", "occupation_anti_stokes_area",
                     "occupation_stokes_area", "occupation_damping"):
            out[name] = (getattr(self, name), getattr(self, name + "_error"))
        for n, (v, e) in self.fit.as_dict().items():
            out[n] = (v, e)
        return out


def measure_occupation(psd, cal, *, band_linewidths=40.0, sample_rate_hz=None, fano=False,
                       smear=None):
    """Fit the sidebands of one mode in a two-sided heterodyne PSD; estimate n.

    Parameters
    ----------
    psd : simulator.analysis.psd.PSDEstimate
        Two-sided, in shot-noise units (vacuum floor 1 per Hz), ν > 0 anti-Stokes.
    cal : Calibration
        Nominal device parameters.
    band_linewidths : float
        Half-width of the fitted band around each sideband, in units of the
        expected effective linewidth (at least 20 frequency bins).
    sample_rate_hz : float, optional
        For a periodogram of integrate-and-dump samples: the sideband terms of
        the model then carry sinc²(ν/fs) (the data are not altered).
    fano : bool
        Fit each sideband's dispersive partner too, so that Fano-shaped
        lines (classical noise the detector also sees) do not bias the
        areas. The areas are then the Lorentzian weights, which such noise
        shifts as well: the asymmetry reads the apparent occupation of
        :func:`simulator.linear.sidebands.sideband_summary`, not the true one.
    smear : simulator.analysis.psd.WindowedExpectation, optional
        The expectation operator of the periodogram ``psd`` came from (same
        sample rate, segment and window): the model lines are then convolved
        with the window's kernel, which removes the broadening a resolution
        of a few bins per linewidth gives the fitted width.

    Returns
    -------
    Thermometry
    """
    if psd.sided != "two-sided":
        raise InputError("sideband thermometry needs a two-sided (IQ heterodyne) spectrum; "
                         f"got a {psd.sided} one")
    if smear is not None and not (
            isinstance(smear, WindowedExpectation) and smear.window == psd.window
            and smear.frequency_hz.size == psd.frequency_hz.size
            and np.allclose(smear.frequency_hz, psd.frequency_hz)):
        raise InputError("smear: its bins or window are not those of the periodogram; "
                         "expected the WindowedExpectation of the same sample rate, segment "
                         f"and window ({psd.window!r})")
    omega = cal.mechanical_frequency_hz
    k, g = cal.cavity_linewidth_hz, cal.coupling_rate_hz
    a_minus = g**2 * k / (k**2 / 4 + (cal.detuning_hz + omega) ** 2)
    width0 = cal.mechanical_linewidth_hz + a_minus - cal.stokes_rate_hz()
    half_band = max(band_linewidths * abs(width0), 20 * psd.resolution_hz)
    f = psd.frequency_hz
    near = (np.abs(np.abs(f) - omega) < half_band)
    if near.sum() < 10:
        raise InputError(f"only {near.sum()} frequency bins near ±{omega:.6g} Hz; expected "
                         "a record resolving the sidebands (longer segments)")
    f, p = f[near], psd.density[near]
    per_quantum = cal.area_per_quantum()
    # the centre may move, but never so far that a line leaves the fitted band:
    # out there the likelihood no longer depends on centre and width (flat), so
    # a fit that strays stops anywhere, with an information matrix near singular
    margin = min(LINE_MARGIN_LINEWIDTHS * abs(width0), half_band / 2)
    lower = [0, omega - (half_band - margin), 0, 0, 0]
    upper = [np.inf, omega + (half_band - margin), half_band, np.inf, np.inf]
    planned = line_fit.Plan(tied=None, shape_fixed=False)
    if fano:  # Lorentzian weights may be negative here: noise can push them below 0
        lower[3:5] = [-np.inf, -np.inf]
        fit = _fano_fit(omega, abs(width0), cal, f, p, psd.averages, half_band, sample_rate_hz,
                        lower, upper, smear)
    else:
        model = sideband_model(cal, sample_rate_hz, smear=smear)
        initial = line_fit.initial(model, cal, omega, abs(width0), f, p)
        planned = line_fit.plan(model, line_fit.nominal(cal, initial, per_quantum), f,
                                psd.averages)
        fit = line_fit.fit_planned(model, f, p, psd.averages, initial, lower, upper, planned,
                                   per_quantum, PARAMETERS)
    _, _, width, c_s, c_as = fit.values[:5]
    cov = fit.covariance
    nan = float("nan")
    if planned.shape_fixed:  # centre and width held, not estimated: no error to report
        held = cov.copy()
        held[[1, 2], [1, 2]] = nan
        fit = dataclasses.replace(fit, covariance=held)
    errors = fit.errors.copy()
    # an area pinned at its bound (0) is not an estimate: the record does not
    # resolve that sideband, so everything built on it is reported as missing
    # (the Fano fit has no such bound)
    pinned_s, pinned_as = (False, False) if fano else (c_s <= 0 or planned.tied == 3,
                                                       c_as <= 0 or planned.tied == 4)
    # n = c_AS/(c_S − c_AS) needs a denominator expected well away from zero
    # (line_fit.plan); a fitted difference at or below zero estimates nothing
    if pinned_s or pinned_as or not planned.asymmetry or c_s <= c_as:
        n_asym = err_asym = nan
    else:
        r = c_as / c_s
        n_asym = r / (1 - r)
        # ∂n/∂c_AS = c_S/(c_S − c_AS)², ∂n/∂c_S = −c_AS/(c_S − c_AS)²
        grad = np.zeros(len(fit.values))
        grad[3:5] = np.array([-c_as, c_s]) / (c_s - c_as) ** 2
        err_asym = float(np.sqrt(max(grad @ cov @ grad, 0)))
    if pinned_s:
        errors[3] = nan
    if pinned_as:
        errors[4] = nan
    n_damp = ((cal.mechanical_linewidth_hz * cal.bath_occupation + cal.stokes_rate_hz()) / width
              if width > 0 else nan)  # a fit collapsed to zero width estimates nothing
    return Thermometry(
        occupation_asymmetry=float(n_asym), occupation_asymmetry_error=err_asym,
        occupation_anti_stokes_area=float(c_as / per_quantum),
        occupation_anti_stokes_area_error=float(errors[4] / per_quantum),
        occupation_stokes_area=float(c_s / per_quantum - 1),
        occupation_stokes_area_error=float(errors[3] / per_quantum),
        occupation_damping=float(n_damp),
        occupation_damping_error=float(n_damp * errors[2] / width) if width > 0 else nan,
        fit=fit)


def _fano_fit(centre, width, cal, f, p, averages, half_band, sample_rate_hz, lower, upper,
              smear):
    """Whittle fit of the Fano model from the expected centre and width.

    Twelve parameters from a cold start wander off, and a Lorentzian fit on a
    shaped floor is no better start (it takes the floor for a broad line);
    given the centre and width the model is linear in the other ten, so they
    start from an ordinary least-squares solution, its columns the model
    itself with one of them set to 1.
    """
    model = sideband_model(cal, sample_rate_hz, half_band, smear)
    names = PARAMETERS + FANO_PARAMETERS
    linear = [i for i in range(len(names)) if i not in (1, 2)]  # all but centre, width
    base = np.zeros(len(names))
    base[1:3] = centre, width
    columns = []
    for i in linear:
        theta = base.copy()
        theta[i] = 1.0
        columns.append(model(f, theta))
    base[linear] = np.linalg.lstsq(np.column_stack(columns), p, rcond=None)[0]
    initial = [v if v != 0 else 1e-12 for v in base]
    n_extra = len(FANO_PARAMETERS)
    return fit_whittle(model, f, p, averages, initial, names=names,
                       lower=lower + [-np.inf] * n_extra, upper=upper + [np.inf] * n_extra)
