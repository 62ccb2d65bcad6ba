"""Linear solves with a Lindblad Liouvillian: steady state and resolvent.

Writing the Lindblad generator as

    L(x) = K x + x K† + Σ_k c_k x c_k†,      K = −iH − ½ Σ_k c_k†c_k,

every problem here is one linear equation for a d × d matrix x,

    G_ω(x) = (−iω − L)(x) + σ Tr x = y,      σ = s·1/d,

with y = σ for the steady state (then Tr x = 1 and L x = 0, since L preserves
the trace) and y = b, Tr b = 0, for the resolvent x = (−iω − L)⁻¹ b that
spectra need (then Tr x = 0 and the σ term vanishes; it only removes the
singularity of L at ω = 0).

Method. G_ω is applied exactly with the sparse H and c_k (no Liouvillian
matrix is formed) and inverted by GMRES, right-preconditioned with the exact
inverse of its no-jump part x ↦ −(K + iω) x − x K†, a Sylvester operator that
is diagonal in the eigenbasis of K: with K = V Λ V⁻¹,

    P_ω(y) = −V [ (V⁻¹ y V⁻†)_ij / (λ_i + iω + λ_j*) ] V†.

K is diagonalised once and reused at every frequency, so each GMRES step costs
four dense d × d products. Because the preconditioner only speeds convergence
and the residual is that of the exact equation, an ill-conditioned V affects
speed, not the answer. A direct sparse LU of the Liouvillian (trace row
replacing one equation) is kept as an independent method for tests and as the
fallback where K has an undamped eigenvalue.

References
----------
Lindblad, Commun. Math. Phys. 48, 119 (1976) (generator).
Saad and Schultz, SIAM J. Sci. Stat. Comput. 7, 856 (1986) (GMRES).
"""

import dataclasses
import time

import numpy as np
import scipy.linalg
import scipy.sparse
import scipy.sparse.linalg

from simulator.errors import InputError

GMRES_RTOL = 1e-10
# A decay rate of K below this fraction of its largest |eigenvalue| counts as undamped.
UNDAMPED_RTOL = 1e-12
RESTART = 80
MAX_STEPS = 4000


@dataclasses.dataclass(frozen=True, kw_only=True)
class SolveInfo:
    """How one solve went: method, GMRES steps, relative residual, seconds."""

    method: str
    steps: int
    residual: float
    seconds: float


class LindbladSolver:
    """Steady state and resolvent of one Lindblad generator, set up once.

    Parameters
    ----------
    hamiltonian : qutip.Qobj
        H (in any rate unit; results are in the same unit).
    collapse : sequence of qutip.Qobj
        Collapse operators c_k.
    method : {"gmres", "direct"}
        Preconditioned GMRES (default) or sparse LU of the Liouvillian.
    rtol : float
        Relative residual at which GMRES stops.
    """

    def __init__(self, hamiltonian, collapse, *, method="gmres", rtol=GMRES_RTOL):
        if method not in ("gmres", "direct"):
            raise InputError(f"master-equation solver {method!r}; expected 'gmres' or "
                             "'direct'")
        self.hamiltonian, self.collapse = hamiltonian, tuple(collapse)
        self.dims = hamiltonian.dims
        self.d = hamiltonian.shape[0]
        self.rtol = rtol
        h = csr(hamiltonian)
        self.c = [csr(op) for op in self.collapse]
        gamma = sum((c.conj().T @ c for c in self.c),
                    scipy.sparse.csr_matrix((self.d, self.d)))
        self.K = (-1j * h - 0.5 * gamma).tocsr()
        self.KH = self.K.conj().T.tocsr()
        with _one_thread():
            lam, vec, inv = _eigenbasis(self.K.toarray())
        self.scale = float(np.mean(np.abs(lam.real))) or 1.0
        self.method = method
        if method == "gmres" and np.max(lam.real) >= -UNDAMPED_RTOL * np.max(np.abs(lam)):
            self.method = "direct"  # an undamped state of K: the preconditioner is singular
        self.lam, self.vec, self.inv = lam, vec, inv
        self.vec_h, self.inv_h = vec.conj().T, inv.conj().T
        self._direct = None

    def apply(self, x, omega):
        """G_ω(x) = (−iω − L)(x) + σ Tr x for a d × d array ``x``."""
        out = -(self.K @ x) - (self.K @ x.conj().T).conj().T - 1j * omega * x
        for c in self.c:  # c x c† = (c (c x)†)†
            out -= (c @ (c @ x).conj().T).conj().T
        out += (self.scale / self.d) * np.trace(x) * np.eye(self.d)
        return out

    def precondition(self, y, omega):
        """P_ω(y): the exact inverse of the no-jump part of G_ω (see module doc)."""
        inner = self.inv @ y @ self.inv_h
        inner /= -(self.lam[:, None] + 1j * omega + self.lam.conj()[None, :])
        return self.vec @ inner @ self.vec_h

    def steady_state(self):
        """Stationary density matrix (d × d ndarray, unit trace) and :class:`SolveInfo`."""
        sigma = (self.scale / self.d) * np.eye(self.d, dtype=complex)
        rho, info = self.solve(sigma, 0.0)
        rho = 0.5 * (rho + rho.conj().T)
        return rho / np.trace(rho).real, info

    def solve(self, y, omega, guess=None):
        """Solve G_ω(x) = y; returns ``(x, SolveInfo)``.

        ``guess`` is a previous solution (e.g. at the neighbouring frequency)
        used as the starting point of GMRES.
        """
        start = time.perf_counter()
        # Products of a few-hundred-square matrices and small sparse
        # factorisations run several times faster on one BLAS thread than on
        # threads that compete for a loaded machine.
        with _one_thread():
            if self.method == "direct":
                x = self._solve_direct(y, omega)
                steps = 0
            else:
                x, steps = self._solve_gmres(y, omega, guess)
            residual = (np.linalg.norm(self.apply(x, omega) - y)
                        / max(np.linalg.norm(y), 1e-300))
        if not residual < 1e3 * self.rtol:
            raise InputError(
                f"the master-equation solve at ω = {omega:.6g} (rate units) did not converge "
                f"(relative residual {residual:.2e} after {steps} GMRES steps); try "
                "method='direct' on a smaller cutoff, or check that the scenario has a "
                "unique steady state")
        return x, SolveInfo(method=self.method, steps=steps, residual=float(residual),
                            seconds=time.perf_counter() - start)

    def _solve_gmres(self, y, omega, guess):
        d = self.d

        def matvec(v):
            return self.apply(self.precondition(v.reshape(d, d), omega), omega).ravel()

        op = scipy.sparse.linalg.LinearOperator((d * d, d * d), matvec=matvec, dtype=complex)
        z0 = None
        if guess is not None:  # z = P⁻¹ x: the preconditioned variable of the guess
            z0 = self.apply_inverse_preconditioner(guess, omega).ravel()
        steps = [0]

        def count(_):
            steps[0] += 1

        z, _ = scipy.sparse.linalg.gmres(op, y.ravel(), x0=z0, rtol=self.rtol, atol=0.0,
                                         restart=RESTART, maxiter=MAX_STEPS // RESTART,
                                         callback=count, callback_type="pr_norm")
        return self.precondition(z.reshape(d, d), omega), steps[0]

    def apply_inverse_preconditioner(self, x, omega):
        """P_ω⁻¹(x) = −(K + iω) x − x K† (the no-jump part of G_ω)."""
        return -(self.K @ x) - (self.K @ x.conj().T).conj().T - 1j * omega * x

    def _solve_direct(self, y, omega):
        d = self.d
        if self._direct is None:
            self._direct = _liouvillian(self.hamiltonian, self.collapse)
        m = (-1j * omega * scipy.sparse.identity(d * d) - self._direct).tolil()
        # Tr G_ω(x) = (s − iω) Tr x fixes the trace; with it known, row 0
        # (element (0, 0)) is the negative sum of the other diagonal rows, so it
        # is replaced by the trace condition and σ Tr x moves to the right.
        trace = np.trace(y) / (self.scale - 1j * omega)
        rhs = (y - (self.scale / d) * trace * np.eye(d)).ravel(order="F")
        m[0, :] = 0.0
        m[0, np.arange(d) * (d + 1)] = 1.0
        rhs[0] = trace
        x = scipy.sparse.linalg.splu(m.tocsc()).solve(rhs)
        return x.reshape(d, d, order="F")


def csr(op):
    """A QuTiP operator as a scipy CSR matrix."""
    return scipy.sparse.csr_matrix(op.to("csr").data.as_scipy())


def _liouvillian(hamiltonian, collapse):
    """Sparse Liouvillian (column-stacking vectorisation, as QuTiP's)."""
    import qutip

    return scipy.sparse.csr_matrix(
        qutip.liouvillian(hamiltonian, list(collapse)).to("csr").data.as_scipy())


PRECONDITIONER_MAX_CONDITION = 1e10  # eigenvector condition above which K is near-defective


def _eigenbasis(k):
    """Eigenvalues λ, eigenvectors V and V⁻¹ of K; the Schur basis if V is near-singular.

    The basis serves only the preconditioner. Near an exceptional point of K
    (a degenerate or defective no-jump generator) the unitary Schur basis
    with the diagonal of the triangular factor is an approximate inverse, not
    an exact one: it costs GMRES steps, not accuracy, because every solve's
    residual is checked against the full generator (:meth:`LindbladSolver.solve`).
    """
    lam, vec = np.linalg.eig(k)
    if np.all(np.isfinite(lam)) and np.linalg.cond(vec) < PRECONDITIONER_MAX_CONDITION:
        return lam, vec, np.linalg.inv(vec)
    r, vec = scipy.linalg.schur(k, output="complex")  # unitary; diag(R) only approximates
    return np.diag(r).copy(), vec, vec.conj().T


def _one_thread():
    from threadpoolctl import threadpool_limits

    return threadpool_limits(limits=1, user_api="blas")
