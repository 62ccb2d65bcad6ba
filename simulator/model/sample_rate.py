"""The record's sample rate: the digitiser's, or the automatic rule of the chain's lines.

:func:`record_sample_rate` is the one place a stage asks for the rate of the
record (``digitizer.sample_rate_hz``, else :func:`automatic_sample_rate`); the
rule and its reasons are in docs/records.md ("Digitiser"). Also importable
from :mod:`simulator.model.chain`.
"""

import functools

import numpy as np

from simulator.model.laser_noise import device_eigenvalues
from simulator.model.units import ordinary

OVERSAMPLING = 2.5  # automatic sample rate: at least this many times the highest relevant frequency
# ... and high enough that the integrate-and-dump sinc²(f/fs) keeps this share of the
# highest line: our choice, so that the digitiser costs a planned record no more than
# 5 % of its signal (2.5× alone kept 74 % of a line at 0.3 fs)
LINE_SINC2 = 0.95


def automatic_sample_rate(chain, intermediate_frequency_hz=0.0):
    """Sample rate (Hz) that takes in every resonance and keeps 95 % of every line.

    Each eigenvalue λ of the cavity–mechanics drift is a line at |Im λ| with
    half-width |Re λ| (plus the intermediate frequency for a real if record).
    The rate is the larger of

    - 2.5 times the highest relevant frequency, the largest |Im λ| + 3|Re λ|
      (the band ±fs/2, or 0 to fs/2 for a real record, holds every line with
      its wings), and
    - the rate at which the integrate-and-dump response sinc²(f/fs) is
      ``LINE_SINC2`` = 0.95 at the highest line centre, fs = f/x₀ with
      sinc²(x₀) = 0.95, x₀ ≈ 0.124 (about 8 samples per period of the
      fastest line),

    rounded up to 1, 1.25, 1.5, 2, 2.5, 3, 4, 5, 6 or 8 times a power of ten.
    """
    lam = device_eigenvalues(chain.model, also=("filter",))
    shift = float(intermediate_frequency_hz) if chain.receiver == "if" else 0.0
    top = float(ordinary(np.max(np.abs(lam.imag) + 3.0 * np.abs(lam.real)))) + shift
    line = float(ordinary(np.max(np.abs(lam.imag)))) + shift
    return _round_up(max(OVERSAMPLING * top, line / _line_fraction()))


@functools.cache
def _line_fraction():
    """x₀ = f/fs at which sinc²(x₀) = ``LINE_SINC2`` (sinc(x) = sin πx/(πx))."""
    from scipy.optimize import brentq

    return float(brentq(lambda x: np.sinc(x) ** 2 - LINE_SINC2, 1e-9, 0.5, xtol=1e-14))


def record_sample_rate(scenario, chain):
    """The record's sample rate (Hz): ``digitizer.sample_rate_hz`` or the automatic one."""
    return float(scenario.digitizer.sample_rate_hz
                 or automatic_sample_rate(chain, scenario.detection.intermediate_frequency_hz))


_RATE_STEPS = (1.0, 1.25, 1.5, 2.0, 2.5, 3.0, 4.0, 5.0, 6.0, 8.0, 10.0)  # at most 25 % over


def _round_up(x):
    decade = 10.0 ** np.floor(np.log10(x))
    for step in _RATE_STEPS:
        if step * decade >= x * (1 - 1e-12):
            return float(step * decade)
    return float(10 * decade)
