"""The resolvent's stand-ins for the pole–residue form, where the eigenvectors fail.

Close to an exceptional point :func:`simulator.model.poles.pole_form` cannot
use partial fractions; these give the same spectra, per group of inputs,
without eigenvectors: the continuous one by batched linear solves
(:meth:`simulator.model.statespace.StateSpace.output_spectrum`), the
integrate-and-dump one exactly through the discrete-time resolvent, and that
of a record that is not one of the model's outputs (a projected, carried if
photocurrent) by the alias sum.
"""

import numpy as np


def columns_of(matrix, columns):
    """The given columns of a matrix (the inputs of one group: of B or D)."""
    return matrix[:, list(columns)]


def block_of(matrix, indices):
    """The square block of a matrix on the given indices (the intensities N of one group)."""
    idx = list(indices)
    return matrix[np.ix_(idx, idx)]


def resolvent_spectra(model, groups):
    """Spectra per group by the resolvent (batched solves): the fallback."""
    from simulator.model.statespace import StateSpace

    parts = [StateSpace(A=model.A, B=columns_of(model.B, g), N=block_of(model.N, g),
                        C=model.C, D=columns_of(model.D, g), states=model.states,
                        inputs=tuple(model.inputs[i] for i in g), outputs=model.outputs)
             for g in groups]
    return lambda omega: np.array([m.output_spectrum(omega) for m in parts])


def sampled_resolvent_spectra(model, groups, period):
    """Integrate-and-dump density of the outputs by the discrete-time resolvent, per group.

    With Φ = e^{AT}, Ψ = ∫₀ᵀ e^{As} ds, Ξ = ∫₀ᵀ (T − s) e^{As} ds (one block
    exponential, Van Loan, IEEE Trans. Autom. Control 23, 395 (1978)) and
    M = Σ Cᵀ + B N Dᵀ, the lag-j covariance of the samples is C Φ^{j−1} Ψ² M/T²
    for j ≥ 1, so S_T(ω) = D N Dᵀ + [C Ξ M + C (e^{−iωT} − Φ)⁻¹ Ψ² M + h.c.]/T:
    every alias, with a linear solve per frequency and no eigenvectors.
    """
    import scipy.linalg

    from simulator.model.statespace import solve_lyapunov

    n = model.A.shape[0]
    block = np.zeros((3 * n, 3 * n))
    block[:n, :n], block[:n, n:2 * n], block[n:2 * n, 2 * n:] = model.A, np.eye(n), np.eye(n)
    e = scipy.linalg.expm(block * period)
    phi, psi, xi = e[:n, :n], e[:n, n:2 * n], e[:n, 2 * n:]
    parts = []
    for g in groups:
        b, n_g, d = columns_of(model.B, g), block_of(model.N, g), columns_of(model.D, g)
        sigma = solve_lyapunov(model.A, -(b @ n_g @ b.T))
        m = sigma @ model.C.T + b @ n_g @ d.T
        k0 = model.C @ xi @ m / period
        parts.append((d @ n_g @ d.T + k0 + k0.T, psi @ psi @ m / period))

    def spectrum(omega):
        u = np.exp(-1j * omega * period)[:, None, None]
        out = []
        for constant, right in parts:
            x = model.C @ np.linalg.solve(u * np.eye(n) - phi, np.broadcast_to(
                right, (omega.size,) + right.shape))
            out.append(constant + x + np.conj(np.swapaxes(x, -1, -2)))
        return np.array(out)

    return spectrum


def aliased_spectra(continuous, white, period, aliases):
    """Integrate-and-dump density by the alias sum Σ_m [S(ω + mω_s) − S_∞] sinc² + S_∞.

    The white part's aliases sum to itself exactly (Σ_m sinc²(x + m) = 1);
    the rest falls at least as 1/ω³ after the sinc² and is summed over
    |m| ≤ ``aliases``, symmetrically.
    """
    ws = 2 * np.pi / period
    m = np.arange(-int(aliases), int(aliases) + 1)

    def spectrum(omega):
        total = np.broadcast_to(white[:, None], (white.shape[0], omega.size)
                                + white.shape[1:]).astype(complex)
        for chunk in np.array_split(m, max(1, m.size // 64)):
            shifted = (omega[:, None] + chunk * ws).reshape(-1)
            s = continuous(shifted) - white[:, None]
            s = s.reshape((s.shape[0], omega.size, chunk.size) + s.shape[2:])
            sinc2 = np.sinc(shifted / ws).reshape(omega.size, chunk.size) ** 2
            total = total + np.einsum("gwm...,wm->gw...", s, sinc2)
        return total

    return spectrum
