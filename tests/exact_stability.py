"""Stability decided in exact rational arithmetic, with no eigenvalues.

The characteristic polynomial det(sI − A) comes from the Faddeev–LeVerrier
recursion (common practice; e.g. Gantmacher, The Theory of Matrices (1959)),
evaluated in fractions, and the Routh–Hurwitz criterion (E. J. Routh, A
Treatise on the Stability of a Given State of Motion (1877); A. Hurwitz,
Math. Ann. 46, 273 (1895)) is applied to it exactly: an independent check of
the eigenvalue verdict of :func:`simulator.model.stability.stability` at any
damping ratio the floats of A can hold.
"""

from fractions import Fraction


def characteristic_polynomial(a):
    """Coefficients [1, c1, ..., cn] of det(sI − A), exactly (Faddeev–LeVerrier)."""
    n = len(a)
    a = [[Fraction(float(x)) for x in row] for row in a]
    m = [[Fraction(0)] * n for _ in range(n)]
    coeffs = [Fraction(1)]
    for k in range(1, n + 1):
        # M_k = A M_{k-1} + c_{k-1} I ;  c_k = −tr(A M_k)/k
        m = [[sum(a[i][j] * m[j][col] for j in range(n)) + (coeffs[-1] if i == col else 0)
              for col in range(n)] for i in range(n)]
        am = [[sum(a[i][j] * m[j][col] for j in range(n)) for col in range(n)]
              for i in range(n)]
        coeffs.append(-sum(am[i][i] for i in range(n)) / k)
    return coeffs


def routh_hurwitz_stable(coeffs):
    """True when every root has a negative real part; None when a zero pivot
    makes the case marginal (the exact-arithmetic test cannot decide)."""
    rows = [coeffs[0::2], coeffs[1::2]]
    width = len(rows[0])
    rows = [r + [Fraction(0)] * (width - len(r)) for r in rows]
    while len(rows) < len(coeffs):
        up, low = rows[-2], rows[-1]
        if low[0] == 0:
            return None
        new = [(low[0] * up[i + 1] - up[0] * low[i + 1]) / low[0] for i in range(width - 1)]
        rows.append(new + [Fraction(0)])
    first = [r[0] for r in rows]
    if any(x == 0 for x in first):
        return None
    return all(x > 0 for x in first)
