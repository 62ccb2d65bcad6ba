"""Small physical helpers shared by every stage: constants and thermal occupation."""

import numpy as np
from scipy import constants

HBAR = constants.hbar
K_B = constants.k
TWO_PI = 2.0 * np.pi


def angular(frequency_hz):
    """Angular frequency (rad/s) of an ordinary frequency in Hz.

    The scenario and every report use ordinary frequencies; the linear model
    works in angular units. This is the one place the factor 2π is applied.
    Complex values (a pole, an eigenvalue) stay complex.
    """
    return TWO_PI * _real_or_complex(frequency_hz)


def ordinary(angular_rad_s):
    """Ordinary frequency (Hz) of an angular frequency in rad/s (complex stays complex)."""
    return _real_or_complex(angular_rad_s) / TWO_PI


def _real_or_complex(x):
    x = np.asarray(x)
    return x if np.iscomplexobj(x) else x.astype(float)


def bose_einstein(frequency_hz, temperature_k):
    """Mean thermal occupation 1/(exp(hf/kT) − 1) of a mode at ``frequency_hz``.

    Uses the CODATA values of h and k from :mod:`scipy.constants`; returns 0
    at zero temperature.
    """
    f = np.asarray(frequency_hz, dtype=float)
    t = np.asarray(temperature_k, dtype=float)
    with np.errstate(divide="ignore", over="ignore"):
        x = constants.h * f / (K_B * t)
        n = 1.0 / np.expm1(x)
    return np.where(t > 0, n, 0.0)[()]


def photon_energy_j(frequency_hz):
    """Energy hf of one drive photon (J)."""
    return constants.h * float(frequency_hz)
