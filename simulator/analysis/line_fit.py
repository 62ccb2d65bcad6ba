"""Starting values, resolvability and tied areas for the reference sideband fit.

The helpers :func:`simulator.analysis.thermometry.measure_occupation` uses to
fit the Lorentzian sideband model (θ = floor, centre, width, c_S, c_AS) so
that it cannot stray: a start from the nominal centre and width with the
linear parameters by least squares, and an area the record cannot resolve
tied to the other by the weak-coupling relation instead of fitted
(docs/analysis.md, "A fit that cannot stray").
"""

import dataclasses

import numpy as np

from simulator.analysis.fitting import fisher_information, fit_whittle
from simulator.linear.sidebands import cavity_response

MIN_LINE_ERRORS = 3.0  # an area expected below this many standard errors is tied (ours)
MIN_START_QUANTA = 1e-3  # smallest starting area, in quanta: positive, inside the bounds


def initial(model, cal, centre, width, f, p):
    """Start of the Lorentzian fit: the nominal centre and width, the rest by least squares.

    Given centre and width the model is linear in the floor and the two
    areas, so they start from the ordinary least-squares solution, its
    columns the model's own derivatives. The side the cavity filters more
    (at ∓Ω) is measured worse, so its area starts from the other side's by
    c_S − c_AS = one quantum's area (weak coupling); an area least squares
    puts at or below zero (a line buried in the noise) starts from the
    occupation the calibration predicts, n = (Γm n_th + A+)/γ. Starting areas
    summed from the excess over the band instead are dominated by the noise
    of its many bins when the line is weak.
    """
    theta = np.array([0.0, centre, width, 0.0, 0.0])
    _, jac = model.jacobian(f, theta)
    floor, c_s, c_as = np.linalg.lstsq(jac[[0, 3, 4]].T, p, rcond=None)[0]
    per_quantum = cal.area_per_quantum()
    nominal = (cal.mechanical_linewidth_hz * cal.bath_occupation + cal.stokes_rate_hz()) / width
    filt = cavity_response(np.array([-centre, centre]), cal.cavity_linewidth_hz,
                          cal.detuning_hz)
    if filt[0] < filt[1]:
        c_as = c_as if c_as > 0 else nominal * per_quantum
        c_s = c_as + per_quantum
    else:
        c_s = c_s if c_s > per_quantum else (nominal + 1) * per_quantum
        c_as = max(c_s - per_quantum, MIN_START_QUANTA * per_quantum)
    return [floor if floor > 0 else float(np.median(p)), centre, width, c_s, c_as]


def unresolved_area(model, theta, f, averages):
    """Index of an area the record cannot resolve (3 Stokes, 4 anti-Stokes), or None.

    Decided before the fit from the expected information at the start
    (Cramér–Rao bound), not from the fitted value: an area expected below
    MIN_LINE_ERRORS standard errors (a sideband the cavity filters into the
    floor, as the Stokes line of a resolved-sideband microwave circuit) is a
    flat direction of the likelihood. Left free, it soaks up noise bumps on
    its side (areas of thousands of quanta behind a filter of 1e-4) and,
    through the shared centre and width, drags those too.
    """
    info = fisher_information(model, theta, f, averages, jacobian=model.jacobian)
    try:
        errors = np.sqrt(np.diag(np.linalg.inv(info)))
    except np.linalg.LinAlgError:
        return None
    weak = min((3, 4), key=lambda i: theta[i] / errors[i])
    return weak if theta[weak] < MIN_LINE_ERRORS * errors[weak] else None


def fit_tied(model, f, p, averages, initial, lower, upper, tied, per_quantum, names):
    """Whittle fit of the five parameters; an unresolved area ``tied`` to the other.

    A tied area follows the weak-coupling relation c_S = c_AS + one quantum's
    area; the fit then has four free parameters and the covariance is mapped
    back through that relation (the tied area is not an estimate).
    """
    if tied is None:
        return fit_whittle(model, f, p, averages, initial, names=names, lower=lower,
                           upper=upper, jacobian=model.jacobian)
    free = [i for i in range(len(names)) if i != tied]
    other = 7 - tied  # 3 <-> 4
    offset = per_quantum if tied == 3 else -per_quantum
    expand = np.eye(len(names))[:, free]  # θ = A θ_free + shift
    expand[tied, free.index(other)] = 1.0
    shift = np.zeros(len(names))
    shift[tied] = offset

    def reduced(x, theta):
        return model(x, expand @ theta + shift)

    def reduced_jacobian(x, theta):
        s, jac = model.jacobian(x, expand @ theta + shift)
        return s, expand.T @ jac

    fit = fit_whittle(reduced, f, p, averages, [initial[i] for i in free],
                      names=[names[i] for i in free], lower=[lower[i] for i in free],
                      upper=[upper[i] for i in free], jacobian=reduced_jacobian)
    return dataclasses.replace(fit, names=tuple(names), values=expand @ fit.values + shift,
                               covariance=expand @ fit.covariance @ expand.T)
