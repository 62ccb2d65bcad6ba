"""Exact discretisation of the linear stochastic model at the sample interval.

A detector that integrates its continuous output over each sample interval
T (integrate-and-dump) delivers samples y_n = (1/T) ∫ y dt that obey, with no
approximation and no dependence on any step size,

    x_{n+1} = Φ x_n + w_n,        y_n = Γ x_n + v_n,

where (w_n, v_n) are Gaussian, independent between intervals, and
correlated with each other within one. Their joint covariance is what makes
the record exact: w_n (the state noise) and v_n (the noise of the
integrated output) share the same input noise, and the cross-covariance
carries the correlation between measurement imprecision and back-action.

:func:`discretize` computes Φ, Γ and the joint covariance by Van Loan's
method on the state augmented with the integrator. :func:`innovations_form`
turns the result into the steady-state Kalman predictor (innovations) form,
which generates the same output process from one random number per output
channel and sample.

References
----------
Van Loan, IEEE Trans. Autom. Control 23, 395 (1978) (integrals of matrix
exponentials; Theorem 1).
Anderson and Moore, Optimal Filtering (Prentice-Hall, 1979), Chs. 4 and 9
(steady-state Kalman filter, innovations representation, correlated noise).
"""

import dataclasses

import numpy as np
import scipy.linalg

from simulator.errors import OperatingPointError
from simulator.model.statespace import power_of_two_scale


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class DiscreteModel:
    """Exact sampled model x_{n+1} = Φ x_n + w_n, y_n = Γ x_n + v_n.

    Attributes
    ----------
    transition : ndarray (n, n)
        Φ = e^{AT}.
    output : ndarray (p, n)
        Γ: the mean of the sample given the state at the start of its interval.
    noise_covariance : ndarray (n + p, n + p)
        Joint covariance of (w_n, v_n).
    state_covariance : ndarray (n, n)
        Stationary covariance V of x_n (the continuous Lyapunov solution).
    sample_interval_s : float
    states, outputs : tuple of str
    """

    transition: np.ndarray
    output: np.ndarray
    noise_covariance: np.ndarray
    state_covariance: np.ndarray
    sample_interval_s: float
    states: tuple
    outputs: tuple

    @property
    def process_noise(self):
        """Covariance Q of the state noise w_n."""
        n = len(self.states)
        return self.noise_covariance[:n, :n]

    @property
    def output_noise(self):
        """Covariance R of the output noise v_n."""
        n = len(self.states)
        return self.noise_covariance[n:, n:]

    @property
    def cross_covariance(self):
        """S = E[w_n v_nᵀ], the correlation between state and output noise."""
        n = len(self.states)
        return self.noise_covariance[:n, n:]

    def autocovariance(self, lags):
        """R(τ) = E[y_{n+τ} y_nᵀ] for τ = 0 … lags − 1, shape (lags, p, p).

        R(0) = Γ V Γᵀ + R and R(τ) = Γ Φ^{τ−1} (Φ V Γᵀ + S) for τ ≥ 1;
        R(−τ) = R(τ)ᵀ.
        """
        out = np.empty((int(lags), len(self.outputs), len(self.outputs)))
        v, g = self.state_covariance, self.output
        out[0] = g @ v @ g.T + self.output_noise
        m = self.transition @ v @ g.T + self.cross_covariance
        for tau in range(1, int(lags)):
            out[tau] = g @ m
            m = self.transition @ m
        return out

    def spectrum(self, frequency_hz):
        """Exact two-sided density matrix of the samples (per Hz), FFT convention.

        S(f) = T [R(0) + G(f) + G(f)†],  G(f) = Γ (e^{iψ} − Φ)⁻¹ (Φ V Γᵀ + S),
        ψ = 2π f T: the sum over lags of R(τ) e^{−iψτ}, the convention of
        numpy's FFT and scipy.signal.welch. Shape ``f.shape + (p, p)``.
        """
        f = np.asarray(frequency_hz, dtype=float)
        t = self.sample_interval_s
        v, g = self.state_covariance, self.output
        r0 = g @ v @ g.T + self.output_noise
        m = self.transition @ v @ g.T + self.cross_covariance
        z = np.exp(2j * np.pi * f.reshape(-1) * t)
        eye = np.eye(len(self.states))
        resolvent = np.linalg.solve(z[:, None, None] * eye - self.transition, m)
        gf = np.einsum("pn,wnq->wpq", g, resolvent)
        s = t * (r0 + gf + np.conj(np.swapaxes(gf, -1, -2)))
        return s.reshape(f.shape + s.shape[1:])


def van_loan(drift, diffusion, duration):
    """Φ = e^{A t} and Q = ∫₀ᵗ e^{As} W e^{Aᵀs} ds by Van Loan's block exponential.

    expm([[−A, W], [0, Aᵀ]] h) = [[·, E₁₂], [0, E₂₂]] gives e^{Ah} = E₂₂ᵀ and
    the integral E₂₂ᵀ E₁₂ over a step h = t/2^k with ‖A‖₁ h ≤ 1, then doubled
    k times exactly (Φ(2h) = Φ(h)², Q(2h) = Φ(h) Q(h) Φ(h)ᵀ + Q(h)).
    Van Loan, IEEE Trans. Autom. Control 23, 395 (1978). Q is returned
    symmetrised.
    """
    size = len(drift)
    k = max(0, int(np.ceil(np.log2(max(np.linalg.norm(drift, 1) * duration, 1e-300)))))
    h = duration / 2**k
    block = np.zeros((2 * size, 2 * size))
    block[:size, :size] = -drift
    block[:size, size:] = diffusion
    block[size:, size:] = drift.T
    e = scipy.linalg.expm(block * h)
    phi = e[size:, size:].T
    q = phi @ e[:size, size:]
    for _ in range(k):
        q = phi @ q @ phi.T + q
        phi = phi @ phi
    return phi, 0.5 * (q + q.T)


def discretize(model, sample_interval_s, *, integrator_drift=None):
    """Exact integrate-and-dump discretisation of ``model`` (Van Loan's method).

    Parameters
    ----------
    model : simulator.model.statespace.StateSpace
        Stable continuous model dx = A x dt + B dW, y dt = C x dt + D dW.
    sample_interval_s : float
        T = 1/fs (s).
    integrator_drift : ndarray (p, p), optional
        R of the integrator dρ = (R ρ + y) dt, ρ reset to 0 at the start of
        each interval; zero by default (plain integrate-and-dump). A rotation
        integrates a carrier-modulated output (:mod:`simulator.model.chain`).

    Returns
    -------
    DiscreteModel
        With y_n = ρ(T)/T, the average of the output over the interval.

    Notes
    -----
    The augmented state z = (x, ρ) obeys dz = F z dt + G dW with
    F = [[A, 0], [C, R]], G = [[B], [D]]. Over one interval
    z(T) = e^{FT} z(0) + ∫₀ᵀ e^{F(T−s)} G dW(s), and Van Loan's block
    exponential expm([[−F, G N Gᵀ], [0, Fᵀ]] h) = [[·, E₁₂], [0, E₂₂]] gives
    e^{Fh} = E₂₂ᵀ and the noise covariance E₂₂ᵀ E₁₂. The block exponential
    is taken over h = T/2^k with ‖F‖h ≤ 1 and doubled k times exactly
    (Φ(2h) = Φ(h)², Q(2h) = Φ(h) Q(h) Φ(h)ᵀ + Q(h)), which avoids the
    growth of e^{−Fh} for stiff models.

    The states are first rescaled by powers of two close to their stationary
    standard deviations, and the integrators by powers of two close to the
    standard deviation of the state part of their output (an exact
    similarity transform: no rounding), so that
    a state of tiny variance strongly coupled to the cavity — a laser-noise
    peak in radians beside a field of many photons — does not cost the block
    exponential its precision; the result is transformed back exactly.
    """
    t = float(sample_interval_s)
    if not (np.isfinite(t) and t > 0):
        raise ValueError(f"sample_interval_s = {sample_interval_s!r}; expected a positive "
                         "interval in seconds")
    n, p = len(model.states), len(model.outputs)
    covariance = model.covariance()
    s = power_of_two_scale(covariance)
    # the integrators by the size of the state part of their output, C V Cᵀ (which keeps
    # the relative precision of Γ), or of its white part D N Dᵀ / T where that is all
    state_part = np.diag(model.C @ covariance @ model.C.T)
    white_part = np.diag(model.D @ model.N @ model.D.T) / t
    u = power_of_two_scale(np.diag(np.where(state_part > 0, state_part, white_part)))
    r = np.zeros((p, p)) if integrator_drift is None else np.asarray(integrator_drift, float)
    f = np.block([[model.A * np.outer(1.0 / s, s), np.zeros((n, p))],
                  [model.C * np.outer(1.0 / u, s), r * np.outer(1.0 / u, u)]])
    g = np.vstack([model.B / s[:, None], model.D / u[:, None]])
    w = g @ model.N @ g.T
    phi, q = van_loan(f, w, t)
    scale = np.concatenate([s, u / t])
    return DiscreteModel(transition=phi[:n, :n] * np.outer(s, 1.0 / s),
                         output=phi[n:, :n] * np.outer(u, 1.0 / s) / t,
                         noise_covariance=q * np.outer(scale, scale),
                         state_covariance=covariance, sample_interval_s=t,
                         states=model.states, outputs=model.outputs)


def noise_factor(covariance, rtol=1e-13):
    """Factor L with L Lᵀ = covariance, dropping directions with no noise.

    Built from the eigendecomposition of the covariance scaled to unit
    diagonal, so that quadratures of very different size (a cavity and a
    hot, high-Q mode) keep their relative precision; eigenvalues below
    ``rtol`` times the largest are dropped. The number of columns is the
    number of random normals each sample needs.
    """
    c = np.asarray(covariance, dtype=float)
    d = np.sqrt(np.clip(np.diag(c), 0.0, None))
    safe = np.where(d > 0, d, 1.0)
    lam, vec = np.linalg.eigh(c / np.outer(safe, safe))
    keep = lam > rtol * max(lam.max(), 0.0)
    return (safe[:, None] * vec[:, keep]) * np.sqrt(lam[keep])


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class InnovationsForm:
    """Steady-state Kalman predictor: x̂_{n+1} = Φ x̂_n + K e_n, y_n = Γ x̂_n + e_n.

    Attributes
    ----------
    transition, output : ndarray
        Φ and Γ of the discrete model.
    gain : ndarray (n, p)
        Kalman predictor gain K.
    innovation_covariance : ndarray (p, p)
        Σ = Γ P Γᵀ + R, covariance of the white innovations e_n.
    predictor_covariance : ndarray (n, n)
        Stationary covariance V − P of x̂_n, used to start in the stationary state.
    error_covariance : ndarray (n, n)
        P, the solution of the discrete Riccati equation.
    """

    transition: np.ndarray
    output: np.ndarray
    gain: np.ndarray
    innovation_covariance: np.ndarray
    predictor_covariance: np.ndarray
    error_covariance: np.ndarray


def innovations_form(discrete):
    """Innovations form of a :class:`DiscreteModel` via the discrete Riccati equation.

    Notes
    -----
    P solves P = Φ P Φᵀ + Q − (Φ P Γᵀ + S) Σ⁻¹ (Φ P Γᵀ + S)ᵀ with
    Σ = Γ P Γᵀ + R (the predictor Riccati equation with correlated noise,
    Anderson and Moore 1979, Sec. 5.5); K = (Φ P Γᵀ + S) Σ⁻¹. The
    innovations e_n are white with covariance Σ and the output process
    y_n = Γ x̂_n + e_n has exactly the autocovariance of the full model:
    Φ(V − P)Γᵀ + KΣ = Φ V Γᵀ + S and Γ(V − P)Γᵀ + Σ = Γ V Γᵀ + R.
    """
    phi, gam = discrete.transition, discrete.output
    q, r, s = discrete.process_noise, discrete.output_noise, discrete.cross_covariance
    try:
        p = scipy.linalg.solve_discrete_are(phi.T, gam.T, q, r, s=s)
    except (np.linalg.LinAlgError, ValueError) as exc:
        raise OperatingPointError(f"the discrete Riccati equation of the record model has "
                                  f"no stabilising solution ({exc})") from None
    p = 0.5 * (p + p.T)
    sigma = gam @ p @ gam.T + r
    sigma = 0.5 * (sigma + sigma.T)
    gain = np.linalg.solve(sigma, (phi @ p @ gam.T + s).T).T
    predictor = discrete.state_covariance - p
    return InnovationsForm(transition=phi, output=gam, gain=gain,
                           innovation_covariance=sigma,
                           predictor_covariance=0.5 * (predictor + predictor.T),
                           error_covariance=p)


MODAL_MAX_CONDITION = 1e6  # eigenvector condition above which Φ counts as near-defective
MODAL_RECONSTRUCTION_RTOL = 1e-9  # largest accepted relative error of the rebuilt (Φ, Γ, U)


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class ModalForm:
    """A real recursion x_{n+1} = Φ x_n + U ξ_n, y_n = Γ x_n + … in eigen-coordinates.

    With Φ = V Λ V⁻¹ and m = V⁻¹ x, each kept coordinate evolves on its own,
    m_j ← λ_j m_j + (V⁻¹U)_j ξ_n, and Γ x = Σ_j Re[w_j (ΓV)_j m_j], with one
    coordinate kept per complex-conjugate pair (w_j = 2) and every real
    eigenvalue kept once (w_j = 1). This halves the arithmetic of a model made
    of oscillators and shortens the chain of dependent operations per sample
    to one complex multiply-add.

    Attributes
    ----------
    eigenvalues : ndarray (k,) complex
        λ_j of the kept coordinates (real ones with zero imaginary part).
    output : ndarray (p, k) complex
        w_j (ΓV)_j, the weights included.
    drive : ndarray (k, r) complex
        V⁻¹U, kept rows.
    to_modal : ndarray (k, n) complex
        The kept rows of V⁻¹: m = to_modal @ x.
    basis : ndarray (n, k) complex
        w_j V_j: x = Re(basis @ m).
    reconstruction_error : float
        Largest relative error of Φ, Γ, U, the identity and the left-eigenvector
        relation rebuilt from the kept coordinates (see :func:`modal_form`).
    """

    eigenvalues: np.ndarray
    output: np.ndarray
    drive: np.ndarray
    to_modal: np.ndarray
    basis: np.ndarray
    reconstruction_error: float


def modal_form(transition, output, drive, max_condition=MODAL_MAX_CONDITION,
               rtol=MODAL_RECONSTRUCTION_RTOL):
    """:class:`ModalForm` of (Φ, Γ, U), or None when it cannot be trusted.

    Returns None when the eigenvector matrix has a condition number above
    ``max_condition`` (near an exceptional point, e.g. at the onset of
    normal-mode splitting), when the eigenvalues do not come in real ones and
    conjugate pairs, or when the kept coordinates fail to rebuild the model
    to ``rtol``: the dense recursion must then be used instead.

    Notes
    -----
    Eigenvalues are sorted into real ones and conjugate pairs without a
    tolerance on the imaginary part: an eigenvalue is real only when its
    imaginary part is exactly zero (the real LAPACK eigensolver, dgeev, returns
    real eigenvalues so, with real eigenvectors, and every complex one beside
    its conjugate with the conjugate eigenvector), and the member of each pair
    in the upper half-plane is kept. A repeated real eigenvalue that the solver
    returns as a pair λ ± iε (two identical electronics filters on the I and
    Q channels can do this) is therefore kept as one complex coordinate of
    weight 2, which spans both real directions.

    The result is then verified, whatever the eigensolver returned. With B the
    weighted kept eigenvectors and T the kept rows of V⁻¹, the recursion is
    exact when Re(B T) = 1, Re(B Λ T) = Φ, T Φ = Λ T, Re(Γ B T) = Γ and
    Re(B T U) = U; each is checked to ``rtol`` relative to the size of the
    matrix it rebuilds, so a basis that lost part of an invariant subspace
    can never be used.
    """
    transition = np.asarray(transition, dtype=float)
    lam, vec = np.linalg.eig(transition)
    if not np.all(np.isfinite(lam)) or np.linalg.cond(vec) > max_condition:
        return None
    inv = np.linalg.inv(vec)
    real = lam.imag == 0.0
    upper = np.flatnonzero(lam.imag > 0)
    if upper.size != np.count_nonzero(lam.imag < 0):
        return None
    keep = np.sort(np.concatenate([np.flatnonzero(real), upper]))
    weight = np.where(real[keep], 1.0, 2.0)
    vec_k, inv_k = vec[:, keep], inv[keep]
    vec_k[:, real[keep]] = vec_k[:, real[keep]].real
    eigenvalues = np.where(real[keep], lam[keep].real, lam[keep])
    basis = vec_k * weight
    modal = ModalForm(eigenvalues=eigenvalues, output=output @ basis, drive=inv_k @ drive,
                      to_modal=inv_k, basis=basis, reconstruction_error=0.0)
    error = modal_reconstruction_error(modal, transition, output, drive)
    if not error <= rtol:
        return None
    return dataclasses.replace(modal, reconstruction_error=error)


def modal_reconstruction_error(modal, transition, output, drive):
    """Largest relative error of 1, Φ, T Φ = Λ T, Γ and U rebuilt from ``modal``.

    Each error is the largest absolute entry of the difference over the
    largest entry of the matrices it compares (for T Φ − Λ T: over the largest
    entry of T times that of Φ).
    """
    b, t, lam = modal.basis, modal.to_modal, modal.eigenvalues
    tiny = np.finfo(float).tiny

    def size(m):
        return max(float(np.abs(m).max(initial=0.0)), tiny)

    def rel(rebuilt, exact, scale=None):
        return float(np.abs(rebuilt - exact).max(initial=0.0)) / (scale or size(exact))

    return max(rel(np.real(b @ t), np.eye(transition.shape[0])),
               rel(np.real(b @ (lam[:, None] * t)), transition),
               rel(t @ transition, lam[:, None] * t, size(t) * size(transition)),
               rel(np.real(modal.output @ t), output),
               rel(np.real(b @ modal.drive), drive))
