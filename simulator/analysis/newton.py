"""Newton steps and central differences for small maximum-likelihood fits.

Generic numerics of the likelihood fits in :mod:`simulator.analysis`: the
gradient and Hessian of a scalar function by central differences on one
shared set of evaluations, and a Newton step that falls back to a gradient
step where the Hessian is not positive definite (Nocedal & Wright, Numerical
Optimization, 2nd ed. (Springer, 2006), Secs. 3.3 and 8.1; from memory).
"""

import numpy as np


def precision_step(hess, grad):
    """The Newton step −H⁻¹g, or a gradient step of one unit where H is not positive."""
    try:
        np.linalg.cholesky(hess)
        return -np.linalg.solve(hess, grad)
    except np.linalg.LinAlgError:
        return -grad / max(np.linalg.norm(grad), 1.0)


def derivatives(func, steps, second=True):
    """Gradient and Hessian of ``func`` at 0 by central differences of ``steps`` (one per
    axis; one shared set of 1 + 2n + 2n(n − 1) evaluations); the gradient alone
    (2n) and no Hessian unless ``second``."""
    size = len(steps)
    eye = np.diag(steps)
    up = [func(eye[i]) for i in range(size)]
    down = [func(-eye[i]) for i in range(size)]
    grad = np.array([(up[i] - down[i]) / (2 * steps[i]) for i in range(size)])
    if not second:
        return grad, None
    f0 = func(np.zeros(size))
    hess = np.diag([(up[i] - 2 * f0 + down[i]) / steps[i] ** 2 for i in range(size)])
    for i in range(size):
        for j in range(i):
            hess[i, j] = hess[j, i] = (func(eye[i] + eye[j]) - func(eye[i] - eye[j])
                                       - func(eye[j] - eye[i]) + func(-eye[i] - eye[j])) / (
                                           4 * steps[i] * steps[j])
    return grad, hess
