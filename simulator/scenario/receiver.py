"""The receiver of a scenario: optical (local oscillator on a photodetector) or microwave.

An optical receiver beats the output field with a local oscillator on a
photodetector; its scale is the photocurrent (local-oscillator power,
transimpedance, current noise). A microwave receiver amplifies the output
field with a phase-preserving amplifier chain of power gain G and mixes it
down in an IQ mixer whose outputs are digitised; its scale is the voltage at
the digitiser (gain, line impedance), and its noise the amplifier's, referred
to its input:

    n_add = k_B T_N / (h f)

for a noise temperature T_N at the signal frequency f, the convention in
which the quantum limit of a phase-preserving amplifier, n_add ≥ ½, reads
k_B T_N ≥ ħω/2 (Caves, Phys. Rev. D 26, 1817 (1982); Clerk, Devoret, Girvin,
Marquardt, Schoelkopf, Rev. Mod. Phys. 82, 1155 (2010), Sec. V on amplifier
added noise and noise temperature).

:func:`receiver_problems` refuses, with the reason, the keys that belong to
the other receiver when they are set away from their defaults.
"""

from scipy import constants

from simulator.scenario.sections import Detection, Electronics

QUANTUM_LIMIT = 0.5  # least added noise of a phase-preserving amplifier (Caves 1982)

# Keys of an optical receiver with no meaning in a microwave one, with the reason.
OPTICAL_ONLY = (
    (Detection, "detection", "local_oscillator_power_w",
     "the IQ mixer's local oscillator sets no scale of the record (the amplifier gain "
     "and the line impedance do)"),
    (Detection, "detection", "balanced",
     "there is no signal–local-oscillator beam splitter to balance"),
    (Electronics, "electronics", "transimpedance_ohm",
     "there is no photocurrent to convert (the digitiser sees the amplified voltage)"),
    (Electronics, "electronics", "current_noise_a_per_sqrt_hz",
     "there is no photocurrent; the noise of later stages belongs in the amplifier's "
     "added noise, referred to its input"),
)
# Keys of a microwave receiver with no meaning in an optical one.
MICROWAVE_ONLY = (
    (Electronics, "electronics", "amplifier_gain_db"),
    (Electronics, "electronics", "impedance_ohm"),
)


def _default(cls, key):
    return cls.__dataclass_fields__[key].default


def amplifier_added_quanta(scenario):
    """Added noise n_add of the amplifier, in quanta referred to its input (0: none).

    From ``electronics.amplifier_noise_temperature_k`` when given,
    n_add = k_B T_N/(h f_drive) (module doc), else
    ``electronics.amplifier_added_quanta``.
    """
    el = scenario.electronics
    if el.amplifier_noise_temperature_k is None:
        return el.amplifier_added_quanta
    return (constants.k * el.amplifier_noise_temperature_k
            / (constants.h * scenario.drive.carrier_frequency_hz))


def receiver_problems(scenario):
    """Cross-section checks of the receiver: yields ``(key, message)``."""
    det, el = scenario.detection, scenario.electronics
    added = amplifier_added_quanta(scenario)
    temperature = el.amplifier_noise_temperature_k
    if temperature is not None and added < QUANTUM_LIMIT:
        f = scenario.drive.carrier_frequency_hz
        yield ("electronics.amplifier_noise_temperature_k",
               f"{temperature!r} K is n_add = k_B T_N/(h f) = {added:.4g} quanta at "
               f"{f:.6g} Hz, below the quantum limit of a phase-preserving amplifier; "
               f"expected T_N ≥ h f/(2 k_B) = {QUANTUM_LIMIT * constants.h * f / constants.k:.4g}"
               " K (Caves, Phys. Rev. D 26, 1817 (1982))")
    if det.receiver == "optical":
        for cls, section, key in MICROWAVE_ONLY:
            value = getattr(getattr(scenario, section), key)
            if value != _default(cls, key):
                yield (f"{section}.{key}", f"{value!r} with detection.receiver = "
                       '"optical", whose scale is the photocurrent (local-oscillator power '
                       'and transimpedance); expected it only with detection.receiver = '
                       '"microwave"')
        return
    for cls, section, key, why in OPTICAL_ONLY:
        value = getattr(getattr(scenario, section), key)
        if value != _default(cls, key):
            yield (f"{section}.{key}", f'{value!r} with detection.receiver = "microwave": '
                   f"{why}; expected it left out")
    if det.scheme != "heterodyne":
        yield ("detection.scheme", f'"{det.scheme}" with detection.receiver = "microwave", '
               "whose phase-preserving amplifier and IQ mixer record both quadratures; "
               'expected "heterodyne"')
    if el.amplifier_gain_db is None:
        yield ("electronics.amplifier_gain_db", 'missing with detection.receiver = '
               '"microwave"; expected the power gain in dB from the amplifier\'s input to '
               "the digitiser")
    if added == 0.0:
        yield ("electronics.amplifier_added_quanta", 'missing with detection.receiver = '
               '"microwave"; expected the amplifier\'s added noise: amplifier_added_quanta '
               f"(at least {QUANTUM_LIMIT}) or amplifier_noise_temperature_k")
