"""The sections of a scenario file, one frozen dataclass each.

Every field is declared with :func:`simulator.scenario.schema.param` (meaning, unit,
admissible range, default), which the loader in :mod:`simulator.scenario.loader`
walks generically and the scenario reference in ``docs/`` is generated from.
A section may define ``EXCLUSIVE`` (groups of keys of which exactly one must
be given), ``ALTERNATIVES`` (groups of which at most one may be given) and
``problems()`` (checks across its keys).
"""

import dataclasses
import math

from simulator.scenario.schema import param, section

_frozen = dataclasses.dataclass(frozen=True, kw_only=True)

# Upper limit of the frequency of a noise shape, tone, filter or lock (1 THz).
MAX_AUXILIARY_HZ = 1e12
# Smallest non-zero drive power: about one optical photon per 6000 years.
MIN_DRIVE_POWER_W = 1e-30


@_frozen
class ScenarioInfo:
    """``[scenario]``: what this scenario is."""

    name: str = param("short name used in reports and file names", check="label")
    description: str = param("free text describing the device and purpose", default="")
    seed: int = param("seed of every random draw made for this scenario",
                      check="nonnegative", default=0, high=2**63 - 1,
                      why="the random generators take 64-bit seeds")


@_frozen
class PhaseNoise:
    """``[drive.phase_noise]``: classical phase noise of the drive, a sum of shapes (also
    ``[tones.phase_noise]``, a tone's own laser).

    Densities are one-sided (f ≥ 0), as phase noise is specified in practice;
    the model uses the two-sided half of each (see docs/laser-noise.md).
    """

    linewidth_hz: float = param(
        "full width at half maximum of the laser's Lorentzian line from white "
        "frequency noise (one-sided frequency-noise density linewidth/π in Hz²/Hz); "
        "0: none", unit="Hz", check="nonnegative", default=0.0, high=MAX_AUXILIARY_HZ)
    floor_rad2_per_hz: float = param(
        "one-sided phase-noise density S_φ(f) of a flat floor between floor_low_hz "
        "and floor_high_hz (2nd-order Butterworth edges); 0: none", unit="rad²/Hz",
        check="nonnegative", default=0.0, high=1.0)
    floor_low_hz: float = param(
        "lower edge of the phase-noise floor; 0: the floor reaches down to zero "
        "frequency", unit="Hz", check="nonnegative", default=0.0, high=MAX_AUXILIARY_HZ)
    floor_high_hz: float | None = param(
        "upper edge of the phase-noise floor; needed when floor_rad2_per_hz > 0",
        unit="Hz", check="positive", default=None, low=1e-3, high=MAX_AUXILIARY_HZ)
    peak_rad2_per_hz: float = param(
        "one-sided phase-noise density at the centre of a resonant peak (e.g. a "
        "laser relaxation oscillation); 0: none", unit="rad²/Hz", check="nonnegative",
        default=0.0, high=1.0)
    peak_frequency_hz: float | None = param(
        "centre of the phase-noise peak", unit="Hz", check="positive", default=None,
        low=1e-3, high=MAX_AUXILIARY_HZ)
    peak_width_hz: float | None = param(
        "full width at half maximum of the phase-noise peak", unit="Hz",
        check="positive", default=None, low=1e-3, high=MAX_AUXILIARY_HZ)

    def problems(self):
        """Cross-field checks: yields ``(key, message)`` for each inconsistency."""
        if self.floor_rad2_per_hz > 0:
            if self.floor_high_hz is None:
                yield ("floor_high_hz", "missing while floor_rad2_per_hz > 0; expected the "
                       "upper edge of the floor in Hz")
            elif self.floor_high_hz <= self.floor_low_hz:
                yield ("floor_high_hz", f"{self.floor_high_hz!r} is not above floor_low_hz "
                       f"= {self.floor_low_hz!r}; expected floor_low_hz < floor_high_hz")
        if self.peak_rad2_per_hz > 0:
            for key in ("peak_frequency_hz", "peak_width_hz"):
                if getattr(self, key) is None:
                    yield (key, f"missing while peak_rad2_per_hz > 0; expected the peak's "
                           f"{key.split('_')[1]} in Hz")


@_frozen
class IntensityNoise:
    """``[drive.intensity_noise]``: classical amplitude noise of the drive."""

    relative_intensity_noise_per_hz: float = param(
        "one-sided relative intensity noise RIN = S_δP/P²(f), white; 0: none "
        "(10^(dBc/Hz / 10) for a value in dBc/Hz)", unit="1/Hz", check="nonnegative",
        default=0.0, high=1e-2)


@_frozen
class CalibrationTone:
    """``[drive.calibration_tone]``: phase modulation φ0 cos(2π f t) on the drive."""

    depth_rad: float = param(
        "modulation depth φ0, at most 0.1 (the model keeps first-order sidebands, "
        "J1(φ0) ≈ φ0/2); 0: no tone", unit="rad", check="nonnegative", default=0.0)
    frequency_hz: float | None = param(
        "modulation frequency; needed when depth_rad > 0", unit="Hz", check="positive",
        default=None, high=MAX_AUXILIARY_HZ)

    def problems(self):
        """Cross-field checks: yields ``(key, message)`` for each inconsistency."""
        if self.depth_rad > 0.1:
            yield ("depth_rad", f"{self.depth_rad!r} rad is too deep for the linear model; "
                   "expected at most 0.1 rad (second-order sidebands neglected)")
        if self.depth_rad > 0 and self.frequency_hz is None:
            yield ("frequency_hz", "missing while depth_rad > 0; expected the modulation "
                   "frequency in Hz")


@_frozen
class Drive:
    """``[drive]``: the coherent drive (laser or microwave tone) at the cavity input."""

    EXCLUSIVE = (("wavelength_m", "frequency_hz"),)

    wavelength_m: float | None = param(
        "vacuum wavelength of the drive", unit="m", check="positive", default=None,
        low=1e-7, high=10.0, why="ultraviolet to radio waves, the span of frequency_hz")
    frequency_hz: float | None = param(
        "carrier frequency of the drive", unit="Hz", check="positive", default=None,
        low=3e7, high=3e15, why="radio waves to ultraviolet, the span of wavelength_m")
    power_w: float = param("drive power arriving at the cavity's external port; 0 (no "
                           f"drive) or at least {MIN_DRIVE_POWER_W:g} W", unit="W",
                           check="nonnegative", high=1e3,
                           why="1 kW, above any continuous drive a device survives")
    detuning_hz: float = param("Δ/2π = drive minus cavity frequency; red detuning is "
                               "negative; |Δ| below the drive frequency", unit="Hz",
                               check="real")
    detuning_reference: str = param(
        "cavity frequency the detuning is measured from: the bare resonance (no "
        "light inside) or the effective one including the static radiation-pressure "
        "shift", choices=("bare", "effective"), default="bare")
    bistable_branch: str = param(
        "solution used where the intracavity photon number is bistable, by photon "
        "number", choices=("lowest", "middle", "highest"), default="lowest")
    phase_noise: PhaseNoise = section(
        PhaseNoise, "classical phase noise of the drive; left out: none (shot-noise "
        "limited)")
    intensity_noise: IntensityNoise = section(
        IntensityNoise, "classical intensity noise of the drive; left out: none")
    calibration_tone: CalibrationTone = section(
        CalibrationTone, "phase-modulation calibration tone on the drive path only (not "
        "the local oscillator); left out: none")

    def problems(self):
        """Cross-field checks: yields ``(key, message)`` for each inconsistency."""
        if 0 < self.power_w < MIN_DRIVE_POWER_W:
            yield ("power_w", f"{self.power_w!r} W is a rounding error, not a drive (the "
                   "sideband areas it gives underflow); expected 0 (no drive) or at least "
                   f"{MIN_DRIVE_POWER_W:g} W")
        carrier = self.carrier_frequency_hz
        if not abs(self.detuning_hz) < carrier:
            yield ("detuning_hz", f"{self.detuning_hz!r} Hz puts the cavity at "
                   f"{carrier - self.detuning_hz:.6g} Hz for a drive at {carrier:.6g} Hz; "
                   "expected |detuning_hz| below the drive frequency (the cavity frequency "
                   "f_drive − detuning_hz must be positive, and the rotating-frame model "
                   "assumes |Δ| ≪ f_drive)")

    @property
    def carrier_frequency_hz(self):
        """Drive carrier frequency (Hz), from whichever key the file gave."""
        if self.frequency_hz is not None:
            return self.frequency_hz
        from scipy.constants import c

        return c / self.wavelength_m


def port_problems(mode):
    """The external port of a cavity mode is part of its total loss: κ_ex ≤ κ."""
    if mode.external_linewidth_hz > mode.linewidth_hz:
        yield ("external_linewidth_hz",
               f"{mode.external_linewidth_hz!r} is larger than linewidth_hz = "
               f"{mode.linewidth_hz!r}; expected external_linewidth_hz ≤ "
               "linewidth_hz (the external port is part of the total loss)")


@_frozen
class Cavity:
    """``[cavity]``: the optical or microwave mode."""

    linewidth_hz: float = param("total energy decay rate κ/2π (FWHM)", unit="Hz",
                                check="positive", low=1e-3, high=1e14)
    external_linewidth_hz: float = param(
        "decay rate κ_ex/2π into the port that is driven and detected", unit="Hz",
        check="positive", low=1e-3, high=1e14)
    bath_occupation: float = param(
        "thermal photon occupation of the internal-loss bath (microwave cavities)",
        check="nonnegative", default=0.0, high=1e8)

    def problems(self):
        """Cross-field checks: yields ``(key, message)`` for each inconsistency."""
        yield from port_problems(self)


@_frozen
class Mechanics:
    """``[[mechanics]]``: one mechanical mode coupled to the cavity."""

    EXCLUSIVE = (("bath_temperature_k", "bath_occupation"),)

    name: str = param("name of the mode, unique within the scenario", check="label")
    frequency_hz: float = param(
        "resonance frequency Ωm/2π", unit="Hz", check="positive", low=1e-3, high=1e12,
        why="a millihertz pendulum to terahertz phonons")
    linewidth_hz: float = param("intrinsic energy damping rate Γm/2π", unit="Hz",
                                check="positive", low=1e-12, high=1e12)
    effective_mass_kg: float = param(
        "effective mass of the mode", unit="kg", check="positive", low=1e-27, high=1e3,
        why="a hydrogen atom to a tonne")
    coupling_hz: float = param("single-photon coupling rate g0/2π", unit="Hz",
                               check="nonnegative", high=1e9)
    bath_temperature_k: float | None = param(
        "temperature of the mode's thermal bath", unit="K", check="nonnegative",
        default=None, high=1e4, why="hotter than any solid device survives")
    bath_occupation: float | None = param(
        "mean phonon occupation of the mode's thermal bath", check="nonnegative",
        default=None, high=1e18)


MAX_DETECTED_TONES = 64  # demodulators of one record: far beyond any digitiser's (our choice)


def parse_tone_names(value, key, source):
    """Check ``detection.tones``: a non-empty list of distinct tone names; freeze it."""
    from simulator.errors import ScenarioError
    from simulator.scenario.schema import CHECKS

    if not isinstance(value, list) or not 1 <= len(value) <= MAX_DETECTED_TONES:
        raise ScenarioError(f"{str(value)[:80]} is not a list of 1 to {MAX_DETECTED_TONES} "
                            "tone names; expected e.g. [\"red_probe\", \"blue_probe\"]",
                            source=source, key=key)
    for i, name in enumerate(value):
        if not isinstance(name, str) or not CHECKS["label"][0](name):
            raise ScenarioError(f"{name!r} is not a tone name; expected {CHECKS['label'][1]}",
                                source=source, key=f"{key}[{i}]")
        if name in value[:i]:
            raise ScenarioError(f"{name!r} is listed twice; expected each tone once (one "
                                "I/Q pair per tone)", source=source, key=f"{key}[{i}]")
    return tuple(value)


@_frozen
class Detection:
    """``[detection]``: how the output field is measured."""

    # one demodulated tone or a list of them; setting either by path clears the other
    ALTERNATIVES = (("tone", "tones"),)

    scheme: str = param("detection scheme", choices=("heterodyne", "homodyne"),
                        default="heterodyne")
    receiver: str = param(
        "what turns the output field into the record: \"optical\", a local "
        "oscillator beaten with it on a photodetector (photocurrent, transimpedance); "
        "\"microwave\", an amplifier chain and an IQ mixer whose outputs are digitised "
        "(needs electronics.amplifier_gain_db and the amplifier's added noise; no "
        "optical local oscillator, photocurrent or transimpedance)",
        choices=("optical", "microwave"), default="optical")
    efficiency: float = param(
        "total efficiency from the cavity port to the photocurrent (transmission "
        "losses times detector quantum efficiency), or to the first amplifier's input "
        "for a microwave receiver", check="fraction", default=1.0,
        low=1e-6, why="−60 dB; below it the record holds no signal")
    local_oscillator_power_w: float = param(
        "local-oscillator power at the detector; sets the photocurrent scale and so "
        "the weight of the electronic noise against shot noise", unit="W",
        check="positive", default=1e-3, low=1e-18, high=1.0)
    intermediate_frequency_hz: float = param(
        "offset of the local oscillator from the drive, |f_LO − f_drive|: the carrier "
        "of an \"if\" record; 0 for homodyne", unit="Hz", check="nonnegative",
        default=0.0, high=MAX_AUXILIARY_HZ)
    local_oscillator_side: str = param(
        "side of the drive the local oscillator sits on; below puts the anti-Stokes "
        "sideband above the intermediate frequency, above mirrors it",
        choices=("below", "above"), default="below")
    quadrature_angle_rad: float = param(
        "homodyne quadrature θ of X_θ = cos θ X + sin θ Y, from the amplitude "
        "quadrature; π/2 is the phase quadrature", unit="rad", check="real",
        default=1.5707963267948966, low=-2 * math.pi, high=2 * math.pi,
        why="one turn either way; far beyond it rounding loses the angle modulo 2π")
    local_oscillator_source: str = param(
        "where the local oscillator comes from: \"common\", a copy of the drive "
        "laser (its phase noise cancels, up to the path delay); \"locked\", a "
        "separate source phase-locked to the drive; \"independent\", a separate "
        "source, noise-free unless [detection.local_oscillator_phase_noise] is given",
        choices=("common", "locked", "independent"),
        default="common")
    local_oscillator_delay_s: float = param(
        "extra delay of the local-oscillator path over the signal path (\"common\" "
        "only)", unit="s", check="nonnegative", default=0.0, high=1.0)
    local_oscillator_lock_bandwidth_hz: float | None = param(
        "bandwidth of the first-order phase lock (\"locked\" only)", unit="Hz",
        check="positive", default=None, high=MAX_AUXILIARY_HZ)
    tone: str = param(
        "name of the drive tone whose output field the receiver demodulates: the local "
        "oscillator (or the microwave IQ reference) sits at that tone's frequency, offset "
        "by intermediate_frequency_hz; \"drive\" is the [drive] tone, any other name a "
        "[[tones]] table", check="label", default="drive")
    tones: tuple | None = param(
        "names of several drive tones demodulated at once, each into its own I/Q pair of "
        "one record (a digitiser with one demodulator per tone), instead of tone; "
        "heterodyne with kind = \"iq\" only; left out: the one tone named by tone",
        parser=parse_tone_names,
        default=None,
        accepts='a list of distinct tone names, e.g. ["red_probe", "blue_probe"]')
    backaction_evading: bool = param(
        "the [drive] and the one [[tones]] table are a back-action-evading pair at ±Ωm "
        "about the [cavity] mode (one mechanical mode): the model is their rotating-wave "
        "two-tone model (docs/physics.md, \"Back-action evasion\"), the receiver's "
        "reference sits at their mean frequency and the record measures one mechanical "
        "quadrature; detection.tone must stay \"drive\"", default=False)
    balanced: bool = param(
        "balanced detection (both ports of the signal–local-oscillator beam splitter "
        "subtracted); false: one port of a 50:50 combiner, which halves the efficiency",
        default=True)
    local_oscillator_phase_noise: PhaseNoise = section(
        PhaseNoise, "own phase noise of an \"independent\" local oscillator (floor and "
        "peak; a linewidth is refused: the beat of two free-running sources diffuses); "
        "left out: a noise-free local oscillator")


@_frozen
class Electronics:
    """``[electronics]``: amplifier and photocurrent electronics before the digitiser."""

    ALTERNATIVES = (("amplifier_added_quanta", "amplifier_noise_temperature_k"),)

    transimpedance_ohm: float = param(
        "transimpedance gain from photocurrent to voltage", unit="V/A",
        check="positive", default=1e4, low=1e-3, high=1e12)
    bandwidth_hz: float | None = param(
        "−3 dB frequency of the single-pole analogue low-pass; left out: no filter",
        unit="Hz", check="positive", default=None, high=MAX_AUXILIARY_HZ)
    current_noise_a_per_sqrt_hz: float = param(
        "input-referred current noise of the electronics, one-sided density",
        unit="A/√Hz", check="nonnegative", default=0.0, high=1e-3)
    amplifier_added_quanta: float = param(
        "noise added by a phase-preserving amplifier ahead of the detector (the "
        "microwave case: 10–20 for a cryogenic transistor amplifier), in quanta "
        "referred to its input; 0: no amplifier", check="nonnegative", default=0.0,
        high=1e6)
    amplifier_noise_temperature_k: float | None = param(
        "the amplifier's noise temperature T_N, instead of amplifier_added_quanta: "
        "n_add = k_B T_N/(h f) at the drive frequency f; left out: use "
        "amplifier_added_quanta", unit="K", check="positive", default=None, high=1e5,
        why="hotter than any amplifier worth using")
    amplifier_gain_db: float | None = param(
        "power gain from the amplifier's input to the digitiser (the whole chain: "
        "amplifiers, cables, mixer), receiver = \"microwave\" only", unit="dB",
        check="real", default=None, low=-50.0, high=200.0,
        why="from a lossy line to any stack of amplifiers")
    impedance_ohm: float = param(
        "characteristic impedance of the line and the digitiser's input, receiver "
        "= \"microwave\" only", unit="Ω", check="positive", default=50.0, low=1e-3,
        high=1e6)

    def problems(self):
        """Cross-field checks: yields ``(key, message)`` for each inconsistency."""
        if self.amplifier_noise_temperature_k is not None and self.amplifier_added_quanta:
            yield ("amplifier_noise_temperature_k",
                   f"{self.amplifier_noise_temperature_k!r} K given beside "
                   f"amplifier_added_quanta = {self.amplifier_added_quanta!r}; expected "
                   "one of the two (the noise temperature is the added noise in kelvin)")
        if 0.0 < self.amplifier_added_quanta < 0.5:
            yield ("amplifier_added_quanta",
                   f"{self.amplifier_added_quanta!r} is below the quantum limit of a "
                   "phase-preserving amplifier; expected 0 (no amplifier) or at least 0.5 "
                   "quanta (Caves, Phys. Rev. D 26, 1817 (1982))")


@_frozen
class Digitizer:
    """``[digitizer]``: the analogue-to-digital converter that delivers the record."""

    sample_rate_hz: float | None = param(
        "sample rate; left out: chosen to take in the cavity line and every "
        "mechanical sideband (see docs/records.md)", unit="Hz", check="positive",
        default=None, low=1.0, high=MAX_AUXILIARY_HZ)
    bits: int = param("resolution of the converter, 2 to 32 bits", check="positive",
                      default=16, low=2, high=32)
    full_scale_v: float | None = param(
        "input range ±full_scale_v; left out: eight times the record's noise standard "
        "deviation plus the calibration tone's amplitude", unit="V", check="positive",
        default=None, low=1e-12, high=1e6)


@_frozen
class RecordOptions:
    """``[record]``: the synthetic record written by ``noisechain record``."""

    duration_s: float = param("length of the record", unit="s", check="positive",
                              default=0.1, high=1e6, why="about 12 days")
    kind: str | None = param(
        "\"iq\": complex baseband I + iQ (heterodyne); \"if\": real samples at the "
        "intermediate frequency; left out: \"iq\" for heterodyne, \"if\" for homodyne "
        "(a real record at zero intermediate frequency)", choices=("iq", "if"),
        default=None)
    chunk_samples: int = param(
        "samples generated and written per step; sets memory use, not the result",
        check="positive", default=262144, high=2**30)
    store_mechanics: bool = param(
        "store the true mechanical quadratures beside the record", default=False)
    in_run: bool = param(
        "write this record (and its spectrum beside the analytic one) during "
        "`noisechain run`", default=False)
