"""Estimators used by the harness tests (importable as tests.estimators_for_tests)."""

import numpy as np

from simulator.analysis.reference import sideband_thermometry


def biased_thermometry(record):
    """The reference asymmetry estimate doubled: the harness must flag it."""
    value, error = sideband_thermometry(record)["occupation:asymmetry"]
    return {"occupation:inflated": (2.0 * value, 2.0 * error)}


def shot_noise_level(record):
    """Mean of |z|² per unit bandwidth; fails on purpose for records with a negative mean."""
    z = record.samples
    if np.mean(z.real) < 0:
        raise RuntimeError("deliberate failure for a negative mean")
    level = np.mean(np.abs(z) ** 2) / record.sample_rate_hz
    return {"floor_density": (level, level / np.sqrt(z.size))}


def exits(record):
    """Ends the interpreter as a script would."""
    import sys

    sys.exit(0)


def ends_the_process(record):
    """Ends the process at once, with a success status and no result."""
    import os

    os._exit(0)


def hangs(record):
    """Never returns."""
    import time

    time.sleep(3600)


def runs_out_of_memory(record):
    """What a too-large allocation raises."""
    raise MemoryError("cannot allocate the workspace")


def returns_flags(record):
    """Booleans are not numbers to the harness."""
    return {"flag": (True, True)}


def returns_nan_for_one(record):
    """One quantity is NaN, the other is fine."""
    level = float(np.mean(np.abs(record.samples) ** 2))
    return {"broken": (float("nan"), 1.0), "level": (level, 0.1)}


def spectrum_floor(view):
    """The median of an averaged spectrum's bins (input: a PublicSpectrum, not a record)."""
    estimate = view.estimate
    level = float(np.median(estimate.density))
    return {"floor_density": (level, level / np.sqrt(estimate.averages * estimate.density.size))}
