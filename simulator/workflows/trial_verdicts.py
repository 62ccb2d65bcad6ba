"""Statistical verdicts of a validation run: bias, pull width and coverage as tests.

For one quantity, N trials give estimates x_i with stated uncertainties σ_i
and pulls z_i = (x_i − truth)/σ_i. An unbiased estimator with honest
uncertainties has E[x] = truth, pulls of unit standard deviation, and the
fractions of |z| ≤ 1 and ≤ 2 equal to the Gaussian contents 68.27 % and
95.45 %. Each is checked by a two-sided test at level α:

- bias: t = bias / (s/√N), s the sample standard deviation of the estimates,
  has Student's t distribution with N − 1 degrees of freedom when the
  estimates are Gaussian; the bias is significant when |t| exceeds the
  1 − α/2 quantile.
- pull width: (N − 1) w²/σ² is χ² with N − 1 degrees of freedom for the
  sample standard deviation w of N Gaussian pulls of width σ, so the exact
  interval [w √((N−1)/χ²_{1−α/2}), w √((N−1)/χ²_{α/2})] holds σ with
  probability 1 − α; the width is off when that interval excludes 1
  (the interval for a Gaussian's variance: Cowan, Statistical Data
  Analysis (Oxford, 1998), Ch. 9, cited from memory).
- coverage: of N pulls, k fall inside ±1 (±2); the Clopper–Pearson interval
  (Clopper & Pearson, Biometrika 26, 404 (1934)), from the beta quantiles
  B(α/2; k, N − k + 1) and B(1 − α/2; k + 1, N − k), holds the true fraction
  with probability at least 1 − α; the coverage is off when it excludes the
  Gaussian content.

Several quantities are reported together, so each kind of check is run at
family-wise level FAMILY_LEVEL across the m quantities that have a truth:
α = FAMILY_LEVEL/m for each (Bonferroni correction, common practice).
With four kinds of checks an estimator without fault
is flagged somewhere with probability at most 4 × FAMILY_LEVEL.
"""

import dataclasses
import math

import numpy as np
import scipy.stats

FAMILY_LEVEL = 0.01  # family-wise false-alarm probability of each kind of check (our choice)
GAUSSIAN_CONTENT = {1: 0.682689492137, 2: 0.954499736104}  # P(|z| ≤ k), z standard normal


@dataclasses.dataclass(frozen=True, kw_only=True)
class Checks:
    """The test statistics, their thresholds and the verdict words of one quantity."""

    level: float  # per-quantity two-sided level α
    bias_t: float  # bias / standard error
    bias_threshold: float  # |t| beyond this is significant
    pull_width_interval: tuple  # (low, high) at confidence 1 − α
    coverage_1sigma_interval: tuple
    coverage_2sigma_interval: tuple
    verdict: str


def level_for(quantities):
    """Per-quantity level α = FAMILY_LEVEL/m, m ≥ 1 quantities with a truth (Bonferroni)."""
    return FAMILY_LEVEL / max(int(quantities), 1)


def bias_threshold(n, level):
    """Two-sided Student-t critical value of t = bias/(s/√n), n − 1 degrees of freedom."""
    return float(scipy.stats.t.ppf(1 - level / 2, n - 1))


def width_interval(width, n, level):
    """Exact (χ²) confidence interval of a Gaussian's σ from the sample s.d. of n values."""
    dof = n - 1
    return (float(width * math.sqrt(dof / scipy.stats.chi2.ppf(1 - level / 2, dof))),
            float(width * math.sqrt(dof / scipy.stats.chi2.ppf(level / 2, dof))))


def coverage_interval(inside, n, level):
    """Clopper–Pearson interval of a binomial fraction: ``inside`` of ``n``."""
    low = 0.0 if inside == 0 else scipy.stats.beta.ppf(level / 2, inside, n - inside + 1)
    high = 1.0 if inside == n else scipy.stats.beta.ppf(1 - level / 2, inside + 1, n - inside)
    return float(low), float(high)


def checks(estimates, uncertainties, truth, level):
    """Run the three checks on finite ``estimates`` with ``uncertainties`` (n ≥ 2)."""
    n = estimates.size
    pulls = (estimates - truth) / uncertainties
    bias = float(estimates.mean() - truth)
    error = float(estimates.std(ddof=1)) / math.sqrt(n)
    threshold = bias_threshold(n, level)
    width = float(pulls.std(ddof=1))
    widths = width_interval(width, n, level)
    words = []
    if error == 0:  # identical estimates: any bias is exact
        t = math.copysign(math.inf, bias) if bias else 0.0
        if bias:
            words.append(f"BIASED: every trial returned {estimates[0]:.6g} against the truth "
                         f"{truth:.6g}")
    else:
        t = bias / error
        if abs(t) > threshold:
            words.append(f"BIASED: bias/s.e. = {t:+.2f}, beyond ±{threshold:.2f}")
    if widths[0] > 1:
        words.append(f"uncertainties UNDERSTATED: pull width {width:.3g}, interval "
                     f"[{widths[0]:.3g}, {widths[1]:.3g}] above 1")
    elif widths[1] < 1:
        words.append(f"uncertainties OVERSTATED: pull width {width:.3g}, interval "
                     f"[{widths[0]:.3g}, {widths[1]:.3g}] below 1")
    coverage = {}
    for k, content in GAUSSIAN_CONTENT.items():
        inside = int(np.count_nonzero(np.abs(pulls) <= k))
        coverage[k] = coverage_interval(inside, n, level)
        if not coverage[k][0] <= content <= coverage[k][1]:
            words.append(f"{k}σ coverage {'LOW' if coverage[k][1] < content else 'HIGH'}: "
                         f"{inside}/{n}, interval [{coverage[k][0]:.3f}, {coverage[k][1]:.3f}] "
                         f"excludes {content:.3f}")
    tests = (f"|bias/s.e.| {abs(t):.2f} vs {threshold:.2f} (Student t); pull width "
             f"{width:.3g} in [{widths[0]:.3g}, {widths[1]:.3g}] (χ²); each test at "
             f"two-sided level {level:.2g}, Bonferroni")
    if not words:
        verdict = f"consistent: no significant bias, honest uncertainties ({tests})"
    else:
        verdict = "; ".join(words) + f" ({tests})"
    return Checks(level=level, bias_t=float(t), bias_threshold=threshold,
                  pull_width_interval=widths, coverage_1sigma_interval=coverage[1],
                  coverage_2sigma_interval=coverage[2], verdict=verdict)
