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
