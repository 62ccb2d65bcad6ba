"""Constrained search for the best point: a coarse grid, then a bounded local refinement.

Physics-free: the caller hands in an evaluator ``evaluate(values) -> Outcome``
(the objective, to be minimised, and how far each constraint is violated)
and the free parameters as :class:`Coordinate` objects. The search

1. evaluates every point of the coarse grid (the product of the coordinates'
   grids), in one batch so the caller may spread it over processes;
2. refines the best feasible grid points (up to REFINE_STARTS, no two of
   them neighbours) with the bounded Nelder–Mead simplex (Gao and Han,
   Comput. Optim. Appl. 51, 259 (2012), as in ``scipy.optimize.minimize``)
   in the unit coordinates u ∈ [0, 1] of the continuous parameters (linear
   or logarithmic in the value), within the neighbouring grid cells, on
   log(objective) with a penalty that grows with the violation, so an
   infeasible point never wins; a pattern search then polishes the point;
3. measures how flat the optimum is (the objective at ±10 % of each
   continuous parameter) and which constraints are active: a constraint is
   active when a point evaluated next to the optimum has a better objective
   but violates it (relaxing it would move the optimum).

The grid also tells when nothing is feasible, and which constraint (or set
of constraints) excludes every point.
"""

import dataclasses
import itertools
import math

import numpy as np

FLATNESS_STEP = 0.10  # relative change of a parameter for the flatness probes
# A neighbour better than the optimum by more than this fraction marks a constraint
# it violates as active (below it the difference is the refinement's own tolerance).
ACTIVE_TOLERANCE = 1e-3
PENALTY = 50.0  # added to log(objective) at an infeasible point (e^50: never the best)
REFINE_EVALUATIONS = 60  # objective evaluations of the local refinement at most
REFINE_XATOL = 1e-3  # simplex size, in unit coordinates, at which the refinement stops
# The refinement starts from this many of the best feasible grid points, no two of them
# neighbours: an optimum that hugs a ragged constraint boundary has several local minima.
REFINE_STARTS = 3


@dataclasses.dataclass(frozen=True)
class Coordinate:
    """One free parameter: bounds, spacing and coarse grid of the values applied."""

    path: str
    grid: tuple  # coarse-grid values (as applied at the path)
    log: bool = False
    discrete: bool = False  # a list of choices: searched on the grid only
    scale: float = 1.0  # the unit's value: numbers as written = value / scale
    unit: str = ""

    @property
    def low(self):
        """Smallest value allowed."""
        return min(self.grid)

    @property
    def high(self):
        """Largest value allowed."""
        return max(self.grid)

    def value(self, u):
        """The value at unit coordinate ``u`` (0: low bound, 1: high bound)."""
        u = min(max(float(u), 0.0), 1.0)
        if self.log:
            return float(self.low * (self.high / self.low) ** u)
        return float(self.low + (self.high - self.low) * u)

    def unit_coordinate(self, value):
        """The unit coordinate of ``value`` (inverse of :meth:`value`)."""
        if self.high == self.low:
            return 0.0
        if self.log:
            return math.log(value / self.low) / math.log(self.high / self.low)
        return (value - self.low) / (self.high - self.low)


@dataclasses.dataclass(frozen=True)
class Outcome:
    """What the evaluator says about one point.

    ``violations`` maps a constraint name to how far it is violated (> 0) or
    satisfied (≤ 0), in any positive scale of the caller's choice;
    ``quantities`` carries whatever the caller wants reported with the point.
    """

    objective: float
    violations: dict
    quantities: dict = dataclasses.field(default_factory=dict)

    @property
    def violated(self):
        """Names of the violated constraints."""
        return tuple(k for k, v in self.violations.items() if not v <= 0)

    @property
    def feasible(self):
        """Every constraint satisfied and a finite objective."""
        return not self.violated and math.isfinite(self.objective)


@dataclasses.dataclass(frozen=True)
class Probe:
    """The objective with one parameter moved by ±FLATNESS_STEP from the optimum."""

    path: str
    value: float
    outcome: Outcome
    ratio: float  # objective here / objective at the optimum
    inside_bounds: bool


@dataclasses.dataclass(frozen=True)
class Search:
    """Result of :func:`search`; ``best`` is None when no grid point is feasible."""

    coordinates: tuple
    grid_values: list  # coarse points, each a tuple of values
    grid_outcomes: list
    best: tuple | None
    best_outcome: Outcome | None
    best_grid_index: tuple | None
    refined: bool
    evaluations: int
    flatness: tuple = ()
    active: tuple = ()
    at_bounds: tuple = ()  # paths whose optimum sits on a bound
    message: str = ""


def search(evaluate, coordinates, *, evaluate_many=None, refine=True):
    """Best feasible point of ``evaluate`` over ``coordinates``; see the module notes.

    Parameters
    ----------
    evaluate : callable
        ``evaluate(values) -> Outcome`` with ``values`` a tuple, one per coordinate.
    coordinates : sequence of Coordinate
    evaluate_many : callable, optional
        ``evaluate_many(list of values) -> list of Outcome`` for the coarse grid
        (default: ``evaluate`` point by point).
    refine : bool
        Run the local refinement after the grid.
    """
    coordinates = tuple(coordinates)
    shape = tuple(len(c.grid) for c in coordinates)
    indices = list(itertools.product(*(range(n) for n in shape)))
    values = [tuple(c.grid[i] for c, i in zip(coordinates, idx, strict=True))
              for idx in indices]
    outcomes = (evaluate_many or (lambda vs: [evaluate(v) for v in vs]))(values)
    count = len(values)
    feasible = [k for k, o in enumerate(outcomes) if o.feasible]
    if not feasible:
        return Search(coordinates, values, outcomes, None, None, None, False, count,
                      message=infeasible_message(outcomes))
    k = min(feasible, key=lambda j: outcomes[j].objective)
    best, best_outcome, index = values[k], outcomes[k], indices[k]
    seen = {tuple(v): o for v, o in zip(values, outcomes, strict=True)}

    def memo(point):
        key = tuple(point)
        if key not in seen:
            seen[key] = evaluate(key)
        return seen[key]

    refined = False
    continuous = [j for j, c in enumerate(coordinates) if not c.discrete and len(c.grid) > 1]
    if refine and continuous:
        for start in _starts(feasible, outcomes, indices):
            point, outcome = _refine(memo, coordinates, continuous, values[start])
            if outcome.feasible and outcome.objective < best_outcome.objective:
                best, best_outcome, refined = point, outcome, True
    flatness = _flatness(memo, coordinates, continuous, best, best_outcome)
    nearby = [o for v, o in seen.items() if _within_a_cell(coordinates, v, best)]
    active = active_constraints(best_outcome, nearby + [p.outcome for p in flatness])
    at_bounds = tuple(coordinates[j].path for j in continuous
                      if not REFINE_XATOL < coordinates[j].unit_coordinate(best[j])
                      < 1 - REFINE_XATOL)
    return Search(coordinates, values, outcomes, best, best_outcome, index, refined,
                  len(seen), flatness=flatness, active=active, at_bounds=at_bounds)


def _starts(feasible, outcomes, indices):
    """The best feasible grid points, best first, no two of them grid neighbours."""
    chosen = []
    for k in sorted(feasible, key=lambda j: outcomes[j].objective):
        if all(max(abs(a - b) for a, b in zip(indices[k], indices[c], strict=True)) > 1
               for c in chosen):
            chosen.append(k)
        if len(chosen) == REFINE_STARTS:
            break
    return chosen


def _cell(coordinate):
    """Width of one coarse-grid cell in the unit coordinate."""
    return 1.0 / max(len(coordinate.grid) - 1, 1)


def _within_a_cell(coordinates, point, best):
    """True when ``point`` lies within one coarse cell of ``best`` along every coordinate."""
    for c, a, b in zip(coordinates, point, best, strict=True):
        if c.discrete:
            if a != b:
                return False
        elif abs(c.unit_coordinate(a) - c.unit_coordinate(b)) > _cell(c) * (1 + 1e-9):
            return False
    return True


def _refine(memo, coordinates, continuous, start):
    """Bounded Nelder–Mead on log(objective) + penalty within the neighbouring cells."""
    from scipy.optimize import minimize

    u0 = np.array([coordinates[j].unit_coordinate(start[j]) for j in continuous])
    cells = np.array([_cell(coordinates[j]) for j in continuous])
    bounds = [(max(0.0, u - w), min(1.0, u + w)) for u, w in zip(u0, cells, strict=True)]

    def point_of(u):
        point = list(start)
        for j, x in zip(continuous, u, strict=True):
            point[j] = coordinates[j].value(x)
        return tuple(point)

    def cost(u):
        outcome = memo(point_of(u))
        return penalised(outcome)

    # first simplex: half a cell along each coordinate, towards the interior of the box
    simplex = [u0]
    for k, (u, w) in enumerate(zip(u0, cells, strict=True)):
        step = w / 2 if u + w / 2 <= bounds[k][1] else -w / 2
        simplex.append(u0 + step * np.eye(len(u0))[k])
    result = minimize(cost, u0, method="Nelder-Mead", bounds=bounds,
                      options={"initial_simplex": np.array(simplex), "xatol": REFINE_XATOL,
                               "fatol": 1e-6, "maxfev": REFINE_EVALUATIONS})
    u = _pattern_polish(cost, result.x, bounds, cells.min() / 4)
    point = point_of(u)
    return point, memo(point)


def _pattern_polish(cost, u, bounds, step):
    """Pattern search from ``u``: a move along any of the 3ⁿ − 1 compass and diagonal
    directions that lowers the cost is taken, else the step halves, down to REFINE_XATOL.

    A simplex stalls in the corner where two constraint boundaries meet at an acute
    angle (the cusp of a bistable region beside an unstable one); the diagonal
    moves of this search reach into it (Kolda, Lewis and Torczon, SIAM Rev. 45, 385
    (2003), generating set search).
    """
    low, high = np.array([b[0] for b in bounds]), np.array([b[1] for b in bounds])
    dims = len(u)
    directions = [np.array(d, float) for d in itertools.product((-1, 0, 1), repeat=dims)
                  if any(d)] if dims <= 3 else list(np.vstack([np.eye(dims), -np.eye(dims)]))
    u, here = np.asarray(u, float), cost(u)
    budget = REFINE_EVALUATIONS
    while step >= REFINE_XATOL and budget > 0:
        for d in directions:
            trial = np.clip(u + step * d, low, high)
            budget -= 1
            value = cost(trial)
            if value < here:
                u, here = trial, value
                break
        else:
            step /= 2
    return u


def penalised(outcome):
    """log(objective), or a value above every feasible one growing with the violation."""
    if outcome.feasible and outcome.objective > 0:
        return math.log(outcome.objective)
    excess = sum(max(float(v), 0.0) for v in outcome.violations.values()
                 if math.isfinite(v)) + sum(1.0 for v in outcome.violations.values()
                                            if not math.isfinite(v))
    return PENALTY + min(excess, 1e6) + (0.0 if math.isfinite(outcome.objective) else 1.0)


def in_decibels(path):
    """Whether the parameter at ``path`` is a level in decibels (dBm, dB)."""
    return path.endswith(("_dbm", "_db"))


def relative_change(path, value, best, span):
    """Relative change from ``best`` to ``value``: of the power for a level in
    decibels, of the value otherwise (of ``span`` when ``best`` is zero)."""
    if in_decibels(path):
        return 10.0 ** ((value - best) / 10.0) - 1.0
    return (value - best) / (abs(best) if best else span)


def _flatness(memo, coordinates, continuous, best, best_outcome):
    """The objective with each continuous parameter at (1 ± FLATNESS_STEP) × its value.

    A parameter at zero (a detuning on resonance) moves by FLATNESS_STEP of
    its range instead; a level in decibels (a ``_dbm`` or ``_db`` path) moves
    by the decibels of (1 ± FLATNESS_STEP) × the power it stands for.
    """
    probes = []
    for j in continuous:
        c = coordinates[j]
        for sign in (-1.0, 1.0):
            if in_decibels(c.path):
                value = best[j] + 10.0 * math.log10(1.0 + sign * FLATNESS_STEP)
            else:
                step = abs(best[j]) if best[j] != 0 else (c.high - c.low)
                value = best[j] + sign * FLATNESS_STEP * step
            point = tuple(value if k == j else v for k, v in enumerate(best))
            outcome = memo(point)
            with np.errstate(all="ignore"):
                ratio = float(np.float64(outcome.objective) / best_outcome.objective)
            probes.append(Probe(c.path, value, outcome, ratio,
                                c.low <= value <= c.high))
    return tuple(probes)


def active_constraints(best, nearby):
    """Constraints that a better point next to the optimum violates (see module notes)."""
    names = []
    for outcome in nearby:
        if (math.isfinite(outcome.objective)
                and outcome.objective < best.objective * (1 - ACTIVE_TOLERANCE)):
            names += [n for n in outcome.violated if n not in names]
    return tuple(n for n in best.violations if n in names)


def infeasible_message(outcomes):
    """Which constraints exclude every point, in words."""
    count = len(outcomes)
    names = list(dict.fromkeys(n for o in outcomes for n in o.violations))
    excluded = {n: sum(1 for o in outcomes if n in o.violated) for n in names}
    everywhere = [n for n in names if excluded[n] == count]
    if everywhere:
        return (f"no feasible point: {' and '.join(everywhere)} "
                f"exclude{'s' if len(everywhere) == 1 else ''} every one of the {count} "
                "points of the coarse grid")
    shares = ", ".join(f"{n} excludes {excluded[n]}" for n in names if excluded[n])
    return (f"no feasible point: every one of the {count} points of the coarse grid fails "
            f"at least one constraint ({shares})")


def grid_flags(index, shape, masks):
    """Where a grid point sits: on the grid's edge, and beside cells of each mask.

    Parameters
    ----------
    index : tuple of int
    shape : tuple of int
    masks : dict
        name → boolean array of ``shape`` (e.g. unstable or bistable cells).

    Returns
    -------
    dict
        ``on_edge`` (bool: first or last along a dimension with more than one
        point) and, per mask, ``next_to_<name>`` (bool: a cell within one step
        along every dimension, diagonals included, is in the mask).
    """
    on_edge = any(n > 1 and i in (0, n - 1) for i, n in zip(index, shape, strict=True))
    window = tuple(slice(max(i - 1, 0), i + 2) for i in index)
    flags = {"on_edge": bool(on_edge)}
    for name, mask in masks.items():
        around = np.array(mask, dtype=bool)[window].copy()
        here = tuple(i - s.start for i, s in zip(index, window, strict=True))
        around[here] = False
        flags[f"next_to_{name}"] = bool(around.any())
    return flags
