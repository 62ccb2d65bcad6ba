"""numba kernel of :func:`simulator.model.poles.evaluate`: Σ_k Re/Im of 1/(a − b_k) times coefficients.

Imported only when a spectrum of many points is evaluated (numba costs a
tenth of a second to import; ``inspect`` never needs it). One pass per point
with the coefficients in the inner loop; no parallel loop, so the result
does not depend on threading.
"""

import numba
import numpy as np


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
    n = b_re.size
    m = coef.shape[1]
    acc = np.empty(m)
    for w in range(a_re.size):
        for j in range(m):
            acc[j] = 0.0
        for k in range(n):
            dr = a_re[w] - b_re[k]
            di = a_im[w] - b_im[k]
            d = 1.0 / (dr * dr + di * di)
            fr = dr * d
            fi = -di * d
            for j in range(m):
                acc[j] += fr * coef[k, j] + fi * coef[n + k, j]
        for j in range(m):
            out[w, j] = acc[j]
