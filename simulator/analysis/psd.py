"""Spectral estimation of records with stated normalisation and known bin statistics.

:func:`averaged_periodogram` is Bartlett's method: the record is cut into K
non-overlapping segments, each tapered by a window normalised to unit power,
and the periodograms are averaged. The estimate is a two-sided density for a
complex (IQ) record and a one-sided density for a real one, in the record's
units squared per Hz, so that its integral is the variance. For a stationary
Gaussian record each averaged bin is, to the accuracy of the Whittle
approximation, the true spectrum (convolved with the window kernel) times a
Gamma variate of shape K and mean 1 — the statistics the likelihood fits in
:mod:`simulator.analysis.fitting` use. Overlapping segments would correlate
the averages and break that; they are not offered.

References
----------
Bartlett, Nature 161, 686 (1948); Welch, IEEE Trans. Audio Electroacoust. 15,
70 (1967); Nørrelykke & Flyvbjerg, Rev. Sci. Instrum. 81, 075103 (2010),
Secs. II–III (statistics of averaged periodogram bins).
"""

import dataclasses

import numpy as np
import scipy.signal

from simulator.errors import InputError


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class PSDEstimate:
    """An averaged periodogram with the facts needed to use it.

    ``density`` has units (record unit)²/Hz; ``averages`` is the Gamma shape
    of every bin (one-sided real records: except the zero and Nyquist bins,
    which are dropped).
    """

    frequency_hz: np.ndarray
    density: np.ndarray
    averages: int
    sided: str  # "two-sided" (complex record) or "one-sided" (real record)
    resolution_hz: float  # bin spacing 1/T_segment
    noise_bandwidth_hz: float  # equivalent noise bandwidth of the window
    window: str

    def relative_error(self):
        """Standard deviation of each bin relative to its mean, 1/√K."""
        return 1.0 / np.sqrt(self.averages)


def taper(window, n):
    """The periodic window ``window`` of ``n`` samples (:func:`scipy.signal.get_window`),
    or :class:`~simulator.errors.InputError` naming it if scipy does not know it."""
    try:
        return scipy.signal.get_window(window, n, fftbins=True)
    except (ValueError, TypeError) as exc:
        raise InputError(f"window = {window!r}: {exc}; expected a scipy.signal.get_window "
                         "name that needs no parameter (hann, hamming, blackman, "
                         "boxcar, ...)") from None


def averaged_periodogram(samples, sample_rate_hz, *, segment_samples, window="hann"):
    """Bartlett-averaged periodogram of a real or complex record.

    Parameters
    ----------
    samples : array_like
        Real (N,) or complex (N,) record. An IQ record stored as (N, 2) is
        taken as I + iQ.
    sample_rate_hz : float
    segment_samples : int
        Samples per segment; K = N // segment_samples segments are averaged.
    window : str
        Any :func:`scipy.signal.get_window` name; ``"boxcar"`` for none.

    Returns
    -------
    PSDEstimate
        Two-sided and sorted in frequency for complex input (negative to
        positive), one-sided for real input.
    """
    x = np.asarray(samples)
    if x.ndim == 2 and x.shape[1] == 2:
        x = x[:, 0] + 1j * x[:, 1]
    if x.ndim != 1:
        raise InputError(f"samples have shape {x.shape}; expected (N,) or (N, 2) for I and Q")
    seg = int(segment_samples)
    if seg < 2 or seg > x.size:
        raise InputError(f"segment_samples = {segment_samples}; expected 2 ≤ segment ≤ "
                         f"the record length {x.size}")
    if not sample_rate_hz > 0:
        raise InputError(f"sample_rate_hz = {sample_rate_hz}; expected a positive rate")
    k = x.size // seg
    w = taper(window, seg)
    w = w / np.sqrt(np.mean(w**2))  # unit power: the density integrates to the variance
    blocks = x[:k * seg].reshape(k, seg) * w
    spectra = np.abs(np.fft.fft(blocks, axis=1)) ** 2
    density = spectra.mean(axis=0) / (sample_rate_hz * seg)
    freq = np.fft.fftfreq(seg, d=1.0 / sample_rate_hz)
    enbw = sample_rate_hz * np.mean(w**2) / np.mean(w) ** 2 / seg
    if np.iscomplexobj(x):
        order = np.argsort(freq)
        return PSDEstimate(frequency_hz=freq[order], density=density[order], averages=k,
                           sided="two-sided", resolution_hz=sample_rate_hz / seg,
                           noise_bandwidth_hz=enbw, window=window)
    half = np.arange(1, (seg + 1) // 2)  # drop 0 and Nyquist: their statistics differ
    return PSDEstimate(frequency_hz=freq[half], density=2 * density[half], averages=k,
                       sided="one-sided", resolution_hz=sample_rate_hz / seg,
                       noise_bandwidth_hz=enbw, window=window)


class WindowedExpectation:
    """E[periodogram] of a two-sided density, exactly for the window and segment used.

    For a stationary sequence with autocovariance R(m) = E[x_{n+m} x_n*] the
    windowed periodogram of :func:`averaged_periodogram` has expectation

        E[P_k] = (1/(fs N)) Σ_{|m|<N} c(m) R(m) e^{−2πikm/N}
               = ∫ S(f) K(f − f_k) df,   K(u) = |Σ_n w_n e^{2πiun/fs}|²/(fs N),

    c(m) = Σ_n w_{n+m} w_n (w at unit mean square): the density convolved
    with the window's kernel (the Fejér kernel for a boxcar). A line a few
    bins wide comes out broadened, which a fit with the bare density
    misreads (fitting the expected periodogram instead is the idea of the
    debiased Whittle likelihood, Sykulski et al., Biometrika 106, 251 (2019),
    cited from memory; Percival & Walden, Spectral Analysis for Physical
    Applications (Cambridge, 1993), Sec. 6.3 for the expectation).

    The integral is a sum over a grid ``oversample`` times finer than the
    bins. That is exact for a density whose autocovariance has died out
    (oversample − 1)·N lags away, i.e. for lines wider than about a bin at
    the default 2 (narrower lines need more).

    Parameters
    ----------
    sample_rate_hz : float
    segment_samples : int
        N, the segment length of the periodogram.
    window : str
        The :func:`scipy.signal.get_window` name the periodogram used.
    oversample : int
        At least 2.

    Notes
    -----
    Calling the object with a vectorised density ``S(f)`` (two-sided, per
    Hz, over −fs/2 ≤ f < fs/2) returns E[P] on every bin of
    :attr:`frequency_hz` (sorted, as :func:`averaged_periodogram` returns
    them), at a cost growing with N; :meth:`at` returns it on chosen bins
    only, summing the density over those bins and a margin around them, at a
    cost independent of N (what a fit of a few lines needs).
    """

    def __init__(self, sample_rate_hz, segment_samples, window, oversample=2):
        if not (np.isfinite(sample_rate_hz) and sample_rate_hz > 0):
            raise InputError(f"sample_rate_hz = {sample_rate_hz!r}; expected a positive rate")
        if isinstance(segment_samples, bool) or int(segment_samples) != segment_samples \
                or segment_samples < 2:
            raise InputError(f"segment_samples = {segment_samples!r}; expected an integer ≥ 2")
        if isinstance(oversample, bool) or int(oversample) != oversample or oversample < 2:
            raise InputError(f"oversample = {oversample!r}; expected an integer ≥ 2")
        n = int(segment_samples)
        w = taper(window, n)
        w = w / np.sqrt(np.mean(w**2))
        self.window, self.fs, self.n = window, float(sample_rate_hz), n
        self.m = n * int(oversample)
        self.oversample = int(oversample)
        self.c = np.fft.ifft(np.abs(np.fft.fft(w, 2 * n)) ** 2).real[:n]  # c(m), m ≥ 0
        # K at offsets q·fs/M, q = 0 … M − 1 (periodic), from the zero-padded window
        self.kernel = np.abs(np.fft.fft(w, self.m)) ** 2 / (self.fs * n)
        self.fine_hz = np.fft.fftfreq(self.m, d=1.0 / self.fs)  # fft order
        self.frequency_hz = np.sort(np.fft.fftfreq(n, d=1.0 / self.fs))
        self.order = np.argsort(np.fft.fftfreq(n, d=1.0 / self.fs))
        self._local = {}

    def __call__(self, density):
        """E[P] on :attr:`frequency_hz` of the density function ``density(f)``."""
        # R(m) = ∫ S(f) e^{2πifm/fs} df ≈ (fs/M) Σ_j S(f_j) e^{2πijm/M} = fs · ifft(S)
        r = self.fs * np.fft.ifft(density(self.fine_hz))  # R(m), m mod M
        m = np.arange(1, self.n)
        return self.of_autocovariance(r[:self.n], r[self.m - m]).real

    def of_autocovariance(self, positive, negative):
        """(1/(fs N)) Σ_{|m|<N} c(m) R(m) e^{−2πikm/N} on :attr:`frequency_hz`, from R itself.

        ``positive`` holds R(0) … R(N − 1), ``negative`` R(−1) … R(−(N − 1)):
        exact for any line width (no grid). With R(m) = E[x_{n+m} x_n*] this
        is E[P_k]; with the pseudo-autocovariance E[x_{n+m} x_n] of a complex
        record it is E[X_k X_{−k}]/(fs N), the ±f correlation of the windowed
        transforms. Complex; take the real part of an expected periodogram.
        """
        m = np.arange(1, self.n)
        folded = np.zeros(self.n, dtype=complex)
        folded[0] = self.c[0] * positive[0]
        folded[m] += self.c[m] * positive[m]  # positive lags
        folded[self.n - m] += self.c[m] * negative[m - 1]  # negative lags, at −m mod N
        return (np.fft.fft(folded) / (self.fs * self.n))[self.order]

    def at(self, density, frequency_hz, margin_bins=64):
        """E[P] at the bins ``frequency_hz`` (a subset of :attr:`frequency_hz`).

        ``density`` may return several densities as the columns of an
        array of shape (fine frequencies, m); E[P] then has shape (bins, m).
        Sums S(f) K(f − f_k) over each run of adjacent bins widened by
        ``margin_bins`` on both sides: the density farther away reaches those
        bins only through the kernel's far tails (below 1/(π² margin²) of
        the density there for a boxcar).
        """
        f = np.asarray(frequency_hz, dtype=float)
        key = (f.tobytes(), int(margin_bins))
        if key not in self._local:
            self._local[key] = self._runs(f, int(margin_bins))
        out = None
        step = self.fs / self.m
        for where, fine, weights in self._local[key]:
            # a density of shape (fine, m) gives m columns in one pass over the weights
            value = weights @ density(fine) * step
            if out is None:
                out = np.empty((f.size,) + value.shape[1:])
            out[where] = value
        return out

    def _runs(self, f, margin):
        res = self.fs / self.n
        k = np.rint(f / res).astype(np.int64)
        if not np.allclose(k * res, f, rtol=0, atol=1e-6 * res) or np.any(
                np.abs(f) > self.fs / 2 + 1e-9 * self.fs):
            raise InputError("frequencies are not bins of this periodogram; expected a subset "
                             "of WindowedExpectation.frequency_hz")
        order = np.argsort(k)
        breaks = np.flatnonzero(np.diff(k[order]) > 1) + 1
        runs = []
        for chunk in np.split(order, breaks):
            lo, hi = k[chunk].min() - margin, k[chunk].max() + margin
            j = np.arange(lo * self.oversample, hi * self.oversample + 1)  # fine offsets
            fine = (j * self.fs / self.m + self.fs / 2) % self.fs - self.fs / 2  # periodic
            q = (k[chunk][:, None] * self.oversample - j[None, :]) % self.m
            runs.append((chunk, fine, self.kernel[q]))
        return runs


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class SpectralMatrixEstimate:
    """Averaged cross-periodograms of K complex channels (a record of several tones).

    ``cross[f, j, k]`` = mean over segments of Z_j(f) Z_k(f)*/(fs N) — each
    channel's :func:`averaged_periodogram` on the diagonal (real), the
    cross-spectral densities off it; ``pseudo[f, j, k]`` = mean of
    Z_j(f) Z_k(−f)/(fs N), the correlation of channel j at f with channel k
    at −f. Both two-sided, sorted in frequency, (record unit)²/Hz. For
    jointly Gaussian channels each off-diagonal bin scatters about its mean
    with variance S_jj S_kk/K (real and imaginary parts sharing it; Bendat and
    Piersol, Random Data, 4th ed. (Wiley, 2010), Sec. 9.2.2, cited from memory).
    """

    frequency_hz: np.ndarray
    cross: np.ndarray
    pseudo: np.ndarray
    tones: tuple
    averages: int
    resolution_hz: float
    noise_bandwidth_hz: float
    window: str

    def channel(self, k):
        """The :class:`PSDEstimate` of channel ``k`` (index or tone name)."""
        k = self.tones.index(k) if isinstance(k, str) else int(k)
        return PSDEstimate(frequency_hz=self.frequency_hz, density=self.cross[:, k, k].real,
                           averages=self.averages, sided="two-sided",
                           resolution_hz=self.resolution_hz,
                           noise_bandwidth_hz=self.noise_bandwidth_hz, window=self.window)


def spectral_matrix_estimate(samples, sample_rate_hz, *, segment_samples, window="hann",
                             tones=()):
    """Bartlett-averaged spectral matrix of complex channels (:class:`SpectralMatrixEstimate`).

    Parameters
    ----------
    samples : array_like, complex (N, K)
        One column per channel, e.g. ``Record.shot_noise_units()`` of a
        record of several detected tones.
    sample_rate_hz : float
    segment_samples : int
        As in :func:`averaged_periodogram`, whose window normalisation this shares.
    window : str
    tones : tuple of str, optional
        Names of the columns.
    """
    z = np.asarray(samples)
    if z.ndim != 2 or not np.iscomplexobj(z):
        raise InputError(f"samples have shape {z.shape} and type {z.dtype}; expected complex "
                         "(N, K), one column I + iQ per channel")
    seg = int(segment_samples)
    if seg < 2 or seg > len(z):
        raise InputError(f"segment_samples = {segment_samples}; expected 2 ≤ segment ≤ "
                         f"the record length {len(z)}")
    if not sample_rate_hz > 0:
        raise InputError(f"sample_rate_hz = {sample_rate_hz}; expected a positive rate")
    k = len(z) // seg
    w = taper(window, seg)
    w = w / np.sqrt(np.mean(w**2))
    big = np.fft.fft(z[:k * seg].reshape(k, seg, -1) * w[None, :, None], axis=1)
    minus = np.roll(big[:, ::-1], 1, axis=1)  # Z(−f): bin −m mod N
    norm = sample_rate_hz * seg * k
    cross = np.einsum("sfj,sfk->fjk", big, big.conj()) / norm
    pseudo = np.einsum("sfj,sfk->fjk", big, minus) / norm
    freq = np.fft.fftfreq(seg, d=1.0 / sample_rate_hz)
    order = np.argsort(freq)
    enbw = sample_rate_hz * np.mean(w**2) / np.mean(w) ** 2 / seg
    return SpectralMatrixEstimate(frequency_hz=freq[order], cross=cross[order],
                                  pseudo=pseudo[order], tones=tuple(tones), averages=k,
                                  resolution_hz=sample_rate_hz / seg, noise_bandwidth_hz=enbw,
                                  window=window)
