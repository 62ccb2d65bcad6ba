"""One linear stochastic model with named signals: the engine's single source of truth.

    dx = A x dt + B dW,        y dt = C x dt + D dW,
    E[dW dWᵀ] = N dt  (symmetrised, two-sided input intensities).

The state holds quadratures of the cavity, of every mechanical mode and, as the
project grows, of classical-noise and detection-chain elements. Steady state,
analytic spectra and time-domain records are all computed from this object.
With the Fourier convention x(t) = ∫dω/2π e^(−iωt) x(ω) the transfer from
inputs to outputs is H(ω) = C (−iω − A)⁻¹ B + D.
"""

import dataclasses
import warnings

import numpy as np
import scipy.linalg


def solve_lyapunov(a, q):
    """X with A X + X Aᵀ = Q (Bartels–Stewart, scipy.linalg.solve_continuous_lyapunov).

    SciPy warns when two eigenvalues of A nearly cancel relative to its
    largest entries (a laser linewidth of 0.1 Hz beside a detuning of 10¹³ Hz)
    and perturbs the equation slightly; that warning is silenced here because
    the callers check what matters, the residual of the solution
    (:meth:`LinearModel.covariance` keeps the better of two solves by it).
    """
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message=".*eigenvalue pair whose sum is very close",
                                category=RuntimeWarning)
        return scipy.linalg.solve_continuous_lyapunov(a, q)


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class StateSpace:
    """Linear stochastic model with named states, inputs and outputs.

    Parameters
    ----------
    A : ndarray (n, n)
        Drift matrix (1/s).
    B : ndarray (n, m)
        Noise-input matrix (1/√s for white inputs of unit intensity).
    N : ndarray (m, m)
        Symmetrised two-sided intensity of the white inputs (½ for vacuum,
        n + ½ for a thermal bath of occupation n).
    C : ndarray (p, n)
        Output matrix.
    D : ndarray (p, m)
        Feed-through of the inputs to the outputs.
    states, inputs, outputs : tuple of str
        Names, in order.
    sources : tuple of (str, tuple of int)
        Physical noise sources: a name and the input indices it drives, used to
        split spectra into a noise budget.
    coupling : ndarray (n, n)
        The part of ``A`` that couples the cavity to the mechanics; ``A −
        coupling`` is the uncoupled system, used to separate measurement
        imprecision from back-action.
    """

    A: np.ndarray
    B: np.ndarray
    N: np.ndarray
    C: np.ndarray
    D: np.ndarray
    states: tuple
    inputs: tuple
    outputs: tuple
    sources: tuple = ()
    coupling: np.ndarray | None = None

    def __post_init__(self):
        n, m, p = len(self.states), len(self.inputs), len(self.outputs)
        for name, shape in (("A", (n, n)), ("B", (n, m)), ("N", (m, m)),
                            ("C", (p, n)), ("D", (p, m))):
            value = np.asarray(getattr(self, name), dtype=float)
            if value.shape != shape:
                raise ValueError(f"StateSpace.{name} has shape {value.shape}; "
                                 f"expected {shape} from the named signals")
            value.setflags(write=False)
            object.__setattr__(self, name, value)
        coupling = np.zeros((n, n)) if self.coupling is None else np.asarray(self.coupling)
        coupling.setflags(write=False)
        object.__setattr__(self, "coupling", coupling)

    @property
    def diffusion(self):
        """State diffusion matrix B N Bᵀ (symmetric)."""
        return self.B @ self.N @ self.B.T

    def index(self, name, kind="states"):
        """Position of a named state, input or output."""
        names = getattr(self, kind)
        try:
            return names.index(name)
        except ValueError:
            raise KeyError(f"no {kind[:-1]} named {name!r}; have {', '.join(names)}") from None

    def eigenvalues(self):
        """Eigenvalues of A (1/s), sorted by decreasing real part."""
        lam = np.linalg.eigvals(self.A)
        return lam[np.argsort(-lam.real)]

    def covariance(self):
        """Stationary symmetrised covariance V solving A V + V Aᵀ + B N Bᵀ = 0.

        Only meaningful for a stable model (all eigenvalues of A in the left
        half-plane); the caller checks stability first.

        Notes
        -----
        Solved by the Bartels–Stewart method (scipy.linalg.solve_continuous_lyapunov)
        as given and again in states rescaled by powers of two close to the
        standard deviations of the first solution (an exact similarity
        transform); the solution with the smaller residual relative to the
        standard deviations, max |(A V + V Aᵀ + B N Bᵀ)_ij| / (σ_i σ_j ‖A‖), is
        kept. States of very different size — a filter output of 10³ beside a
        laser-noise phase of 10⁻⁹ rad — otherwise lose the small entries'
        relative precision (seen: 6·10⁻⁶ of the standard deviations), because
        the method's error is relative to the largest entries; where the scales
        are alike the plain solve is usually the better one.
        """
        diffusion = self.diffusion
        first = solve_lyapunov(self.A, -diffusion)
        first = 0.5 * (first + first.T)
        s = power_of_two_scale(first)
        b = self.B / s[:, None]
        scaled = solve_lyapunov(self.A * np.outer(1.0 / s, s),
                                -(b @ self.N @ b.T)) * np.outer(s, s)
        scaled = 0.5 * (scaled + scaled.T)
        sd = np.sqrt(np.clip(np.diag(first), 0.0, None))
        sd = np.where(sd > 0, sd, 1.0)
        norm = max(float(np.abs(self.A).max()), np.finfo(float).tiny)

        def residual(v):
            r = self.A @ v + v @ self.A.T + diffusion
            return float(np.abs(r / np.outer(sd, sd)).max()) / norm

        return scaled if residual(scaled) < residual(first) else first

    def transfer(self, omega, *, uncoupled=False):
        """Transfer matrix H(ω) = C (−iω − A)⁻¹ B + D from inputs to outputs.

        Parameters
        ----------
        omega : array_like
            Angular frequencies (rad/s), any shape ``s``.
        uncoupled : bool
            Use ``A − coupling``: the response with the optomechanical coupling
            switched off (the path that does not pass through the mechanics).

        Returns
        -------
        ndarray, complex, shape ``s + (outputs, inputs)``

        Notes
        -----
        Evaluated through the eigendecomposition of A, one small product per
        frequency with no Python loop; where A is close to defective (an
        exceptional point, eigenvector condition number above
        ``RESOLVENT_MAX_CONDITION``) or V Λ V⁻¹ does not rebuild A to
        ``RESOLVENT_RTOL``, a batched linear solve is used instead.
        """
        omega = np.asarray(omega, dtype=float)
        flat = omega.reshape(-1)
        res = Resolvent(self.A - self.coupling if uncoupled else self.A)
        out = np.empty((flat.size, len(self.outputs), len(self.inputs)), dtype=complex)
        if res.well_conditioned:
            left, right = self.C @ res.vec, res.inv @ self.B
        for start in range(0, flat.size, _CHUNK):
            w = flat[start:start + _CHUNK]
            if res.well_conditioned:
                # (C V) diag(f) (V⁻¹ B) as one batched matrix product per chunk
                out[start:start + _CHUNK] = (left * res.factor(w)[:, None, :]) @ right
            else:
                out[start:start + _CHUNK] = self.C @ res.solve_columns(w, self.B)
        out += self.D
        return out.reshape(omega.shape + out.shape[1:])

    def output_spectrum(self, omega):
        """Symmetrised two-sided output spectral density matrix S(ω) = H N H†.

        ``S[..., i, j]`` is the cross-spectral density of outputs i and j at
        angular frequency ω, in (output unit)² per unit angular bandwidth
        ÷ 2π, i.e. per Hz of ordinary frequency on the two-sided axis: with
        this normalisation a vacuum quadrature has density ½ and
        ∫ S dω/2π equals the variance. Shape ``omega.shape + (p, p)``.
        """
        h = self.transfer(omega)
        # two batched matrix products: cost linear in the number of inputs squared
        return (h @ self.N) @ np.swapaxes(h.conj(), -1, -2)


_CHUNK = 1 << 15
RESOLVENT_MAX_CONDITION = 1e8  # eigenvector condition above which A is near-defective
RESOLVENT_RTOL = 1e-10  # largest accepted relative error of V Λ V⁻¹ against A


def power_of_two_scale(covariance):
    """Powers of two nearest the standard deviations on the diagonal (1 where it is zero).

    Scaling states by powers of two is exact in binary floating point, so a
    similarity transform by them changes conditioning without rounding.
    """
    sd = np.sqrt(np.clip(np.diag(covariance), 0.0, None))
    exponent = np.where(sd > 0, np.round(np.log2(np.where(sd > 0, sd, 1.0))), 0.0)
    return np.ldexp(1.0, exponent.astype(int))


class Resolvent:
    """(−iω − a)⁻¹ for many ω: eigendecomposition, or batched solves near an exceptional point."""

    def __init__(self, a):
        self.a = a
        self.lam, self.vec = np.linalg.eig(a)
        self.well_conditioned = bool(np.all(np.isfinite(self.lam))
                                     and np.linalg.cond(self.vec) < RESOLVENT_MAX_CONDITION)
        self.inv = np.linalg.inv(self.vec) if self.well_conditioned else None
        if self.well_conditioned:  # verified, whatever the eigensolver returned
            rebuilt = (self.vec * self.lam) @ self.inv
            scale = max(float(np.abs(a).max(initial=0.0)), np.finfo(float).tiny)
            if not np.abs(rebuilt - a).max(initial=0.0) <= RESOLVENT_RTOL * scale:
                self.well_conditioned, self.inv = False, None

    def factor(self, w):
        """1/(−iω − λ) for every ω (rows) and eigenvalue λ (columns)."""
        return 1.0 / (-1j * w[:, None] - self.lam[None, :])

    def solve_columns(self, w, right):
        """(−iω − a)⁻¹·right per ω by batched solves; ``right`` (n, m)."""
        m = -1j * w[:, None, None] * np.eye(self.a.shape[0]) - self.a
        return np.linalg.solve(m, np.broadcast_to(right, (w.size,) + right.shape))

    def solve_rows(self, left, w):
        """left·(−iω − a)⁻¹ per ω by batched solves; ``left`` (n,) or (len(w), n)."""
        left = np.broadcast_to(left, (w.size, self.a.shape[0]))
        m = np.swapaxes(-1j * w[:, None, None] * np.eye(self.a.shape[0]) - self.a, 1, 2)
        return np.linalg.solve(m, left[..., None])[..., 0]
