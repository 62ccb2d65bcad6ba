"""numba kernel of :func:`simulator.model.poles.evaluate`: sums over poles of 1/(a − b_k).

Imported only when a spectrum of many points is evaluated (numba costs a
tenth of a second to import; ``inspect`` never needs it). One pass per point
with the coefficients in the inner loop; no parallel loop, so the result
does not depend on threading.
"""

import numba
import numpy as np


@numba.njit(cache=True, nogil=True, fastmath=False)
def _accumulate(acc, a_re, a_im, b_re, b_im, coef):
    """acc[j] += Σ_k Re f · coef[k, j] + Im f · coef[n + k, j], f = 1/(a − b_k), one point a."""
    n = b_re.size
    for k in range(n):
        dr = a_re - b_re[k]
        di = a_im - b_im[k]
        d = 1.0 / (dr * dr + di * di)
        fr = dr * d
        fi = -di * d
        for j in range(acc.size):
            acc[j] += fr * coef[k, j] + fi * coef[n + k, j]


@numba.njit(cache=True, nogil=True, fastmath=False)
def pole_sum(a_re, a_im, b_re, b_im, coef, out):
    """out[w, j] = Σ_k Re f · coef[k, j] + Im f · coef[n + k, j], f = 1/(a_w − b_k).

    Parameters
    ----------
    a_re, a_im : (W,) float64
        The argument a(ω) (−iω, or e^{−iωT} for samples).
    b_re, b_im : (n,) float64
        The poles.
    coef : (2n, M) float64
        Coefficients of Re f (rows 0..n−1) and Im f (rows n..2n−1).
    out : (W, M) float64
        Receives the sums.
    """
    m = coef.shape[1]
    acc = np.empty(m)
    for w in range(a_re.size):
        for j in range(m):
            acc[j] = 0.0
        _accumulate(acc, a_re[w], a_im[w], b_re, b_im, coef)
        for j in range(m):
            out[w, j] = acc[j]


@numba.njit(cache=True, nogil=True, fastmath=False)
def pole_sum_hermitian(a_re, a_im, b_re, b_im, coef, white, upper_i, upper_j, out):
    """:func:`pole_sum` plus ``white``, written straight into Hermitian matrices.

    ``coef`` and ``white`` (M,) are in the packed layout of
    :func:`simulator.model.poles._pack` per group (M = groups × p²: the
    diagonal, then the real and the imaginary parts of the upper triangle
    ``upper_i``, ``upper_j``); ``out`` (groups, W, p, p, 2) float64 is the
    view of the complex result.
    """
    m = coef.shape[1]
    groups, p = out.shape[0], out.shape[2]
    k_up = upper_i.size
    acc = np.empty(m)
    for w in range(a_re.size):
        for j in range(m):
            acc[j] = white[j]
        _accumulate(acc, a_re[w], a_im[w], b_re, b_im, coef)
        for g in range(groups):
            base = g * p * p
            for i in range(p):
                out[g, w, i, i, 0] = acc[base + i]
                out[g, w, i, i, 1] = 0.0
            for u in range(k_up):
                re = acc[base + p + u]
                im = acc[base + p + k_up + u]
                out[g, w, upper_i[u], upper_j[u], 0] = re
                out[g, w, upper_i[u], upper_j[u], 1] = im
                out[g, w, upper_j[u], upper_i[u], 0] = re
                out[g, w, upper_j[u], upper_i[u], 1] = -im
