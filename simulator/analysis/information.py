"""Whittle Fisher information of the recorded samples, for many parameters at once.

The record is p real channels (I and Q of an iq record; the one photocurrent
of a homodyne or if record) sampled by integrate-and-dump at rate fs: a
stationary Gaussian vector sequence whose spectral matrix S(f) on |f| < fs/2
is the continuous one aliased and multiplied by sinc²(f/fs), everything the
chain adds included. Its Fisher information per unit time is

    F_ij = ½ ∫_{−fs/2}^{fs/2} df tr[S⁻¹ ∂_i S S⁻¹ ∂_j S] = ∫_0^{fs/2} df Re tr[...]

(Whittle, Ark. Mat. 2, 423 (1953)); the integrand is even in f because the
channels are real (S(−f) = S(f)*). S comes in closed form from the pole–
residue form of the chain's model (:mod:`simulator.model.poles`): every
alias is summed exactly, and one evaluation costs a few microseconds per
hundred points. ∂S is the central difference of the forms of the model
rebuilt a small step either side of θ (the operating point re-solved), so
every dependence is included. The integral is the trapezoidal rule on a grid
that resolves every line of the sampled spectrum (:func:`record_grid`).
"""

import dataclasses

import numpy as np

from simulator.errors import InputError, ScenarioError

POINTS_PER_DECADE = 32  # log-spaced offsets around each line (trapezoid error < 1e-3)
CLOSEST = 1e-2  # smallest offset from a line centre, in its half-widths
COARSE_POINTS = 201  # uniform points across the band
# aliases either side when the resolvent stands in for the poles (near an exceptional
# point): truncation ~aliases⁻³ ≈ 1e-5 of S, smooth in θ, far below what a bound needs
FALLBACK_ALIASES = 40


def steps(scenario, path):
    """Scenarios a small step above and below the parameter at ``path``, and the span.

    The step is 10⁻⁴ of the value (10⁻⁶ at 0, or where 10⁻⁴ of the value is
    below the smallest normal float and would be lost). At a boundary of the
    admissible range (an occupation of 0, an efficiency of 1) the scenario
    itself stands in for the side that is not allowed (a one-sided step).
    """
    value = scenario.get(path)
    if not isinstance(value, (int, float)) or isinstance(value, bool):
        raise InputError(f"{path} = {value!r}: the Fisher information needs a numeric "
                         "parameter that is set in the scenario")
    h = 1e-4 * abs(value)
    if h < np.finfo(float).tiny:
        h = 1e-6
    try:
        up, hi = scenario.replace(path, value + h), h
    except ScenarioError:
        up, hi = scenario, 0.0
    try:
        down, lo = scenario.replace(path, value - h), h
    except ScenarioError:
        down, lo = scenario, 0.0
    return up, down, hi + lo


def derivative(evaluate, scenario, path):
    """d evaluate(scenario)/d(parameter at path) by the difference of :func:`steps`."""
    up, down, span = steps(scenario, path)
    return (evaluate(up) - evaluate(down)) / span


class SteppedModels:
    """Models of a System's scenario a small step either side of each parameter, built once.

    The Fisher information (spectra of the stepped records) and the occupation
    gradient (stepped drift and diffusion) of
    :mod:`simulator.analysis.feasibility` share them: each stepped model is
    built once per bound, whatever asks for it.
    """

    def __init__(self, system):
        self.system = system
        self._steps = {}
        self._systems = {id(system.scenario): system}

    def steps(self, path):
        """:func:`steps` of the system's scenario, kept."""
        if path not in self._steps:
            self._steps[path] = steps(self.system.scenario, path)
        return self._steps[path]

    def system_of(self, scenario):
        """The base System, or the model and chain of a stepped scenario (kept alive).

        A stepped scenario gets its operating point, model and chain only: its
        stability verdict is not needed for a derivative.
        """
        from simulator.model.chain import detection_chain
        from simulator.model.detected_tone import detected_parts
        from simulator.model.operating_point import operating_point
        from simulator.model.optomechanics import linear_model

        key = id(scenario)
        if key not in self._systems:
            point = operating_point(scenario)
            model = linear_model(scenario, point)
            # the receiver demodulates detection.tone, in the stepped models as in the base
            chain = detection_chain(scenario, *detected_parts(scenario, point, model))
            self._systems[key] = _Built(point=point, model=model, chain=chain)
        return self._systems[key]

    def record_model(self, scenario):
        """The record's model (the detection chain's) of the base or a stepped scenario."""
        return self.system_of(scenario).chain.model


@dataclasses.dataclass(frozen=True)
class _Built:
    """The operating point, linear model and detection chain of a stepped scenario."""

    point: object
    model: object
    chain: object


def fisher_blocks(model_of, scenario, groups, omega, *, carrier_rad_s=None,
                  sample_rate_hz=None, steps_of=None, report=None):
    """Fisher information per unit time for each group of parameter paths.

    Parameters
    ----------
    model_of : callable
        ``model_of(scenario)`` → the record's :class:`~simulator.model.statespace.StateSpace`.
    scenario : Scenario
    groups : sequence of sequences of str
        Parameter paths estimated jointly; a path shared by several groups is
        differentiated once.
    omega : ndarray or None
        Angular frequencies (rad/s) of the record; only |ω| is used (the
        integrand is even) and, with ``sample_rate_hz``, only |ω| ≤ π fs.
        None: :func:`record_grid` of the record's form up to π fs (sampled
        records only).
    carrier_rad_s : float, optional
        For a real record at an intermediate frequency θ (the "if" receiver):
        the model's two outputs are the envelope u of r = e^{iθt}u + c.c., and
        the information is that of the one real photocurrent, image band
        included (:meth:`simulator.model.poles.PoleForm.real_carrier`).
    sample_rate_hz : float, optional
        The information of the integrate-and-dump samples at this rate;
        default the continuous record (no sinc², no aliasing, no band limit).
    steps_of : callable, optional
        ``steps_of(path)`` → :func:`steps` of the scenario, for a caller that
        shares the stepped scenarios (and their models) with other derivatives.
    report : dict, optional
        Receives ``"method"``: ``"pole-residue"``, or the reason the
        resolvent was used instead (an ill-conditioned eigenvector basis).

    Returns
    -------
    list of ndarray
        One (k, k) matrix per group, in 1/(s · unit_i · unit_j).
    """
    from simulator.model.poles import channel_form

    def form_of(model):
        return channel_form(model, carrier_rad_s=carrier_rad_s, sample_rate_hz=sample_rate_hz,
                            aliases=FALLBACK_ALIASES)

    steps_of = steps_of or (lambda path: steps(scenario, path))
    paths = list(dict.fromkeys(p for group in groups for p in group))
    base = form_of(model_of(scenario))
    if omega is None:
        if sample_rate_hz is None:
            raise InputError("a frequency grid is needed for the continuous record")
        omega = record_grid(base, np.pi * float(sample_rate_hz))
    w = _one_sided(omega, sample_rate_hz)
    forms = [base]
    s = base.spectrum(w)[0]
    changes = []
    for path in paths:
        up_s, down_s, span = steps_of(path)
        up, down = form_of(model_of(up_s)), form_of(model_of(down_s))
        forms += [up, down]
        changes.append((up.spectrum(w)[0] - down.spectrum(w)[0]) / span)
    if report is not None:
        report["method"] = next((f.method for f in forms if not f.exact), base.method)
    x = _inverse(s)[None] @ np.array(changes).reshape((len(paths),) + s.shape)
    weights = _trapezoid_weights(w / (2 * np.pi))
    where = {p: k for k, p in enumerate(paths)}
    # ∫_{f>0} Re tr(X_i X_j) df, X = S⁻¹ ∂S (½ of the integral over both signs of f),
    # as one product over frequencies and matrix entries: tr(X_i X_j) = Σ_ab X_i,ab X_j,ba
    flat = x.reshape(len(paths), -1)
    flat_t = np.swapaxes(x, -1, -2).reshape(len(paths), -1)
    per_entry = np.repeat(weights, s.shape[-1] ** 2)
    full = ((flat * per_entry) @ flat_t.T).real
    return [full[np.ix_(idx, idx)] for idx in ([where[p] for p in g] for g in groups)]


def _inverse(s):
    """Inverses of a stack of 1×1 or 2×2 (closed form) or larger (LAPACK) matrices."""
    p = s.shape[-1]
    if p == 1:
        return 1.0 / s
    if p == 2:
        a, b, c, d = s[..., 0, 0], s[..., 0, 1], s[..., 1, 0], s[..., 1, 1]
        det = a * d - b * c
        return np.stack([np.stack([d, -b], -1), np.stack([-c, a], -1)], -2) / det[..., None, None]
    return np.linalg.inv(s)


def _one_sided(omega, sample_rate_hz):
    """Sorted unique |ω|, within the band |ω| ≤ π fs when sampled."""
    w = np.unique(np.abs(np.asarray(omega, dtype=float).reshape(-1)))
    if sample_rate_hz is not None:
        w = w[w <= np.pi * float(sample_rate_hz)]
    if w.size < 2:
        raise InputError(f"frequency grid of {w.size} point(s) within the record's band; "
                         "expected at least two to integrate over")
    return w


def _trapezoid_weights(f):
    weights = np.zeros_like(f)
    weights[1:] += np.diff(f) / 2
    weights[:-1] += np.diff(f) / 2
    return weights


def record_grid(form, top_rad_s, *, points_per_decade=POINTS_PER_DECADE, closest=CLOSEST,
                coarse_points=COARSE_POINTS):
    """Angular frequencies 0 ≤ ω ≤ ``top_rad_s`` resolving every line of ``form``.

    Around each line (centre c, half-width γ from :meth:`PoleForm.lines`,
    folded to |c| since the integrand is even) offsets γ·10^k from
    ``closest``·γ out to the band on both sides, ``points_per_decade``
    apart; a uniform grid of ``coarse_points`` over the band.
    """
    centres, widths = form.lines()
    grids = [np.linspace(0.0, top_rad_s, int(coarse_points))]
    for centre, gamma in zip(np.abs(centres), widths, strict=True):
        gamma = max(float(gamma), top_rad_s * 1e-15)
        with np.errstate(divide="ignore"):  # an infinite width (a flat term): one decade
            decades = max(np.log10(top_rad_s / gamma) - np.log10(closest), 1.0)
        offsets = gamma * np.logspace(np.log10(closest), np.log10(closest) + decades,
                                      int(np.ceil(decades * points_per_decade)))
        grids.append(centre + np.concatenate([-offsets[::-1], [0.0], offsets]))
    w = np.unique(np.concatenate(grids))
    return w[(w >= 0.0) & (w <= top_rad_s)]
