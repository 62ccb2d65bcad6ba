"""The expected spectrogram of a scheduled (non-stationary) record, exactly.

A scheduled record (:mod:`simulator.records.protocol`) is not stationary: the
occupation relaxes, a kicked mode rings down, a segment boundary changes the
dynamics. Its time-resolved spectrum — a window w of L samples sliding along
the record by a hop — has, for the window starting at sample s, the
expectation

    E|Z_s(f)|² = Σ_{n,m} w_n w_m E[z_{s+n} z*_{s+m}] e^{−2πif(n−m)/fs}
                 + |Σ_n w_n μ_{s+n} e^{−2πifn/fs}|²,

z the record (I + iQ, or the homodyne channel), μ its mean (a coherent
ring-down, the calibration tone). The two-time covariance follows from the
exact discrete model x_{k+1} = Φ x_k + w_k, y_k = Γ x_k + v_k of each segment
(:func:`simulator.records.discretize.discretize`): E[y_n y_mᵀ] =
Γ Φ^{n−m−1}(Φ P_m Γᵀ + S) for n > m in one segment, with Φ of the segments
in between across boundaries.

Method (no sum over L² sample pairs). Let V solve V = Φ V Φᵀ + Q (for a stable
segment the stationary covariance; for an unstable one the same algebraic
solution, which is not a covariance). Then P_{b+k} = V + Φ^k D Φ^{kT} with
D = P_b − V at the start b of a stretch of the window inside one segment, and
the covariance splits into a stationary part R_V(n − m) plus a separable part
Γ Φ^n D Φ^{mT} Γᵀ. So a stretch contributes

- the lag sum Σ_d c(d) R_V(d) e^{−iψd} (c the window's lag weights), the
  stationary windowed periodogram, the same for every window inside the
  segment (computed once), plus
- G D G^H with G(f) = Σ_k w_k e^{−iψk} Γ Φ^k, one FFT over the powers Φ^k
  (built by doubling), also computed once per segment; D moves from window to
  window as D ← Φ^h D Φ^{hT}.

A window across a boundary is cut into stretches; the cross terms between a
later stretch and the earlier ones are G_j E[x_{b_j} Z_{<j}^H], where the
state-to-transform cross-covariance is carried exactly from stretch to
stretch (Φ^ℓ of each stretch plus the new stretch's own term). Everything is
exact for any line width and window length; the cost is a few FFTs of L
points per segment and O(n²) per window and frequency.

The digitiser's rounding adds its white variance Δ²/12 per real channel
(Widrow and Kollár, Quantization Noise (Cambridge, 2008), Ch. 4); clipping is
not modelled. The normalisation is that of
:func:`simulator.analysis.psd.averaged_periodogram` (window at unit mean
square, density per Hz, two-sided for iq records, one-sided for a homodyne
record); :func:`expected_sideband_power` gives the block-mean demodulated
power of :func:`simulator.analysis.ringdown.demodulated_power` instead.

References
----------
Percival & Walden, Spectral Analysis for Physical Applications (Cambridge,
1993), Sec. 6.3 (expectation of a windowed periodogram). Gardiner, Stochastic
Methods, 4th ed. (Springer, 2009), Sec. 4.5.6 (moments of the
Ornstein–Uhlenbeck process).
"""

import dataclasses

import numpy as np
import scipy.linalg

from simulator.errors import InputError


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class ExpectedSpectrogram:
    """The exact expected spectrogram of a scheduled record.

    ``density`` has one row per window (starting at ``starts`` samples, centre
    ``times_s``) and one column per frequency of ``frequency_hz``; ``coherent``
    is the part of it from the record's mean (a ring-down's coherent
    amplitude, the calibration tone), included in ``density``. Units and
    sidedness as :func:`simulator.analysis.psd.averaged_periodogram`.
    """

    times_s: np.ndarray
    starts: np.ndarray
    frequency_hz: np.ndarray
    density: np.ndarray
    coherent: np.ndarray
    window: str
    window_samples: int
    hop_samples: int
    sided: str


def expected_spectrogram(plan, *, window_samples, hop_samples=None, window="hann",
                         rounding=True):
    """The expected windowed periodogram of every window of a scheduled record.

    Parameters
    ----------
    plan : simulator.records.protocol.ProtocolPlan or Scenario
        A protocol plan (:func:`simulator.records.protocol.plan_protocol`), or
        a scenario with a ``[schedule]``, planned here.
    window_samples : int
        L, the samples of each window (the FFT length: bins at k·fs/L).
    hop_samples : int, optional
        Samples between window starts (default L: windows side by side).
    window : str
        A :func:`scipy.signal.get_window` name, normalised to unit mean square.
    rounding : bool
        Include the digitiser's rounding noise Δ²/12.

    Returns
    -------
    ExpectedSpectrogram
    """
    from simulator.analysis.psd import taper

    plan = _as_plan(plan)
    size = _samples("window_samples", window_samples, 2, plan.n_samples)
    hop = size if hop_samples is None else _samples("hop_samples", hop_samples, 1,
                                                    plan.n_samples)
    w = taper(window, size)
    w = w / np.sqrt(np.mean(w**2))
    fs = plan.sample_rate_hz
    starts, total, coherent = _windows(plan, w, None, hop, rounding)
    scale = 1.0 / (fs * size)
    freq = np.fft.fftfreq(size, d=1.0 / fs)
    if plan.chain.receiver == "homodyne":  # one-sided, as averaged_periodogram of a real record
        keep, factor, sided = np.arange(1, (size + 1) // 2), 2.0 * scale, "one-sided"
    else:
        keep, factor, sided = np.argsort(freq), scale, "two-sided"
    total, coherent, freq_out = total[:, keep] * factor, coherent[:, keep] * factor, freq[keep]
    return ExpectedSpectrogram(times_s=(starts + 0.5 * size) / fs, starts=starts,
                               frequency_hz=freq_out, density=total, coherent=coherent,
                               window=window, window_samples=size, hop_samples=hop,
                               sided=sided)


def expected_sideband_power(plan, frequency_hz, block_samples, *, rounding=True):
    """Block centres (s) and E|block mean of z e^{−2πi f t}|², exactly.

    The expectation of :func:`simulator.analysis.ringdown.demodulated_power`
    of a scheduled record: blocks of ``block_samples`` side by side from the
    first sample, a rectangular window of weight 1/L at the one frequency
    ``frequency_hz`` (the anti-Stokes line of an iq record sits at +f_m).
    Returns ``(times_s, power, coherent)``, ``coherent`` being the mean's part.
    """
    plan = _as_plan(plan)
    size = _samples("block_samples", block_samples, 1, plan.n_samples)
    if not (isinstance(frequency_hz, (int, float, np.floating)) and np.isfinite(frequency_hz)):
        raise InputError(f"frequency_hz = {frequency_hz!r}; expected a finite frequency in Hz")
    nu = np.array([float(frequency_hz) / plan.sample_rate_hz])
    starts, total, coherent = _windows(plan, np.full(size, 1.0 / size), nu, size, rounding)
    return (starts + 0.5 * size) / plan.sample_rate_hz, total[:, 0], coherent[:, 0]


def _as_plan(plan):
    from simulator.records.protocol import ProtocolPlan, plan_protocol

    if not isinstance(plan, ProtocolPlan):
        plan = plan_protocol(plan)
    if plan.chain.receiver == "if":
        raise InputError("the expected spectrogram of an if record (a real record on a "
                         "carrier) is not computed; expected an iq or homodyne record "
                         "(record.kind)")
    if plan.chain.tones:
        raise InputError(f"the expected spectrogram holds one channel; this record holds "
                         f"{len(plan.chain.tones)} detected tones "
                         f"(detection.tones = {list(plan.chain.tones)!r}); expected "
                         "detection.tone = one of them")
    return plan


def _samples(name, value, low, high):
    if (isinstance(value, bool) or not isinstance(value, (int, np.integer))
            or not low <= value <= high):
        raise InputError(f"{name} = {value!r}; expected an integer from {low} to {high} (the "
                         "record's length in samples)")
    return int(value)


def _combination(chain):
    """c with z = c·y: I + iQ for iq records, the first channel for homodyne."""
    c = np.zeros(len(chain.model.outputs), dtype=complex)
    c[0] = 1.0
    if chain.receiver == "iq":
        c[1] = 1.0j
    return c


def powers(phi, count):
    """Φ^k for k = 0 … count − 1, shape (count, n, n), by doubling (log₂ count products)."""
    out = np.empty((count,) + phi.shape)
    out[0] = np.eye(len(phi))
    done, step = 1, phi.copy()
    while done < count:
        take = min(done, count - done)
        out[done:done + take] = step @ out[:take]
        done += take
        step = step @ step
    return out


def dft(weights, stack, nu, nfft):
    """Σ_k weights_k e^{−2πiνk} stack_k for ν in ``nu`` (cycles per sample), or FFT bins.

    ``nu`` None: the ``nfft`` bins of numpy's FFT (fft order), len(weights) ≤ nfft.
    """
    x = weights.reshape((-1,) + (1,) * (stack.ndim - 1)) * stack
    if nu is None:
        return np.fft.fft(x, n=nfft, axis=0)
    e = np.exp(-2j * np.pi * np.outer(nu, np.arange(len(weights))))
    return np.tensordot(e, x, axes=(1, 0))


class _Segment:
    """One segment's discrete terms in the combined output z = c·y."""

    def __init__(self, seg, c, rounding_var, fs):
        from simulator.model.tone import tone_signal

        d = seg.discrete
        self.phi, self.first, self.end = d.transition, seg.first, seg.first + seg.n_samples
        self.kick_index, self.kick = seg.kick_index, seg.kick
        self.gz = c @ d.output  # Γ_z, complex row
        self.v = stationary_solution(d.transition, d.process_noise, d.state_covariance,
                                     stable=seg.system.stable)
        self.lagone = d.transition @ self.v @ self.gz.conj() + d.cross_covariance @ c.conj()
        self.r0 = float(np.real(self.gz @ self.v @ self.gz.conj()
                                + c @ d.output_noise @ c.conj())
                        + rounding_var * np.sum(np.abs(c) ** 2))
        self.tone = tone_signal(seg.chain, seg.system.scenario, fs)
        self.cache = {}


def stationary_solution(phi, q, covariance, *, stable):
    """V with V = Φ V Φᵀ + Q: the stationary covariance, or for an unstable Φ its algebraic twin."""
    if stable:
        return np.asarray(covariance, dtype=float)
    v = scipy.linalg.solve_discrete_lyapunov(phi, q)
    return 0.5 * (v + v.T)


def _stretch(seg, u, offset, nu, nfft, cross):
    """G, the stationary lag sum and (with ``cross``) H·lag-one of a stretch of the window."""
    key = (offset, len(u), cross)
    if key in seg.cache:
        return seg.cache[key]
    size = len(u)
    pw = powers(seg.phi, size)
    gk = pw.transpose(0, 2, 1) @ seg.gz  # Γ_z Φ^k as rows, shape (size, n)
    g = dft(u, gk, nu, nfft)
    r = np.empty(size, dtype=complex)  # R_V(d), d ≥ 1 (d = 0 added apart)
    r[0] = 0.0
    r[1:] = gk[:-1] @ seg.lagone
    lag = np.fft.irfft(np.abs(np.fft.rfft(u, 2 * size)) ** 2, 2 * size)[:size]  # c(d)
    stat = lag[0] * seg.r0 + 2.0 * dft(lag, r, nu, nfft).real
    h = None
    if cross:  # Σ_k u_k e^{iψk} Φ^{ℓ−1−k} (ΦVΓ_z^H + S c^H)
        hk = pw @ seg.lagone
        nu_all = np.fft.fftfreq(nfft) if nu is None else nu
        h = dft(u[::-1], hk, nu, nfft) * np.exp(2j * np.pi * nu_all * (size - 1))[:, None]
        out = (g, stat, h, pw[-1] @ seg.phi)
    else:
        out = (g, stat, None, None)
    if offset == 0 and not cross:
        seg.cache[key] = out
    return out


def _windows(plan, w, nu, hop, rounding):
    """Starts, E|Z|² and |E Z|² of every window (rows) at every frequency (columns)."""
    fs, size, total_n = plan.sample_rate_hz, len(w), plan.n_samples
    c = _combination(plan.chain)
    rounding_var = plan.shot_noise_per_count ** 2 / 12.0 if rounding else 0.0
    segs = [_Segment(s, c, rounding_var, fs) for s in plan.segments]
    nu_all = np.fft.fftfreq(size) if nu is None else nu
    starts = np.arange(0, total_n - size + 1, hop)
    total = np.empty((len(starts), len(nu_all)))
    coherent = np.empty_like(total)
    cursor = _Cursor(segs, plan.start_mean, plan.start_covariance)
    for i, s in enumerate(starts):
        cursor.advance(s)
        probe = cursor.copy()
        cov = np.zeros(len(nu_all))
        mean = np.zeros(len(nu_all), dtype=complex)
        cross = None  # E[x_b Z_{<j}^H], shape (F, n)
        pos, end = s, s + size
        while pos < end:
            seg = probe.segment
            stop = min(end, seg.end)
            more = stop < end
            u = w[pos - s:stop - s]
            g, stat, h, phi_l = _stretch(seg, u, pos - s, nu, size, more)
            phase = np.exp(-2j * np.pi * nu_all * (pos - s))
            d = probe.cov - seg.v
            gd = g @ d
            cov += stat + np.einsum("fi,fi->f", gd, g.conj()).real
            if cross is not None:
                cov += 2.0 * (phase * np.einsum("fi,fi->f", g, cross)).real
            mean += phase * (g @ probe.mean)
            if seg.tone is not None:
                tone = seg.tone(pos, stop - pos)
                tone = tone @ c[:tone.shape[1]] if tone.ndim == 2 else tone
                mean += phase * dft(u, tone, nu, size)
            if more:
                new = phase.conj()[:, None] * (h + gd.conj() @ phi_l.T)
                cross = new if cross is None else cross @ phi_l.T + new
            probe.advance(stop)
            pos = stop
        total[i] = cov + np.abs(mean) ** 2
        coherent[i] = np.abs(mean) ** 2
    return starts, total, coherent


class _Cursor:
    """Exact mean and covariance of the state at a sample, moved forward in time."""

    def __init__(self, segs, mean, cov, *, index=0, position=None):
        self.segs, self.index = segs, index
        self.mean, self.cov = np.array(mean, dtype=float), np.array(cov, dtype=float)
        if position is None:  # the first segment's kick at sample 0
            self.mean[segs[0].kick_index] += segs[0].kick
            position = 0
        self.position = position

    @property
    def segment(self):
        return self.segs[self.index]

    def copy(self):
        return _Cursor(self.segs, self.mean, self.cov, index=self.index,
                       position=self.position)

    def advance(self, target):
        """Move to sample ``target`` (≥ the current one) through segment boundaries."""
        while self.position < target:
            seg = self.segment
            stop = min(target, seg.end)
            e = np.linalg.matrix_power(seg.phi, stop - self.position)
            self.mean = e @ self.mean
            cov = e @ (self.cov - seg.v) @ e.T + seg.v
            self.cov = 0.5 * (cov + cov.T)
            self.position = stop
            if stop == seg.end and self.index + 1 < len(self.segs):
                self.index += 1  # the next segment's kick at its first sample
                self.mean[self.segment.kick_index] += self.segment.kick
