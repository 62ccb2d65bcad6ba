"""Starting values, resolvability and tied areas for the reference sideband fit.

The helpers :func:`simulator.analysis.thermometry.measure_occupation` uses to
fit the Lorentzian sideband model (θ = floor, centre, width, c_S, c_AS) so
that it cannot stray: a start from the nominal centre and width with the
linear parameters by least squares, and an area the record cannot resolve
tied to the other by the weak-coupling relation instead of fitted, and a
lineshape the record cannot resolve held at its nominal centre and width
(docs/analysis.md, "A fit that cannot stray").
"""

import dataclasses

import numpy as np

from simulator.analysis.fitting import fisher_information, fit_whittle
from simulator.linear.sidebands import cavity_response

MIN_LINE_ERRORS = 3.0  # an area expected below this many standard errors is tied (ours)
# below this many expected standard errors on the stronger area, centre and width are
# held (our choice: trials of a microwave drum gave frequency pulls 1.3 wide at about
# 3.5 and unit width at about 7; tests/test_reference_microwave.py)
MIN_SHAPE_ERRORS = 5.0
MIN_DENOMINATOR_ERRORS = 4.0  # c_S − c_AS expected this many standard errors (our choice)
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


@dataclasses.dataclass(frozen=True)
class Plan:
    """What the record can resolve, decided before the fit (see :func:`plan`)."""

    tied: int | None  # index of an area tied to the other (3 Stokes, 4 anti-Stokes)
    shape_fixed: bool  # centre and width held at the nominal values
    asymmetry: bool = True  # c_S − c_AS expected far enough from zero for the ratio


def nominal(cal, start, per_quantum):
    """θ the calibration predicts: floor of ``start``, nominal centre and width, and
    areas of the occupation n = (Γm n_th + A+)/γ (weak-coupling rate balance)."""
    floor, centre, width = start[:3]
    n = (cal.mechanical_linewidth_hz * cal.bath_occupation + cal.stokes_rate_hz()) / width
    return np.array([floor, centre, width, (n + 1) * per_quantum, n * per_quantum])


def plan(model, theta, f, averages):
    """Which parameters the record resolves, from the expected information at ``theta``.

    Decided from the Cramér–Rao errors of the areas at the nominal parameters
    (:func:`nominal`), not from fitted values, so the choice does not select
    on the noise of the record:

    - an area expected below MIN_LINE_ERRORS standard errors (a sideband the
      cavity filters into the floor, as the Stokes line of a
      resolved-sideband microwave circuit) is a flat direction of the
      likelihood. Left free, it soaks up noise bumps on its side (areas of
      thousands of quanta behind a filter of 1e-4) and, through the shared
      centre and width, drags those too: it is tied to the other;
    - when even the stronger line is expected below MIN_SHAPE_ERRORS, centre
      and width are not measurable either: a free fit locks onto noise
      bumps anywhere in the band (its frequency scatters by kHz with errors
      of a hundred Hz). They are held at the nominal values, the model is
      then linear in what is left, and the areas are unbiased with honest
      errors; centre, width and what needs them are not estimated;
    - n = c_AS/(c_S − c_AS) is estimated only when the difference is expected
      MIN_DENOMINATOR_ERRORS standard errors from zero: linear propagation of
      a ratio whose denominator comes near zero fails (heavy tails, no finite
      variance: Marsaglia, J. Stat. Softw. 16(4) (2006), ratios of normal
      variables; cited from memory). Deciding it from the fitted difference
      instead would keep only the records whose noise pushed the difference
      up, and bias the kept ratios low.
    """
    info = fisher_information(model, theta, f, averages, jacobian=model.jacobian)
    try:
        errors = np.sqrt(np.diag(np.linalg.inv(info)))
    except np.linalg.LinAlgError:
        return Plan(tied=None, shape_fixed=True, asymmetry=False)
    significance = {i: theta[i] / errors[i] for i in (3, 4)}
    weak = min(significance, key=significance.get)
    tied = weak if significance[weak] < MIN_LINE_ERRORS else None
    diff = np.zeros(theta.size)
    diff[3:5] = 1.0, -1.0
    spread = np.sqrt(max(diff @ np.linalg.inv(info) @ diff, 0.0))
    return Plan(tied=tied, shape_fixed=max(significance.values()) < MIN_SHAPE_ERRORS,
                asymmetry=tied is None and theta[3] - theta[4] > MIN_DENOMINATOR_ERRORS * spread)


def fit_planned(model, f, p, averages, initial, lower, upper, planned, per_quantum, names):
    """Whittle fit of the parameters the plan leaves free; covariance of all five.

    A tied area follows the weak-coupling relation c_S = c_AS + one quantum's
    area; fixed centre and width keep their starting values. θ = A θ_free +
    shift, and the covariance is mapped back as A C Aᵀ (zero for what is not
    estimated).
    """
    fixed = {1, 2} if planned.shape_fixed else set()
    if planned.tied is None and not fixed:
        return fit_whittle(model, f, p, averages, initial, names=names, lower=lower,
                           upper=upper, jacobian=model.jacobian)
    free = [i for i in range(len(names)) if i != planned.tied and i not in fixed]
    expand = np.eye(len(names))[:, free]
    shift = np.zeros(len(names))
    shift[list(fixed)] = [initial[i] for i in sorted(fixed)]
    if planned.tied is not None:
        expand[planned.tied, free.index(7 - planned.tied)] = 1.0  # 3 <-> 4
        shift[planned.tied] = per_quantum if planned.tied == 3 else -per_quantum

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
