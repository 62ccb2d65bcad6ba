"""Warnings for device values that are allowed but look wrong.

The loader refuses what no device can have; these checks flag what a real
device of the described kind rarely has, which is more often a slip of unit
(a frequency in MHz written in Hz, a dBm value written in W) than a device.
Each warning says what looks wrong and what was probably meant. They are
printed by ``noisechain check`` and listed among the warnings of ``inspect``.
The thresholds are common practice for the devices the simulator targets
(cavity optomechanics and electromechanics), not published limits.
"""

from simulator.scenario import units

# A mechanical mode below this frequency beside a radio-frequency to terahertz
# circuit is more likely a MHz value written in Hz (optical cavities do hold
# pendulums and torsion balances at a few Hz, so only circuits are flagged).
LOW_MECHANICAL_HZ = 1e3
CIRCUIT_BAND_HZ = (1e6, 1e12)
# Below this quality factor the mode is hardly a resonator and the symmetric
# damping model is off.
LOW_QUALITY = 10.0
# No refrigerator holds a mechanical bath below about 1 mK.
COLDEST_BATH_K = 1e-3
# A circuit drive above 1 mW (0 dBm) at the device would heat any cryogenic
# circuit; more likely a dBm value written in W.
STRONGEST_CIRCUIT_DRIVE_W = 1e-3
# A detuning or cavity linewidth below 1 kHz whose value in MHz would sit within a
# factor of 10 of the device's mechanical frequencies (or, for a detuning, of the
# cavity linewidth) is more likely a MHz value written in Hz: drive tones are set
# at multiples of Ωm and cavities of such devices are kHz to GHz wide.
SLIP_BELOW_HZ = 1e3
MHZ_IN_HZ = 1e6
SLIP_FACTOR = 10.0


def plausibility_warnings(scenario):
    """Warnings for values that are admissible but implausible (a tuple of str)."""
    out = []
    carrier = scenario.drive.carrier_frequency_hz
    circuit = CIRCUIT_BAND_HZ[0] <= carrier <= CIRCUIT_BAND_HZ[1]
    for i, mode in enumerate(scenario.mechanics):
        key = f"mechanics[{i}]"
        if circuit and mode.frequency_hz < LOW_MECHANICAL_HZ:
            out.append(
                f"{key}.frequency_hz: mode {mode.name} at {mode.frequency_hz:.4g} Hz is "
                f"below {LOW_MECHANICAL_HZ:g} Hz beside a {carrier:.4g} Hz circuit, where "
                "mechanical modes lie at kHz to GHz; was a value in MHz written in Hz? "
                f"({mode.frequency_hz:.4g} MHz is frequency_hz = {mode.frequency_hz * 1e6:.4g})")
        quality = mode.frequency_hz / mode.linewidth_hz
        if quality < LOW_QUALITY:
            out.append(
                f"{key}.linewidth_hz: mode {mode.name} has Q = frequency/linewidth = "
                f"{quality:.3g}, below {LOW_QUALITY:g}: it is hardly a resonator, and the "
                "symmetric damping model assumes a high quality factor, so its numbers are "
                "not accurate here; check that linewidth_hz is the energy damping rate Γm/2π "
                "in Hz")
        temperature = mode.bath_temperature_k
        if temperature is not None and 0 < temperature < COLDEST_BATH_K:
            out.append(
                f"{key}.bath_temperature_k: {temperature:.4g} K is below "
                f"{COLDEST_BATH_K * 1e3:g} mK, colder than any refrigerator keeps a "
                f"mechanical bath; was a value in mK written in K? ({temperature:.4g} mK is "
                f"bath_temperature_k = {temperature * 1e-3:.4g})")
    out.extend(_mhz_slips(scenario))
    power = scenario.drive.power_w
    if circuit and power > STRONGEST_CIRCUIT_DRIVE_W:
        out.append(
            f"drive.power_w: {units.power_text(power)} at the port of a {carrier:.4g} Hz "
            "circuit would heat any cryogenic circuit (such drives are typically below "
            "−20 dBm at the device); was a dBm value written in W? (give power_dbm instead)")
    if circuit and scenario.detection.receiver == "optical" and (
            scenario.electronics.amplifier_added_quanta > 0
            or scenario.electronics.amplifier_noise_temperature_k is not None):
        out.append(
            'detection.receiver: "optical" for a circuit read out through an amplifier; '
            'the record is then scaled by an optical local oscillator and a photocurrent. '
            'For an amplifier chain and an IQ mixer set detection.receiver = "microwave" '
            "with electronics.amplifier_gain_db")
    return tuple(out)


def _looks_like_mhz(value, rates):
    """True if ``value`` (Hz) is small and its MHz reading is of the size of ``rates``."""
    size = abs(value)
    return 0 < size < SLIP_BELOW_HZ and any(
        1 / SLIP_FACTOR <= size * MHZ_IN_HZ / rate <= SLIP_FACTOR for rate in rates if rate > 0)


def _mhz_slips(scenario):
    """Warnings for a detuning or cavity linewidth that reads like MHz written in Hz."""
    mechanical = [mode.frequency_hz for mode in scenario.mechanics]
    kappa = scenario.cavity.linewidth_hz
    checks = [("drive.detuning_hz", scenario.drive.detuning_hz, mechanical + [kappa],
               "the mechanical frequencies and the cavity linewidth"),
              ("cavity.linewidth_hz", kappa, mechanical, "the mechanical frequencies"),
              ("cavity.external_linewidth_hz", scenario.cavity.external_linewidth_hz,
               mechanical, "the mechanical frequencies")]
    for key, value, rates, what in checks:
        if _looks_like_mhz(value, rates):
            yield (f"{key}: {value:.4g} Hz is a million times smaller than {what} "
                   f"({', '.join(f'{r:.4g} Hz' for r in rates)}); was a value in MHz "
                   f"written in Hz? ({value:.4g} MHz is {key.split('.')[1]} = "
                   f"{value * MHZ_IN_HZ:.4g})")
