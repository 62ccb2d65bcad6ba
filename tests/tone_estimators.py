"""Estimators for the trial tests of several detected tones (tests/test_tone_records.py)."""

import numpy as np


def shot_noise_floor(record):
    """One-channel API: the white floor of the record, mean |z|²/fs (≈ 1 shot-noise unit)."""
    z = np.asarray(record.samples)
    assert z.ndim == 1, "a one-channel estimator gets one channel at a time"
    power = np.abs(z) ** 2 / record.sample_rate_hz
    return {"floor": (float(power.mean()), float(power.std() / np.sqrt(power.size))),
            "tone_index": (float(len(record.tone)), 1.0)}


def every_channel(record):
    """Declares all_channels: gets the (N, K) record and the tones' names."""
    z = np.asarray(record.samples)
    return {"channels": (float(z.shape[1]), 1.0),
            "named": (float(record.tones == ("red", "blue")), 1.0)}


every_channel.all_channels = True
