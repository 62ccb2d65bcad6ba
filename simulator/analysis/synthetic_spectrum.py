"""Synthetic averaged spectra: a long integration drawn from its exact law at once.

An averaged periodogram of K segments of N samples (Bartlett's method, as
:func:`simulator.analysis.psd.averaged_periodogram` computes it) of a
stationary Gaussian record is a sum of K independent outer products of the
windowed transforms Z_k/√(fs N). Its law per bin is therefore known in
closed form, and drawing it costs O(N) whatever K: an hour at 5 MHz is as
cheap as a millisecond.

- **Complex (iq) record.** For each pair of bins (f, −f) the vector
  v = (Z_f, Z_{−f}*)/√(fs N) is circular complex Gaussian with covariance

      Σ = [[E P_f, E[Z_f Z_{−f}]/(fs N)], [conj, E P_{−f}]],

  whose off-diagonal — the correlation of the Stokes and anti-Stokes
  sidebands that the quantum back-action imprints (a pseudo-spectrum: the
  record I + iQ is not circular) — comes from the pseudo-autocovariance
  E[z_{n+m} z_n]. The averaged 2×2 matrix (P̄_f, P̄_{−f} on the diagonal,
  the averaged Z_f Z_{−f} off it) is complex Wishart with K degrees of
  freedom and scale Σ/K (Goodman, Ann. Math. Statist. 34, 152 (1963)), drawn
  by the complex Bartlett decomposition: diagonal |t_ii|² ~ Gamma(K − i + 1),
  the sub-diagonal standard complex normal (the complex analogue of
  Bartlett, Proc. R. Soc. Edinb. 53, 260 (1934); recalled from memory). The
  bins at 0 and at fs/2 pair with themselves: (Re Z, Im Z) is a real
  Gaussian pair and their average a real 2×2 Wishart matrix.
- **Real (if, homodyne) record.** Each one-sided bin is E[P] times a
  Gamma(K, 1)/K variate: the scaled chi-square law with 2K degrees of freedom
  (Nørrelykke & Flyvbjerg, Rev. Sci. Instrum. 81, 075103 (2010), Sec. II).

The expectations are exact for the window and segment length: the output
autocovariance R(m), m < N, of the record's innovations recursion (the same
matrices that generate time-domain records) is folded with the window's lag
weights (:meth:`simulator.analysis.psd.WindowedExpectation.of_autocovariance`),
so lines narrower than a bin are handled exactly, leakage included. The
digitiser's rounding adds its white variance Δ²/12 per real channel (Widrow
and Kollár, Quantization Noise (Cambridge, 2008), Ch. 4); clipping is not
modelled. For an if record the carrier makes the record cyclostationary; the
law uses its time-averaged autocovariance 2 Re[e^{iθTm} R_u(m)].

- **Several detected tones** (``detection.tones``, K I/Q pairs from one
  model): the 2K vector of every channel at f and −f is drawn at once, as a
  2K×2K complex Wishart matrix whose covariance holds the spectra, the
  cross-spectra and the pseudo-spectra of the joint model
  (:mod:`simulator.analysis.synthetic_channels`); the one-channel law above
  is its K = 1 case, drawn by the same code.

What is approximate (docs/records.md states it): the bins are drawn
independently, while the window correlates neighbouring bins (for the Hann
window the powers of adjacent bins of white noise correlate by 4/9) and a
line narrower than a bin correlates the bins it leaks into; for real
records the small correlation of Z_k with Z_k itself near 0 and fs/2 is
neglected.
"""

import dataclasses

import numpy as np

from simulator.analysis.psd import taper
from simulator.analysis.synthetic_channels import (
    channels_law,
    draw_channels,
    output_autocovariance,
    windowed_channels,
)
from simulator.errors import InputError

SPECTRUM_STREAM = 2  # spawn key of an averaged spectrum's draws (records use 0 and 1)


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class AveragedSpectrum:
    """A synthetic averaged periodogram with its law, ground truth and provenance.

    ``density`` is on the axis and in the units of
    :func:`simulator.analysis.psd.averaged_periodogram` applied to the
    record in shot-noise units: two-sided and sorted for iq, one-sided on
    0 < f < fs/2 for real records. ``cross`` (iq only) is the averaged
    Z_f Z_{−f}/(fs N) on the same axis (equal at f and −f). The ``expected_*``
    arrays are the exact means of the two.

    With several detected tones (``tones``, K of them; always iq) the
    spectrum holds every channel and their correlations
    (:mod:`simulator.analysis.synthetic_channels`): ``spectral_matrix``
    (F, K, K) the averaged Z_j(f) Z_l(f)*/(fs N) (each channel's periodogram
    on the diagonal, the cross-spectra off it), ``pseudo_matrix`` the
    averaged Z_j(f) Z_l(−f)/(fs N), with their exact means
    ``expected_spectral_matrix``, ``expected_pseudo_matrix``; ``density``,
    ``cross`` and their expectations are then (F, K), column k channel k's
    (the diagonals). :meth:`channel` is one tone's spectrum alone,
    :meth:`matrix` the :class:`simulator.analysis.psd.SpectralMatrixEstimate`.
    ``rounding_variance`` is the first tone's, ``channel_rounding_variance``
    each tone's.
    """

    frequency_hz: np.ndarray
    density: np.ndarray
    cross: np.ndarray | None
    expected_density: np.ndarray
    expected_cross: np.ndarray | None
    averages: int
    segment_samples: int
    window: str
    sided: str
    resolution_hz: float
    noise_bandwidth_hz: float
    rounding_variance: float  # Δ²/12 per real channel included, shot-noise units²
    kind: str
    scheme: str
    sample_rate_hz: float
    n_samples: int
    intermediate_frequency_hz: float
    local_oscillator_side: str
    seed: int
    scenario: object
    truth: object
    software_version: str
    created_utc: str = ""
    path: object = None
    tones: tuple = ()
    channel_rounding_variance: tuple = ()
    spectral_matrix: np.ndarray | None = None
    pseudo_matrix: np.ndarray | None = None
    expected_spectral_matrix: np.ndarray | None = None
    expected_pseudo_matrix: np.ndarray | None = None

    def estimate(self):
        """The spectrum as a :class:`simulator.analysis.psd.PSDEstimate` (what the fitters take)."""
        from simulator.analysis.psd import PSDEstimate

        if self.tones:
            raise InputError(f"estimate() of an averaged spectrum of {len(self.tones)} "
                             f"detected tones ({', '.join(self.tones)}); expected "
                             "channel(tone).estimate() for one tone, or matrix() for all")
        return PSDEstimate(frequency_hz=self.frequency_hz, density=self.density,
                           averages=self.averages, sided=self.sided,
                           resolution_hz=self.resolution_hz,
                           noise_bandwidth_hz=self.noise_bandwidth_hz, window=self.window)


    def channel(self, tone):
        """The averaged spectrum of the detected tone ``tone`` alone (a one-tone
        AveragedSpectrum: its density, ±f term, rounding and calibration)."""
        from simulator.model.detected_tone import channel_index

        k = channel_index(self.tones, tone, "averaged spectrum holds one detected tone; "
                                            "use it as it is")
        own = self.truth.channels[k]["calibration"] if self.truth.channels else None
        truth = self.truth if own is None else dataclasses.replace(
            self.truth, calibration=own, channels=())
        return dataclasses.replace(
            self, density=self.density[:, k], cross=self.cross[:, k],
            expected_density=self.expected_density[:, k],
            expected_cross=self.expected_cross[:, k],
            rounding_variance=self.channel_rounding_variance[k], truth=truth, tones=(),
            channel_rounding_variance=(), spectral_matrix=None, pseudo_matrix=None,
            expected_spectral_matrix=None, expected_pseudo_matrix=None)

    def matrix(self):
        """Every channel and their correlations as a
        :class:`simulator.analysis.psd.SpectralMatrixEstimate`, as
        :func:`simulator.analysis.psd.spectral_matrix_estimate` returns for the record."""
        from simulator.analysis.psd import SpectralMatrixEstimate

        if not self.tones:
            raise InputError("matrix() of an averaged spectrum of one detected tone; "
                             "expected estimate() (or detection.tones for several)")
        return SpectralMatrixEstimate(
            frequency_hz=self.frequency_hz, cross=self.spectral_matrix,
            pseudo=self.pseudo_matrix, tones=self.tones, averages=self.averages,
            resolution_hz=self.resolution_hz, noise_bandwidth_hz=self.noise_bandwidth_hz,
            window=self.window)


def bin_law(plan, segment_samples, window):
    """Exact E[P_k] (and E[Z_k Z_{−k}]/(fs N) for iq) of ``plan``'s record, sorted bins.

    Returns ``(expectation, expected_density, expected_pseudo)``: the
    :class:`simulator.analysis.psd.WindowedExpectation` used, the expected
    two-sided periodogram on its sorted bins, and the pseudo term (None for
    a real record).
    """
    from simulator.analysis.psd import WindowedExpectation
    from simulator.records.kernels import stepper

    expectation = WindowedExpectation(plan.sample_rate_hz, segment_samples, window)
    r = output_autocovariance(stepper(plan, modal=False).recursion, expectation.n)
    rounding = plan.shot_noise_per_count ** 2 / 12.0
    receiver = plan.chain.receiver
    if receiver == "iq":  # one channel of the several-tone law
        spectra, pseudo = windowed_channels(expectation, r, [rounding])
        return expectation, spectra[:, 0, 0].real, pseudo[:, 0, 0]
    if receiver == "homodyne":
        rr = r[:, 0, 0].copy()
    else:
        c = np.array([1.0, 1.0j])
        rz = np.einsum("i,mij,j->m", c, r, c.conj())  # E[z_{n+m} z_n*], z = y0 + i y1
        theta = plan.chain.carrier_rad_s / plan.sample_rate_hz  # carrier phase per sample
        rr = 2.0 * (np.exp(1j * theta * np.arange(rz.size)) * rz).real
    rr[0] += rounding
    return expectation, expectation.of_autocovariance(rr, rr[1:]).real, None


def synthetic_averaged_spectrum(system, *, segment_samples, window="hann", seed=None,
                                duration_s=None):
    """Draw the averaged periodogram of a record of ``system`` from its exact law.

    Parameters
    ----------
    system : simulator.model.system.System
        Or a scenario. Its record settings (kind, sample rate, digitiser)
        are those of :func:`simulator.workflows.record.simulate_record`.
    segment_samples : int
        N, samples per segment; K = (duration × fs) // N segments.
    window : str
        A :func:`scipy.signal.get_window` name, as for
        :func:`simulator.analysis.psd.averaged_periodogram`.
    seed, duration_s
        As for records; the draws use their own stream of the seed.

    Returns
    -------
    AveragedSpectrum
        With ``detection.tones``: every tone's channel and the spectral
        matrices between them (:class:`AveragedSpectrum`).

    Raises
    ------
    simulator.errors.InputError
        A segment longer than the record, a bad window or segment length,
        or a scenario with a calibration tone (a deterministic line makes
        the law non-central; generate a record instead).
    """
    import datetime

    from simulator import __version__
    from simulator.model.system import as_system
    from simulator.records.generate import plan_record

    system = as_system(system, several_tones=True)  # plan_record takes its detected view

    plan = plan_record(system, seed=seed, duration_s=duration_s, form="innovations",
                       store_mechanics=False)
    if plan.scenario.drive.calibration_tone.depth_rad != 0:
        raise InputError("drive.calibration_tone.depth_rad = "
                         f"{plan.scenario.drive.calibration_tone.depth_rad!r}: a synthetic "
                         "averaged spectrum has no law for a deterministic tone; expected 0 "
                         "(or generate a time-domain record)")
    if (isinstance(segment_samples, bool) or not isinstance(segment_samples, (int, np.integer))
            or not 2 <= segment_samples <= plan.n_samples):
        raise InputError(f"segment_samples = {segment_samples!r}; expected an integer from 2 "
                         f"to the record's {plan.n_samples} samples")
    rng = np.random.Generator(np.random.PCG64(
        np.random.SeedSequence(plan.seed, spawn_key=(SPECTRUM_STREAM,))))
    if plan.chain.tones:  # several detected tones: the joint law of every channel
        expectation, drawn = _channels_drawn(plan, int(segment_samples), window, rng)
    else:
        expectation, mean, pseudo = bin_law(plan, int(segment_samples), window)
    n = expectation.n
    averages = plan.n_samples // n
    freq = expectation.frequency_hz
    w = taper(window, n)
    enbw = plan.sample_rate_hz * np.mean(w**2) / np.mean(w) ** 2 / n
    if plan.chain.tones:
        frequency, sided = freq, "two-sided"
    elif pseudo is None:
        half = freq > 0  # 0 < f < fs/2: an even N's fs/2 bin sits at −fs/2
        density = 2.0 * mean[half] * rng.standard_gamma(averages, half.sum()) / averages
        frequency, sided = freq[half], "one-sided"
        drawn = dict(density=density, expected_density=2.0 * mean[half], cross=None,
                     expected_cross=None)
    else:
        density, cross = draw_pairs(mean, pseudo, averages, expectation, rng)
        frequency, sided = freq, "two-sided"
        drawn = dict(density=density, expected_density=mean, cross=cross,
                     expected_cross=pseudo)
    header = dict(kind=plan.chain.record_kind, scheme=plan.scenario.detection.scheme,
                  intermediate_frequency_hz=plan.scenario.detection.intermediate_frequency_hz,
                  local_oscillator_side=plan.scenario.detection.local_oscillator_side)
    return AveragedSpectrum(
        frequency_hz=frequency, averages=averages, segment_samples=n, window=window,
        sided=sided, resolution_hz=plan.sample_rate_hz / n, noise_bandwidth_hz=enbw,
        rounding_variance=plan.shot_noise_per_count ** 2 / 12.0,
        sample_rate_hz=plan.sample_rate_hz, n_samples=plan.n_samples, seed=plan.seed,
        scenario=plan.scenario, truth=plan.truth, software_version=__version__,
        created_utc=datetime.datetime.now(datetime.UTC).isoformat(timespec="seconds"),
        **header, **drawn)


def _channels_drawn(plan, segment_samples, window, rng):
    """``(expectation, fields)``: the averaged spectral matrices of a record of several
    detected tones drawn from their law, and the AveragedSpectrum fields they fill."""
    expectation, spectra, pseudo = channels_law(plan, segment_samples, window)
    drawn_s, drawn_p = draw_channels(spectra, pseudo, plan.n_samples // expectation.n,
                                     expectation, rng)
    k = np.arange(spectra.shape[1])
    return expectation, dict(
        density=drawn_s[:, k, k].real, cross=drawn_p[:, k, k],
        expected_density=spectra[:, k, k].real, expected_cross=pseudo[:, k, k],
        spectral_matrix=drawn_s, pseudo_matrix=drawn_p, expected_spectral_matrix=spectra,
        expected_pseudo_matrix=pseudo, tones=tuple(plan.chain.tones),
        channel_rounding_variance=tuple(x ** 2 / 12.0
                                        for x in plan.channel_shot_noise_per_count))


def draw_pairs(mean, pseudo, averages, expectation, rng):
    """Averaged periodogram and Z_f Z_{−f} term of an iq record, bins sorted as ``mean``.

    Pairs (f, −f) get a complex Wishart 2×2 draw; the self-paired bins (0 and,
    for even N, −fs/2) a real one: the one-channel case of
    :func:`simulator.analysis.synthetic_channels.draw_channels`.
    """
    spectra, pseudo = draw_channels(mean[:, None, None].astype(complex), pseudo[:, None, None],
                                    averages, expectation, rng)
    return spectra[:, 0, 0].real, pseudo[:, 0, 0]
