"""Estimators of averaged spectra of several detected tones (tests/test_synthetic_channels.py)."""

import numpy as np


def tone_floor(view):
    """One-tone API: the median bin of the tone's own averaged spectrum, and its name."""
    density = view.estimate.density
    assert density.ndim == 1, "a one-channel estimator gets one tone at a time"
    level = float(np.median(density))
    return {"floor": (level, level / np.sqrt(view.estimate.averages)),
            "tone_letters": (float(len(view.tone)), 1.0)}


def joint_coherence(view):
    """Declares all_channels: the number of channels and the largest pseudo-coherence
    |P̄_jl(f)|²/(S̄_jj(f) S̄_ll(−f)) between two different tones."""
    m = view.estimate
    d = np.real(np.einsum("fjj->fj", m.cross))
    minus = np.array([np.argmin(np.abs(m.frequency_hz + f)) for f in m.frequency_hz])
    c = np.abs(m.pseudo) ** 2 / (d[:, :, None] * d[minus][:, None, :])
    k = len(view.tones)
    off = ~np.eye(k, dtype=bool)
    return {"channels": (float(k), 1.0), "pseudo_coherence": (float(c[:, off].max()), 0.01),
            "own_cross_columns": (float(view.cross.shape[1]), 1.0)}


joint_coherence.all_channels = True
