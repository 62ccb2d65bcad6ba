"""Classical noise of tones on one cavity mode against the exact periodic steady state.

Tone l's noise also reaches the sidebands of every other tone k on its mode, at
ω_k − ω_l ± Ωm from its own carrier. The reference (tests/periodic_linear.py)
writes the linearised equations in one frame, where that noise rotates, and
solves the periodic covariance exactly; the per-tone model must agree where it
counts the crossed band (white intensity noise) and miss by what it warns
about where it leaves it out (shaped phase noise).
"""

import dataclasses

import numpy as np
import pytest
from periodic_linear import optomechanical_diffusion, optomechanical_drift, periodic_covariance
from test_tone_floquet import exact_periodic, reference_fields
from test_tone_noise import noise_tables, two_tones
from tone_scenarios import OMEGA_HZ, mechanical_occupation

from simulator.linear.laser_effects import without_laser_noise
from simulator.linear.steady_state import steady_state
from simulator.model import tone_validity
from simulator.model.laser_blocks import floor_filter
from simulator.model.system import System
from simulator.model.units import angular


def test_white_intensity_noise_of_a_tone_on_one_mode_against_the_exact_periodic_state():
    """Cooling drive at −Ωm and a probe on the same mode at −Ωm/2 with white intensity
    noise. In the drive's frame the probe's noise enters as (ā_in/2) e^(−iνt) ε(t), a
    periodic input; the exact periodic steady state (tests/periodic_linear.py, Floquet
    theory) agrees with the per-tone model, which must count that white noise also in
    the drive's bands (a phase-insensitive input there): without that term the model
    would miss most of the heating."""
    rin = 1e-9
    scenario = two_tones(tone_noise=noise_tables({}, rin), mode="cavity",
                         detuning_hz=-0.5 * OMEGA_HZ, drive_photons=1e4, tone_photons=1e3)
    system = System(scenario)
    probe = system.point.tones[1]
    cav = system.point.cavity_modes[0]
    kappa, kex, delta = angular([cav.linewidth_hz, cav.external_linewidth_hz,
                                 probe.detuning_effective_hz])
    a_in = np.sqrt(probe.photon_number) * (kappa / 2 - 1j * delta) / np.sqrt(kex)

    def noise(t, fields):
        nu = fields[0]["tones"][1][1]  # the probe's offset from the drive
        column = np.zeros(4)
        rotated = a_in / 2 * np.exp(-1j * nu * t)
        column[:2] = np.sqrt(2 * kex) * np.array([rotated.real, rotated.imag])
        return np.outer(column, column) * rin / 2

    exact = mechanical_occupation(*exact_periodic(system, noise=noise))
    model = system.model
    tone = mechanical_occupation(model.covariance())
    quiet = mechanical_occupation(System(without_laser_noise(scenario)).model.covariance())
    crossed = [i for i, name in enumerate(model.inputs) if name.startswith(
        "laser.tones.probe.intensity.drive.")]
    assert len(crossed) == 2
    n = model.N.copy()
    n[crossed, crossed] = 0.0
    without = mechanical_occupation(dataclasses.replace(model, N=n).covariance())
    assert exact - quiet > 0.5 * quiet  # the noise heats strongly
    assert tone == pytest.approx(exact, rel=1e-5)  # measured: 3e-7
    assert abs(without - exact) > 0.9 * (exact - quiet)  # nearly all of it, here


def test_phase_noise_left_out_of_another_tones_bands_is_what_the_warning_says():
    """The probe of the test above with a flat phase-noise floor instead: its noise at the
    spacing ± Ωm from its carrier lies in the cooling drive's sidebands, which the per-tone
    model leaves out and warns about. Against the exact periodic state (the floor's
    filter states driving the probe's input, rotating in the drive's frame) the model is
    low by the warned heating over the effective damping, within 1 %."""

    floor = {"floor_rad2_per_hz": 4e-10, "floor_low_hz": 3e5, "floor_high_hz": 3e7}
    scenario = two_tones(tone_noise=noise_tables(floor, 0.0), mode="cavity",
                         detuning_hz=-0.5 * OMEGA_HZ, drive_photons=1e4, tone_photons=1e3)
    with pytest.warns(tone_validity.ToneNoiseWarning, match="leaves out"):
        system = System(scenario)
    left_out, _ = tone_validity.crossed_phase_noise(scenario, system.point, 0)
    probe, cav = system.point.tones[1], system.point.cavity_modes[0]
    kappa, kex, delta = angular([cav.linewidth_hz, cav.external_linewidth_hz,
                                 probe.detuning_effective_hz])
    a_in = np.sqrt(probe.photon_number) * (kappa / 2 - 1j * delta) / np.sqrt(kex)
    fields, mech, period = reference_fields(system)
    drift, n = optomechanical_drift(fields, mech)
    a_f, b_f, c_f = floor_filter(scenario.tones[0].phase_noise)
    size = n + len(b_f)
    nu = fields[0]["tones"][1][1]

    def full_drift(t):  # the filter's phase φ enters as −iā_in e^(−iνt) φ at the port
        a = np.zeros((size, size))
        a[:n, :n], a[n:, n:] = drift(t), a_f
        entry = -1j * a_in * np.exp(-1j * nu * t)
        a[:2, n:] = np.outer(np.sqrt(2 * kex) * np.array([entry.real, entry.imag]), c_f)
        return a

    diffusion = np.zeros((size, size))
    diffusion[:n, :n] = optomechanical_diffusion(fields, mech)
    diffusion[n:, n:] = np.outer(b_f, b_f) * floor["floor_rad2_per_hz"] / 2
    exact = mechanical_occupation(periodic_covariance(full_drift, diffusion, period, size,
                                                      samples=16), 2)
    tone = mechanical_occupation(system.model.covariance())
    width = angular(steady_state(system).modes[0].effective_linewidth_hz)
    assert exact - tone > 0.1 * tone  # a visible omission, warned about
    assert exact - tone == pytest.approx(left_out / width, rel=0.01)  # measured: 0.2 %
