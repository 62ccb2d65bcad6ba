"""numba kernels: the sample-by-sample recursions of the exact discrete model.

Each kernel is a short loop over samples that writes into arrays the caller
has allocated. The random normals are drawn outside, in blocks, each by its
own numpy Generator (reproducible by block; :func:`simulator.records.pipeline.draw_block`),
and passed in; there is no parallel loop, so the result never depends on
threading. Two-channel modal recursions run in :mod:`simulator.records.fused`,
the same bits faster. Only :mod:`simulator.records.generate` calls these; it checks shapes and
dtypes first. :func:`stepper` binds a record plan's matrices to the kernel of
its form (full state, innovations, or innovations in modal coordinates)
and states, as a :class:`Recursion`, exactly which matrices that kernel runs.

numba is imported here, lazily from the point of view of the command line:
this module is loaded only when a record is generated.
"""

import numba
import numpy as np

from simulator.records import fused
from simulator.records.pipeline import NormalBlocks, draw_block  # noqa: F401 (the streams)
from simulator.records.recursion import Recursion  # noqa: F401 (part of this module's API)

BLOCK_SAMPLES = 1 << 16  # samples per block of random normals, each block seeded alone
START_STREAM, SAMPLE_STREAM = 0, 1  # spawn keys: the stationary start, the samples
NO_OUTPUTS = np.empty((0, 2))  # the float outputs of a kernel that digitises them itself


@numba.njit(cache=True, nogil=True)
def full_state_step(transition, output, noise_factor, state, normals, out, watched, watched_out):
    """Advance x_{n+1} = Φ x_n + w_n, y_n = Γ x_n + v_n over ``len(normals)`` samples.

    Parameters
    ----------
    transition : (n, n) float64
        Φ.
    output : (p, n) float64
        Γ.
    noise_factor : (n + p, r) float64
        L with L Lᵀ the joint covariance of (w_n, v_n).
    state : (n,) float64
        x at the first sample; overwritten with x after the last one.
    normals : (count, r) float64
        Independent standard normals, one row per sample.
    out : (count, p) float64
        Receives y_n.
    watched : (k,) int64
        Indices of states to record (the mechanical quadratures); may be empty.
    watched_out : (count, k) float64
        Receives x_n[watched] (the state at the start of each interval).
    """
    n = transition.shape[0]
    p = output.shape[0]
    r = noise_factor.shape[1]
    noise = np.empty(n + p)
    new = np.empty(n)
    for k in range(normals.shape[0]):
        for i in range(n + p):
            acc = 0.0
            for j in range(r):
                acc += noise_factor[i, j] * normals[k, j]
            noise[i] = acc
        for i in range(p):
            acc = noise[n + i]
            for j in range(n):
                acc += output[i, j] * state[j]
            out[k, i] = acc
        for i in range(watched.shape[0]):
            watched_out[k, i] = state[watched[i]]
        for i in range(n):
            acc = noise[i]
            for j in range(n):
                acc += transition[i, j] * state[j]
            new[i] = acc
        for i in range(n):
            state[i] = new[i]


@numba.njit(cache=True, nogil=True)
def innovations_step(transition, output, gain, innovation_factor, state, normals, out):
    """Advance the innovations form over ``len(normals)`` samples.

    e_n = L_Σ ξ_n, y_n = Γ x̂_n + e_n, x̂_{n+1} = Φ x̂_n + K e_n, with ``gain``
    holding K L_Σ and ``innovation_factor`` L_Σ (L_Σ L_Σᵀ = Σ), so that each
    sample costs p normals ξ_n.

    Parameters
    ----------
    transition : (n, n) float64
    output : (p, n) float64
    gain : (n, p) float64
        K L_Σ.
    innovation_factor : (p, p) float64
        L_Σ.
    state : (n,) float64
        x̂ at the first sample; overwritten with x̂ after the last one.
    normals : (count, p) float64
    out : (count, p) float64
    """
    n = transition.shape[0]
    p = output.shape[0]
    new = np.empty(n)
    for k in range(normals.shape[0]):
        for i in range(p):
            acc = 0.0
            for j in range(p):
                acc += innovation_factor[i, j] * normals[k, j]
            for j in range(n):
                acc += output[i, j] * state[j]
            out[k, i] = acc
        for i in range(n):
            acc = 0.0
            for j in range(n):
                acc += transition[i, j] * state[j]
            for j in range(p):
                acc += gain[i, j] * normals[k, j]
            new[i] = acc
        for i in range(n):
            state[i] = new[i]


@numba.njit(cache=True, nogil=True, fastmath=True)
def modal_innovations_step(lam_re, lam_im, out_re, out_im, drive_re, drive_im,
                           innovation_factor, state_re, state_im, normals, out):
    """The innovations form in eigen-coordinates (:class:`simulator.records.discretize.ModalForm`).

    Per sample: e = L_Σ ξ, y = Σ_j Re[G_j m_j] + e, m_j ← λ_j m_j + (D ξ)_j,
    all complex numbers held as real and imaginary parts. Two output
    channels (iq and if records) take a branch written out by hand, the
    common case; ``fastmath`` lets the compiler fuse multiply-adds (the
    result is still the same bits for any chunk size).

    Parameters
    ----------
    lam_re, lam_im : (k,) float64
        Eigenvalues λ_j of Φ (one per conjugate pair).
    out_re, out_im : (p, k) float64
        G = weighted Γ V.
    drive_re, drive_im : (k, p) float64
        D = V⁻¹ K L_Σ.
    innovation_factor : (p, p) float64
        L_Σ (lower triangular).
    state_re, state_im : (k,) float64
        Modal state m at the first sample; overwritten with m after the last.
    normals : (count, p) float64
    out : (count, p) float64
    """
    k_modes = lam_re.shape[0]
    p = out_re.shape[0]
    if p == 2:
        l00, l10, l11 = innovation_factor[0, 0], innovation_factor[1, 0], innovation_factor[1, 1]
        for k in range(normals.shape[0]):
            x0 = normals[k, 0]
            x1 = normals[k, 1]
            y0 = l00 * x0
            y1 = l10 * x0 + l11 * x1
            for j in range(k_modes):
                sr = state_re[j]
                si = state_im[j]
                y0 += out_re[0, j] * sr - out_im[0, j] * si
                y1 += out_re[1, j] * sr - out_im[1, j] * si
                state_re[j] = (lam_re[j] * sr - lam_im[j] * si + drive_re[j, 0] * x0
                               + drive_re[j, 1] * x1)
                state_im[j] = (lam_re[j] * si + lam_im[j] * sr + drive_im[j, 0] * x0
                               + drive_im[j, 1] * x1)
            out[k, 0] = y0
            out[k, 1] = y1
        return
    for k in range(normals.shape[0]):
        for i in range(p):
            acc = 0.0
            for j in range(p):
                acc += innovation_factor[i, j] * normals[k, j]
            for j in range(k_modes):
                acc += out_re[i, j] * state_re[j] - out_im[i, j] * state_im[j]
            out[k, i] = acc
        for j in range(k_modes):
            sr = state_re[j]
            si = state_im[j]
            ur = 0.0
            ui = 0.0
            for q in range(p):
                ur += drive_re[j, q] * normals[k, q]
                ui += drive_im[j, q] * normals[k, q]
            state_re[j] = lam_re[j] * sr - lam_im[j] * si + ur
            state_im[j] = lam_re[j] * si + lam_im[j] * sr + ui


@numba.njit(cache=True, nogil=True)
def digitise(values, scale, low, high, counts):
    """Round ``values × scale`` to the nearest integer level, clip to [low, high].

    Ties round to even, as numpy.rint. ``values`` and ``counts`` have shape
    (count, channels); returns the number of rows (samples) in which at
    least one channel was clipped.
    """
    clipped = 0
    for k in range(values.shape[0]):
        hit = False
        for i in range(values.shape[1]):
            level = np.rint(values[k, i] * scale)
            if level < low:
                level = low
                hit = True
            elif level > high:
                level = high
                hit = True
            counts[k, i] = level
        if hit:
            clipped += 1
    return clipped


class Digitiser:
    """Volts to integer counts (:func:`digitise`) with the scales of a record plan."""

    def __init__(self, plan):
        self.scale = plan.chain.volts_per_unit / plan.volts_per_count
        self.low, self.high = -(2 ** (plan.bits - 1)), 2 ** (plan.bits - 1) - 1
        self.dtype = np.int16 if plan.bits <= 16 else np.int32

    def __call__(self, y):
        """Counts of ``y`` (shape (count,) or (count, channels)) and the clipped samples."""
        values = y if y.ndim == 2 else y[:, None]
        counts = np.empty(values.shape, dtype=self.dtype)
        n_clip = self.into(values, counts)
        return (counts if y.ndim == 2 else counts[:, 0]), n_clip

    def into(self, values, counts):
        """Digitise (count, channels) ``values`` into ``counts``; return the clipped samples."""
        return int(digitise(np.ascontiguousarray(values), self.scale, float(self.low),
                            float(self.high), counts))


def rotate_to_carrier(y, first, cycles_per_sample):
    """Real if samples r_n = 2 Re[e^{iφ_{n+1}} (y_re + i y_im)], φ_{n+1} = θ T (n + 1).

    ``y`` holds the rotating integrals (Re ρ_n, Im ρ_n) of samples ``first``,
    ``first + 1``, …; ``cycles_per_sample`` is θT/2π. The phase is reduced
    modulo one cycle before the cosine; the product k·θT/2π carries a
    rounding error of about k·10⁻¹⁶ cycles (10⁻⁷ rad after 10⁹ samples).
    """
    k = np.arange(first + 1, first + 1 + len(y), dtype=np.float64)
    phase = 2 * np.pi * np.mod(k * cycles_per_sample, 1.0)
    return 2.0 * (np.cos(phase) * y[:, 0] - np.sin(phase) * y[:, 1])


class Stepper:
    """A record plan's recursion bound to its numba kernel, with its carried state.

    Attributes
    ----------
    width : int
        Standard normals per sample.
    recursion : Recursion
        The matrices the kernel runs, for checks (:meth:`Recursion.autocovariance`).
    start : ndarray
        z_0 in the coordinates of ``recursion`` (a copy; the carried state moves on).
    digitised : callable or None
        ``digitised(normals, digitiser, counts)`` advances like a call but
        digitises the outputs in the same loop (:class:`Digitiser`; returns the
        clipped samples), when the kernel can (:mod:`simulator.records.fused`).
    """

    def __init__(self, width, recursion, step, start, digitised=None):
        self.width, self.recursion, self._step = width, recursion, step
        self.start = np.array(start, dtype=float)
        self.digitised = digitised

    def __call__(self, normals, out, watched_out):
        """Advance over ``len(normals)`` samples, writing outputs (and watched states)."""
        self._step(normals, out, watched_out)


def stepper(plan, *, modal=True):
    """The :class:`Stepper` of ``plan``'s form: full state, dense or modal innovations.

    The state is drawn from its stationary distribution (the state covariance
    for the full state form, V − P for the innovations form) with normals of
    its own stream, and carried from chunk to chunk. The innovations form runs
    in eigen-coordinates when :func:`simulator.records.discretize.modal_form` returns
    a verified modal form (and ``modal`` is true), and densely otherwise.
    """
    from simulator.records.discretize import modal_form, noise_factor

    disc = plan.discrete
    phi, gam = np.ascontiguousarray(disc.transition), np.ascontiguousarray(disc.output)
    n = phi.shape[0]
    if plan.form == "full-state":
        factor = np.ascontiguousarray(noise_factor(disc.noise_covariance))
        state = _stationary_start(plan.seed, disc.state_covariance)

        def step(xi, y, mech):
            full_state_step(phi, gam, factor, state, xi, y, plan.watched, mech)

        return Stepper(factor.shape[1], Recursion(
            kind="full-state", transition=phi, drive=factor[:n], output=gam,
            feedthrough=factor[n:], start_covariance=disc.state_covariance), step, state)
    inn = plan.innovations
    sigma_factor = np.ascontiguousarray(np.linalg.cholesky(inn.innovation_covariance))
    drive = np.ascontiguousarray(inn.gain @ sigma_factor)
    state = _stationary_start(plan.seed, inn.predictor_covariance)
    modal = modal_form(phi, gam, drive) if modal else None
    if modal is None:
        def step(xi, y, mech):
            innovations_step(phi, gam, drive, sigma_factor, state, xi, y)

        return Stepper(sigma_factor.shape[0], Recursion(
            kind="innovations", transition=phi, drive=drive, output=gam,
            feedthrough=sigma_factor, start_covariance=inn.predictor_covariance), step, state)
    m = np.asarray(modal.to_modal @ state, dtype=complex)  # real when every λ is: m.imag writable
    parts = [np.ascontiguousarray(x) for x in (
        modal.eigenvalues.real, modal.eigenvalues.imag, modal.output.real,
        modal.output.imag, modal.drive.real, modal.drive.imag)]
    m_re, m_im = np.ascontiguousarray(m.real), np.ascontiguousarray(m.imag)
    digitised = None
    if sigma_factor.shape[0] == 2 and len(m_re) <= fused.PAIR_MODES_MOST:
        no_counts = np.empty((0, 2), dtype=np.int16)

        def step(xi, y, mech):
            fused.modal_pair_step(*parts, sigma_factor, m_re, m_im, xi, y, 1.0, 0.0, 0.0,
                                  no_counts)

        def digitised(xi, digitiser, counts):
            return int(fused.modal_pair_step(
                *parts, sigma_factor, m_re, m_im, xi, NO_OUTPUTS, digitiser.scale,
                float(digitiser.low), float(digitiser.high), counts))
    else:
        def step(xi, y, mech):
            modal_innovations_step(*parts, sigma_factor, m_re, m_im, xi, y)

    lam_re, lam_im, out_re, out_im, drive_re, drive_im = parts
    to_real = np.vstack([modal.to_modal.real, modal.to_modal.imag])
    return Stepper(sigma_factor.shape[0], Recursion(
        kind="modal innovations",
        transition=np.block([[np.diag(lam_re), -np.diag(lam_im)],
                             [np.diag(lam_im), np.diag(lam_re)]]),
        drive=np.vstack([drive_re, drive_im]), output=np.hstack([out_re, -out_im]),
        feedthrough=sigma_factor,
        start_covariance=to_real @ inn.predictor_covariance @ to_real.T), step,
        np.concatenate([m_re, m_im]), digitised)


def _stationary_start(seed, covariance):
    from simulator.records.discretize import noise_factor
    factor = noise_factor(covariance)
    xi = NormalBlocks(seed, START_STREAM, factor.shape[1], BLOCK_SAMPLES).take(0, 1)[0]
    return np.ascontiguousarray(factor @ xi)
