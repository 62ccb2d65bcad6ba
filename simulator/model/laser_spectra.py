"""Spectral densities of the drive's classical noise, as the model realises them.

The scenario gives one-sided densities (f ≥ 0), as phase noise and RIN are
quoted in practice; these functions return the two-sided halves S̄ = S/2 that
the linear model's white inputs and filters produce exactly, so that
∫ S̄ df over −∞…∞ is the variance. How the noise enters the model is
:mod:`simulator.model.laser_noise`.

References
----------
Di Domenico, Schilt, Thomann, Appl. Opt. 49, 4801 (2010) (linewidth and
frequency-noise density).
Rabl, Genes, Hammerer, Aspelmeyer, Phys. Rev. A 80, 063819 (2009);
Safavi-Naeini et al., New J. Phys. 15, 035007 (2013) (input occupation).
"""

import numpy as np

from simulator.model.units import angular
from simulator.scenario.tone_sections import PRIMARY_TONE, noise_lasers, noise_tables


def frequency_noise_density(linewidth_hz):
    """Two-sided density S̄_ωω = 2π Δν_L (rad²/s² per Hz) of white frequency noise.

    A Lorentzian line of FWHM Δν_L comes from phase diffusion with
    Var[φ(t) − φ(t − τ)] = 2π Δν_L |τ|, i.e. white δω of this density (the
    one-sided frequency-noise density in Hz²/Hz is Δν_L/π; Di Domenico et al.,
    Appl. Opt. 49, 4801 (2010)).
    """
    return 2.0 * np.pi * float(linewidth_hz)


def floor_shape(noise, frequency_hz):
    """|H(f)|² of the floor: 2nd-order Butterworth high-pass × low-pass edges."""
    f = np.abs(np.asarray(frequency_hz, dtype=float))
    shape = 1.0 / (1.0 + (f / noise.floor_high_hz) ** 4)
    if noise.floor_low_hz > 0:
        x = (f / noise.floor_low_hz) ** 4
        shape = shape * x / (1.0 + x)
    return shape


def peak_shape(noise, frequency_hz):
    """|H(f)|² of the peak: γ²ω²/((ω0² − ω²)² + γ²ω²), 1 at the centre, FWHM γ/2π."""
    w = angular(np.abs(np.asarray(frequency_hz, dtype=float)))
    w0, gamma = angular([noise.peak_frequency_hz, noise.peak_width_hz])
    return (gamma * w) ** 2 / ((w0**2 - w**2) ** 2 + (gamma * w) ** 2)


def phase_noise_density(noise, frequency_hz):
    """Realised two-sided phase-noise density S̄_φφ(f) of the drive (rad²/Hz).

    The sum of the shapes: 2π Δν_L/ω² (white frequency noise), the floor
    S_floor/2 · |H_floor|², the peak S_peak/2 · |H_peak|² (the scenario's
    densities are one-sided, S = 2 S̄). This is exactly the spectrum of the
    model's states; ∫ S̄ df over −∞…∞ is the variance of the stationary part.
    """
    f = np.asarray(frequency_hz, dtype=float)
    with np.errstate(divide="ignore"):
        total = frequency_noise_density(noise.linewidth_hz) / angular(f) ** 2
    total = np.where(noise.linewidth_hz > 0, total, 0.0)
    if noise.floor_rad2_per_hz > 0:
        total = total + 0.5 * noise.floor_rad2_per_hz * floor_shape(noise, f)
    if noise.peak_rad2_per_hz > 0:
        total = total + 0.5 * noise.peak_rad2_per_hz * peak_shape(noise, f)
    return total


def input_occupation(scenario, point, frequency_hz):
    """Occupation n_c = Φ [S̄_φφ(f) + S̄_εε/4] that laser noise adds at the driven port.

    Φ = P/ħω_L is the drive photon flux and the densities are two-sided:
    δa_in = −iā_in φ + ā_in ε/2 has ⟨δa_in† δa_in⟩(ω) = Φ [S̄_φφ + S̄_εε/4]
    (Safavi-Naeini et al., New J. Phys. 15, 035007 (2013); Rabl et al., Phys.
    Rev. A 80, 063819 (2009)).
    """
    return tone_input_occupation(scenario, PRIMARY_TONE, point.input_photon_flux,
                                 frequency_hz)


def tone_densities(scenario, name, frequency_hz):
    """(S̄_φφ(f), S̄_εε) of the laser noise tone ``name`` carries (two-sided; its own or
    shared, :func:`simulator.scenario.tone_sections.noise_lasers`)."""
    phase_laser, intensity_laser = noise_lasers(scenario)[name]
    rin = noise_tables(scenario, intensity_laser)[1].relative_intensity_noise_per_hz
    return (phase_noise_density(noise_tables(scenario, phase_laser)[0], frequency_hz),
            0.5 * rin)


def tone_input_occupation(scenario, name, flux, frequency_hz):
    """:func:`input_occupation` of the tone ``name`` with photon flux ``flux`` (1/s)."""
    s_phi, s_eps = tone_densities(scenario, name, frequency_hz)
    return flux * (s_phi + s_eps / 4.0)
