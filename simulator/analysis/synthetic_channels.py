"""Synthetic averaged spectral matrices of several detected tones, drawn from their law.

A record of ``detection.tones`` holds K complex channels z_k = I_k + iQ_k
from one linear model (:mod:`simulator.model.tone_channels`), jointly
Gaussian and correlated: the same phonons scatter every tone's sidebands.
What a lab's analysis with one demodulator per tone computes from K
segments of N samples is the averaged spectral matrix
(:func:`simulator.analysis.psd.spectral_matrix_estimate`):

    S̄_jl(f) = mean Z_j(f) Z_l(f)*/(fs N),   P̄_jl(f) = mean Z_j(f) Z_l(−f)/(fs N),

each channel's averaged periodogram on the diagonal of S̄, the
cross-spectra off it, and the pseudo-spectra P̄ that correlate one channel
at f with another at −f (the anti-Stokes line of one tone with the Stokes
line of another). Its law per pair of bins (f, −f) is closed: the 2K vector

    v = (Z_1(f) … Z_K(f), Z_1(−f)* … Z_K(−f)*)/√(fs N)

is circular complex Gaussian with covariance

    Σ = [[S(f), P(f)], [P(f)†, S(−f)*]],

and the averaged outer product (1/K) Σ_s v_s v_s† is complex Wishart with
K degrees of freedom and scale Σ/K (Goodman, Ann. Math. Statist. 34, 152
(1963)); its blocks are S̄(f), P̄(f) and S̄(−f)*. The self-paired bins (0
and, for even N, −fs/2) give a real 2K vector (Re Z_1 … Re Z_K, Im Z_1 …
Im Z_K), whose averaged outer product is real Wishart. One channel (K = 1)
is :func:`simulator.analysis.synthetic_spectrum.draw_pairs`.

The expectations S(f), P(f) are exact for the window and segment length,
as for one channel: the output autocovariance R(m), m < N, of the record's
innovations recursion (2K outputs, each channel in its own shot-noise units)
gives E[z_j(n+m) z_l(n)*] = c_j R(m) c_l† and E[z_j(n+m) z_l(n)] = c_j R(m) c_lᵀ
(c_k = (…, 1, i, …) on the pair of tone k), folded with the window's lag
weights (:meth:`simulator.analysis.psd.WindowedExpectation.of_autocovariance`).
Each demodulator's rounding adds its white Δ_k²/12 per real channel,
independent between channels (Widrow and Kollár, Quantization Noise
(Cambridge, 2008), Ch. 4). Bins are drawn independently of their
neighbours, the approximation the one-channel law makes (docs/records.md).
"""

import numpy as np

from simulator.analysis.wishart import complex_wishart, real_wishart


def output_autocovariance(recursion, lags):
    """E[y_{n+m} y_nᵀ] for m = 0 … lags − 1, by doubling (log₂ lags matrix products).

    R(0) = H P Hᵀ + J Jᵀ, R(m) = H F^{m−1} (F P Hᵀ + G Jᵀ); the powers F^{m−1}
    applied to the lag-one term are built 1, 2, 4, … at a time, so N lags
    cost log₂ N batched products instead of N.
    """
    f, g, h, j, p = (recursion.transition, recursion.drive, recursion.output,
                     recursion.feedthrough, recursion.start_covariance)
    lags = int(lags)
    out = np.empty((lags, h.shape[0], h.shape[0]))
    out[0] = h @ p @ h.T + j @ j.T
    x = np.empty((max(lags - 1, 1),) + (f.shape[0], h.shape[0]))
    x[0] = f @ p @ h.T + g @ j.T
    done, power = 1, f.copy()
    while done < lags - 1:
        take = min(done, lags - 1 - done)
        x[done:done + take] = power @ x[:take]
        done += take
        power = power @ power
    out[1:] = h @ x[:lags - 1]
    return out


def channel_vectors(k):
    """c (K, 2K): row k is (…, 1, i, …) on the real pair (I_k, Q_k), so z_k = c_k·y."""
    c = np.zeros((k, 2 * k), dtype=complex)
    c[np.arange(k), 2 * np.arange(k)] = 1.0
    c[np.arange(k), 2 * np.arange(k) + 1] = 1.0j
    return c


def channels_law(plan, segment_samples, window):
    """Exact E of the averaged spectral and pseudo-spectral matrices of ``plan``'s channels.

    Returns ``(expectation, spectra, pseudo)``: the
    :class:`simulator.analysis.psd.WindowedExpectation` used and the (N, K, K)
    complex matrices E S̄_jl(f), E P̄_jl(f) on its sorted bins (module doc).
    """
    from simulator.analysis.psd import WindowedExpectation
    from simulator.records.kernels import stepper

    expectation = WindowedExpectation(plan.sample_rate_hz, segment_samples, window)
    r = output_autocovariance(stepper(plan, modal=False).recursion, expectation.n)
    spectra, pseudo = windowed_channels(expectation, r, np.asarray(
        plan.channel_shot_noise_per_count) ** 2 / 12.0)
    return expectation, spectra, pseudo


def windowed_channels(expectation, r, rounding):
    """E S̄(f), E P̄(f) (N, K, K) from the real outputs' autocovariance ``r`` (N, 2K, 2K),
    each channel's rounding variance Δ_k²/12 per real channel in ``rounding`` (K,)."""
    k = r.shape[1] // 2
    c = channel_vectors(k)
    rz = np.einsum("ja,mab,lb->mjl", c, r, c.conj())  # E[z_j(n+m) z_l(n)*]
    rz[0] += np.diag(2.0 * np.asarray(rounding, dtype=float))
    pz = np.einsum("ja,mab,lb->mjl", c, r, c)  # E[z_j(n+m) z_l(n)]
    spectra = np.empty((expectation.n, k, k), dtype=complex)
    pseudo = np.empty_like(spectra)
    for j in range(k):
        for m in range(k):
            # negative lags: E[z_j(n−m) z_l(n)*] = E[z_l(n+m) z_j(n)*]*, E[z_j(n−m) z_l(n)]
            # = E[z_l(n+m) z_j(n)]
            spectra[:, j, m] = expectation.of_autocovariance(rz[:, j, m], rz[1:, m, j].conj())
            pseudo[:, j, m] = expectation.of_autocovariance(pz[:, j, m], pz[1:, m, j])
    diagonal = np.arange(k)
    spectra[:, diagonal, diagonal] = spectra[:, diagonal, diagonal].real
    return spectra, pseudo


def draw_channels(spectra, pseudo, averages, expectation, rng):
    """Averaged spectral and pseudo-spectral matrices of K channels, bins sorted as the law.

    ``spectra`` and ``pseudo`` are the law's (N, K, K) means (:func:`channels_law`).
    Pairs (f, −f) get one 2K×2K complex Wishart draw, the self-paired bins a real one.
    """
    n, order, k = expectation.n, expectation.order, spectra.shape[1]
    s, p = np.empty_like(spectra), np.empty_like(pseudo)  # in FFT order
    s[order], p[order] = spectra, pseudo
    bins = np.arange(1, (n + 1) // 2)
    sigma = np.block([[s[bins], p[bins]],
                      [p[bins].conj().transpose(0, 2, 1), s[n - bins].conj()]])
    w = complex_wishart(sigma, averages, rng) / averages
    out_s, out_p = np.empty_like(s), np.empty_like(p)
    out_s[bins], out_s[n - bins] = w[:, :k, :k], w[:, k:, k:].conj()
    out_p[bins] = w[:, :k, k:]
    out_p[n - bins] = out_p[bins].transpose(0, 2, 1)
    selfs = np.array([0] + ([n // 2] if n % 2 == 0 else []))
    real = np.empty((selfs.size, 2 * k, 2 * k))  # covariance of (Re Z, Im Z)/√(fs N)
    ss, ps = s[selfs], p[selfs]
    real[:, :k, :k] = (ss + ps).real / 2  # E[Re Z_j Re Z_l]
    real[:, k:, k:] = (ss - ps).real / 2  # E[Im Z_j Im Z_l]
    real[:, :k, k:] = (ps - ss).imag / 2  # E[Re Z_j Im Z_l]
    real[:, k:, :k] = real[:, :k, k:].transpose(0, 2, 1)
    w = real_wishart(real, averages, rng) / averages
    rr, ii, ri = w[:, :k, :k], w[:, k:, k:], w[:, :k, k:]
    ir = ri.transpose(0, 2, 1)
    out_s[selfs] = rr + ii + 1j * (ir - ri)
    out_p[selfs] = rr - ii + 1j * (ri + ir)
    diagonal = np.arange(k)
    out_s[:, diagonal, diagonal] = out_s[:, diagonal, diagonal].real
    return out_s[order], out_p[order]
