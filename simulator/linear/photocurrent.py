"""Electrical units of a detected spectrum: photocurrent (A²/Hz) and voltage (V²/Hz).

An optical receiver's spectrum in shot-noise units becomes a photocurrent
density through the local oscillator's DC photocurrent (Schottky's shot-noise
level 2 e I_dc), then a voltage through a transimpedance. A microwave receiver
has neither: its record's volts are :func:`simulator.linear.record_budget.in_volts`.
Also importable from :mod:`simulator.linear.referral`.

References
----------
Schottky, Ann. Phys. 362, 541 (1918); Yuen and Chan, Opt. Lett. 8, 177 (1983).
"""

import dataclasses

import numpy as np
from scipy import constants

from simulator.errors import InputError
from simulator.model.units import photon_energy_j


def to_photocurrent(spectrum, scenario, *, lo_power_w, quantum_efficiency,
                    intermediate_frequency_hz=None, lo_side="below"):
    """Photocurrent spectral density (A²/Hz) of a detected spectrum.

    Parameters
    ----------
    spectrum : simulator.linear.spectrum.Spectrum
        Heterodyne or homodyne spectrum in shot-noise units.
    scenario : simulator.scenario.loader.Scenario
        Gives the optical frequency (photon energy) of the local oscillator. An
        optical receiver only (``detection.receiver = "optical"``); a microwave
        one is refused (its record is in volts: ``record_budget.in_volts``).
    lo_power_w : float
        Local-oscillator power on the detector (W).
    quantum_efficiency : float
        Detector quantum efficiency η_d (electrons per photon).
    intermediate_frequency_hz : float, optional
        Heterodyne only: offset of the local oscillator from the drive (Hz);
        must exceed every |ν| of the spectrum so no band folds over zero.
    lo_side : {"below", "above"}
        Heterodyne only: local oscillator below the drive (the sideband at ν
        appears at f_IF + ν) or above it (at f_IF − ν).

    Returns
    -------
    simulator.linear.spectrum.Spectrum
        One-sided density in A²/Hz. Homodyne: on the same f axis. Heterodyne:
        on the intermediate-frequency axis of the single real photocurrent.

    Notes
    -----
    The DC photocurrent is I_dc = e η_d P_LO / (h f_L), and its shot noise is
    white with one-sided density 2 e I_dc (Schottky's formula). A spectrum in
    shot-noise units is that level times S; the factor is returned in
    ``calibration["shot_noise_a2_per_hz"]``. The signal's own detection
    efficiency is already in S (``scenario.detection.efficiency``).

    References
    ----------
    Schottky, Ann. Phys. 362, 541 (1918); Yuen and Chan, Opt. Lett. 8, 177
    (1983) (balanced homodyne: shot-noise level 2 e I_dc of the LO current).
    """
    if scenario.detection.receiver != "optical":
        raise InputError(
            f'to_photocurrent: detection.receiver = "{scenario.detection.receiver}" has no '
            "photodetector or optical local oscillator; expected an optical receiver. The "
            "record of an amplifier chain is in volts at the digitiser: "
            "simulator.linear.record_budget.in_volts(digitiser_spectrum(system))")
    _positive("lo_power_w", lo_power_w)
    if not 0.0 < quantum_efficiency <= 1.0:
        raise InputError(f"quantum_efficiency = {quantum_efficiency!r}; expected a number "
                         "in (0, 1]")
    if spectrum.units != "shot-noise units (vacuum = 1)":
        raise InputError(f"spectrum in {spectrum.units!r}; expected shot-noise units")
    current = constants.e * quantum_efficiency * lo_power_w / photon_energy_j(
        scenario.drive.carrier_frequency_hz)
    level = 2.0 * constants.e * current
    f = np.asarray(spectrum.frequency_hz)
    order = np.arange(f.size)
    axis = spectrum.axis
    if spectrum.sided == "two-sided":
        if intermediate_frequency_hz is None:
            raise InputError("intermediate_frequency_hz is required for a heterodyne "
                             "spectrum: it places the sidebands on the photocurrent axis")
        if lo_side not in ("below", "above"):
            raise InputError(f"lo_side = {lo_side!r}; expected 'below' or 'above'")
        f_if = float(intermediate_frequency_hz)
        if not f_if > np.max(np.abs(f)):
            raise InputError(f"intermediate_frequency_hz = {intermediate_frequency_hz!r} "
                             f"Hz; expected more than the largest |ν| = "
                             f"{np.max(np.abs(f)):.6g} Hz so no band folds over zero")
        f = f_if + f if lo_side == "below" else f_if - f
        order = np.argsort(f)
        f = f[order]
        axis = (f"photocurrent frequency = f_IF {'+' if lo_side == 'below' else '-'} ν, "
                f"f_IF = {f_if:.9g} Hz (local oscillator {lo_side} the drive)")
    return dataclasses.replace(
        spectrum, frequency_hz=f, axis=axis, sided="one-sided", units="A^2/Hz",
        quantity=f"{spectrum.quantity} photocurrent", total=level * spectrum.total[order],
        contributions={k: level * v[order] for k, v in spectrum.contributions.items()},
        reference={k: level * v[order] for k, v in spectrum.reference.items()},
        calibration={**spectrum.calibration, "shot_noise_a2_per_hz": level,
                     "lo_photocurrent_a": current, "lo_power_w": float(lo_power_w),
                     "detector_quantum_efficiency": float(quantum_efficiency)})


def to_voltage(current_spectrum, *, transimpedance_ohm):
    """Voltage density (V²/Hz) after a transimpedance amplifier of gain R (Ω): R²·S_I."""
    _positive("transimpedance_ohm", transimpedance_ohm)
    if current_spectrum.units != "A^2/Hz":
        raise InputError(f"spectrum in {current_spectrum.units!r}; expected A^2/Hz "
                         "(convert with to_photocurrent first)")
    r2 = float(transimpedance_ohm) ** 2
    return dataclasses.replace(
        current_spectrum, units="V^2/Hz",
        quantity=current_spectrum.quantity.replace("photocurrent", "voltage"),
        total=r2 * current_spectrum.total,
        contributions={k: r2 * v for k, v in current_spectrum.contributions.items()},
        reference={k: r2 * v for k, v in current_spectrum.reference.items()},
        calibration={**current_spectrum.calibration, "transimpedance_ohm": float(
            transimpedance_ohm), "shot_noise_v2_per_hz": r2 * current_spectrum.calibration[
                "shot_noise_a2_per_hz"]})


def _positive(name, value):
    if not (isinstance(value, (int, float, np.floating)) and np.isfinite(value) and value > 0):
        raise InputError(f"{name} = {value!r}; expected a positive finite number")
