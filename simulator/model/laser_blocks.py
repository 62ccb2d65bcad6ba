"""Building blocks of the laser-noise states: realised filters and the block builder.

Each stationary phase-noise shape is white noise through a filter whose |H|²
is the closed form of :mod:`simulator.model.laser_spectra`; :class:`Blocks`
collects the states and white inputs of every laser, with the rows through
which each input drives the tones' fields and outputs, before
:mod:`simulator.model.laser_noise` assembles them into the one model.
"""

import numpy as np

from simulator.model.units import angular

_SQRT2 = np.sqrt(2.0)


def quad(c):
    """Quadratures (X, Y) = √2 (Re, Im) of a complex field amplitude."""
    return _SQRT2 * np.array([np.real(c), np.imag(c)])


def floor_filter(noise):
    """(A, B, C) with φ = C x for white input: Butterworth high-pass then low-pass."""
    wh = float(angular(noise.floor_high_hz))
    low = ([[0.0, wh], [-wh, -_SQRT2 * wh]], [0.0, wh], [1.0, 0.0])
    if noise.floor_low_hz == 0:
        return tuple(np.array(x) for x in low)
    wl = float(angular(noise.floor_low_hz))
    a = np.array([[0.0, wl, 0.0, 0.0], [-wl, -_SQRT2 * wl, 0.0, 0.0],
                  [0.0, 0.0, 0.0, wh], [-wh, -_SQRT2 * wh, -wh, -_SQRT2 * wh]])
    return a, np.array([0.0, wl, 0.0, wh]), np.array([0.0, 0.0, 1.0, 0.0])


def peak_filter(noise):
    """(A, B, C) of γ s/(s² + γ s + ω0²), states (ω0 z, dz/dt)."""
    w0, gamma = (float(x) for x in angular([noise.peak_frequency_hz, noise.peak_width_hz]))
    return (np.array([[0.0, w0], [-w0, -gamma]]), np.array([0.0, 1.0]),
            np.array([0.0, gamma]))


class Blocks:
    """Laser states and inputs being appended to a model, with their couplings."""

    def __init__(self):
        self.states, self.inputs, self.sources, self.intensity = [], [], [], []
        self.a = np.zeros((0, 0))
        self.b = {}  # input index -> column over the laser states
        self.cavity = {}  # input index -> [(field rows, (X, Y) column), ...]
        self.output = {}  # input index -> [(output rows, (X, Y) column), ...]

    def add_input(self, name, intensity, source):
        """Append a white input (two-sided ``intensity``) of ``source``; its index."""
        k = len(self.inputs)
        self.inputs.append(name)
        self.intensity.append(float(intensity))
        self.sources.append((source, k))
        self.cavity[k], self.output[k] = [], []
        return k

    def add_states(self, names, a):
        """Append states ``names`` with their own drift ``a``; their slice."""
        n = len(self.states)
        self.states += list(names)
        grown = np.zeros((n + len(names),) * 2)
        grown[:n, :n] = self.a
        grown[n:, n:] = a
        self.a = grown
        return slice(n, n + len(names))

    def drive(self, k, rows, column):
        """Let input ``k`` drive the states ``rows`` through ``column``."""
        col = self.b.setdefault(k, np.zeros(0))
        full = np.zeros(len(self.states))
        full[:col.size] = col
        full[rows] += column
        self.b[k] = full


def stationary_shapes(blocks, noise, prefix, label, peak="relaxation-oscillation peak"):
    """Append the floor and peak of ``noise``; return their (state slice, C row) pairs.

    Their sources are ``label("phase-noise floor")`` and ``label(peak)``."""
    rows_out = []
    if noise.floor_rad2_per_hz > 0:
        a, b, c = floor_filter(noise)
        rows = blocks.add_states([f"{prefix}floor.{i}" for i in range(len(b))], a)
        k = blocks.add_input(f"{prefix}floor", noise.floor_rad2_per_hz / 2,
                             label("phase-noise floor"))
        blocks.drive(k, rows, b)
        rows_out.append((rows, c))
    if noise.peak_rad2_per_hz > 0:
        a, b, c = peak_filter(noise)
        rows = blocks.add_states([f"{prefix}peak.0", f"{prefix}peak.1"], a)
        k = blocks.add_input(f"{prefix}peak", noise.peak_rad2_per_hz / 2, label(peak))
        blocks.drive(k, rows, b)
        rows_out.append((rows, c))
    return rows_out
