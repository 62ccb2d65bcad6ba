"""Wishart draws of any size by the Bartlett decomposition.

The averaged outer product (1/K) Σ_s v_s v_s† of K independent circular
complex Gaussian vectors of covariance Σ is complex Wishart CW(K, Σ)/K
(Goodman, Ann. Math. Statist. 34, 152 (1963)); of real ones, real Wishart.
Drawing it costs O(d²) normals per matrix whatever K: W = L T T† L† with
L L† = Σ and T lower-triangular, |T_ii|² ~ Gamma(K − i) (real: T_ii² ~
χ²(K − i)), standard normals below the diagonal (Bartlett, Proc. R. Soc.
Edinb. 53, 260 (1934), and its complex analogue; recalled from memory).
Fewer degrees of freedom than the dimension give the singular law: T keeps
its first K columns only. :mod:`simulator.analysis.synthetic_channels` draws
averaged spectral matrices with it.
"""

import numpy as np


def _factor(sigma):
    """L with L L† = Σ for positive semidefinite Σ (M, d, d), singular allowed.

    2×2: the lower-triangular (Cholesky) factor in closed form; larger: the
    symmetric root V √Λ from the eigenvalues, rounding's tiny negative ones
    set to zero (a Wishart draw needs any L with L L† = Σ).
    """
    if sigma.shape[-1] != 2:
        values, vectors = np.linalg.eigh(sigma)
        return vectors * np.sqrt(np.maximum(values, 0.0))[:, None, :]
    a = np.sqrt(np.maximum(sigma[:, 0, 0].real, 0.0))
    safe = np.where(a > 0, a, 1.0)
    low = np.where(a > 0, sigma[:, 1, 0] / safe, 0.0)
    d = np.sqrt(np.maximum(sigma[:, 1, 1].real - np.abs(low) ** 2, 0.0))
    out = np.zeros(sigma.shape, dtype=sigma.dtype)
    out[:, 0, 0], out[:, 1, 0], out[:, 1, 1] = a, low, d
    return out


def _bartlett(m, d, dof, diagonal, normal, dtype):
    """Lower-triangular T (m, d, d) with T T† ~ Wishart(dof, identity): diagonal
    ``diagonal(dof − i, m)`` (|T_ii|²), below it ``normal(m)``, columns j < dof only
    (a singular law for dof < d). Drawn diagonal first, then row by row."""
    t = np.zeros((m, d, d), dtype=dtype)
    for i in range(min(d, dof)):
        t[:, i, i] = np.sqrt(diagonal(dof - i, m))
    for i in range(1, d):
        for j in range(min(i, dof)):
            t[:, i, j] = normal(m)
    return t


def complex_wishart(sigma, dof, rng):
    """Draws of the d×d complex Wishart law CW(dof, Σ), one per Σ in ``sigma`` (M, d, d).

    Complex Bartlett decomposition: |T_ii|² ~ Gamma(dof − i), T_ij (i > j)
    standard complex normal; W = L T T† L† with L L† = Σ.
    """
    t = _bartlett(sigma.shape[0], sigma.shape[-1], int(dof), rng.standard_gamma,
                  lambda m: (rng.standard_normal(m) + 1j * rng.standard_normal(m))
                  / np.sqrt(2.0), complex)
    lt = _factor(sigma) @ t
    return lt @ lt.conj().transpose(0, 2, 1)


def real_wishart(cov, dof, rng):
    """Draws of the d×d real Wishart law W(dof, C), one per C in ``cov`` (M, d, d)."""
    t = _bartlett(cov.shape[0], cov.shape[-1], int(dof), rng.chisquare, rng.standard_normal,
                  float)
    lt = _factor(cov).real @ t
    return lt @ lt.transpose(0, 2, 1)
