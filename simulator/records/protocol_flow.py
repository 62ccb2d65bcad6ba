"""The exact mean and covariance of a schedule's state, segment by segment.

Within a segment the linear model dx = A x dt + B dW is fixed: the mean
obeys dm/dt = A m and the covariance the Lyapunov differential equation
dV/dt = A V + V Aᵀ + B N Bᵀ, solved in closed form about the steady state
for a stable segment (:func:`covariance_flow`) and by Van Loan's block
exponential for any A (:func:`covariance_flow_van_loan`). The segments of a
record (:mod:`simulator.records.protocol`) chain these flows.

References
----------
Van Loan, IEEE Trans. Autom. Control 23, 395 (1978). Gardiner, Stochastic
Methods, 4th ed. (Springer, 2009), Sec. 4.5.6.
"""

import numpy as np
import scipy.linalg

from simulator.records.discretize import van_loan


def covariance_flow(a, steady, v0, t):
    """V(t) = e^{At}(V₀ − V∞)e^{Aᵀt} + V∞ for a stable A; also returns e^{At}."""
    e = scipy.linalg.expm(a * t)
    v = e @ (v0 - steady) @ e.T + steady
    return 0.5 * (v + v.T), e


def segment_flow(seg, v0, t):
    """Covariance after ``t`` seconds of segment ``seg`` from ``v0``; also returns e^{At}.

    The closed form about the steady state for a stable segment, Van Loan's
    block exponential for an unstable one (no steady state to expand about).
    """
    model = seg.chain.model
    if seg.system.stable:
        return covariance_flow(model.A, seg.discrete.state_covariance, v0, t)
    return covariance_flow_van_loan(model.A, model.diffusion, v0, t)


def covariance_flow_van_loan(a, diffusion, v0, t):
    """V(t) = e^{At} V₀ e^{Aᵀt} + ∫₀ᵗ e^{As} D e^{Aᵀs} ds for any A (Van Loan 1978).

    Φ and the integral from :func:`simulator.records.discretize.van_loan`, the
    block exponential the record's own discretisation uses.
    """
    phi, q = van_loan(np.asarray(a, dtype=float), diffusion, t)
    v = phi @ v0 @ phi.T + q
    return 0.5 * (v + v.T), phi


def segment_starts(segments, mean, cov, fs):
    """Yield ``(segment, mean, covariance)`` at each segment's first sample, kick included."""
    for seg in segments:
        mean = mean.copy()
        mean[seg.kick_index] += seg.kick
        yield seg, mean, cov
        cov, e = segment_flow(seg, cov, seg.n_samples / fs)
        mean = e @ mean


def state_moments(plan, samples):
    """Exact mean (k, n) and covariance (k, n, n) of the state at the given sample indices.

    The state at sample s is the one at the start of its interval, time s/fs
    (the rows of the stored mechanical quadratures).
    """
    samples = np.asarray(samples, dtype=np.int64)
    fs = plan.sample_rate_hz
    n = len(plan.start_mean)
    means, covs = np.empty((len(samples), n)), np.empty((len(samples), n, n))
    for seg, mean, cov in segment_starts(plan.segments, plan.start_mean,
                                         plan.start_covariance, fs):
        inside = np.flatnonzero((samples >= seg.first) & (samples < seg.first + seg.n_samples))
        for i in inside:
            covs[i], e = segment_flow(seg, cov, (samples[i] - seg.first) / fs)
            means[i] = e @ mean
    return means, covs
