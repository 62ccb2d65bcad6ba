"""Sections for several cavity modes and drive tones: ``[[cavity_modes]]``, ``[[tones]]``,
``[[couplings]]``.

A scenario always has one drive (``[drive]``) on one cavity mode (``[cavity]``);
that pair keeps its meaning. These optional sections add further cavity modes
(each with its own linewidths and bath), further coherent tones (each on a
named cavity mode, with its own detuning and power) and the single-photon
couplings of the added cavity modes to the mechanical modes. The ``[cavity]``
mode is named :data:`PRIMARY_CAVITY` and the ``[drive]`` tone :data:`PRIMARY_TONE`;
those names are reserved.

How the model treats several tones (one fluctuation field per tone, each in
its own rotating frame) and when that holds is in docs/physics.md, "Several
tones and cavity modes".
"""

import dataclasses

from simulator.scenario.schema import param, section
from simulator.scenario.sections import (
    MAX_AUXILIARY_HZ,
    MIN_DRIVE_POWER_W,
    IntensityNoise,
    PhaseNoise,
    port_problems,
)

_frozen = dataclasses.dataclass(frozen=True, kw_only=True)

PRIMARY_CAVITY = "cavity"  # name of the [cavity] mode, for tones and couplings
PRIMARY_TONE = "drive"  # name of the [drive] tone
OWN_NOISE = "own"  # noise_source of a tone with its own laser (a reserved tone name)


@_frozen
class CavityMode:
    """``[[cavity_modes]]``: a further optical or microwave mode of the device."""

    name: str = param(f"name of the mode, unique; \"{PRIMARY_CAVITY}\" is the [cavity] "
                      "mode", check="label")
    frequency_hz: float = param(
        "bare resonance frequency of the mode (sets the photon energy of its tones)",
        unit="Hz", check="positive", low=3e7, high=3e15,
        why="radio waves to ultraviolet, the span of drive.frequency_hz")
    linewidth_hz: float = param("total energy decay rate κ/2π (FWHM)", unit="Hz",
                                check="positive", low=1e-3, high=1e14)
    external_linewidth_hz: float = param(
        "decay rate κ_ex/2π into the port its tones drive", unit="Hz", check="positive",
        low=1e-3, high=1e14)
    bath_occupation: float = param(
        "thermal photon occupation of the internal-loss bath (microwave cavities)",
        check="nonnegative", default=0.0, high=1e8)

    def problems(self):
        """Cross-field checks: yields ``(key, message)`` for each inconsistency."""
        yield from port_problems(self)


@_frozen
class Tone:
    """``[[tones]]``: a further coherent drive tone on one cavity mode."""

    name: str = param(f"name of the tone, unique; \"{PRIMARY_TONE}\" is the [drive] tone",
                      check="label")
    cavity_mode: str = param(
        f"name of the cavity mode the tone drives: \"{PRIMARY_CAVITY}\" (the [cavity] "
        "mode) or the name of a [[cavity_modes]] table", check="label",
        default=PRIMARY_CAVITY)
    power_w: float = param(f"tone power arriving at the mode's external port; 0 or at "
                           f"least {MIN_DRIVE_POWER_W:g} W", unit="W", check="nonnegative",
                           high=1e3, why="1 kW, above any continuous drive a device survives")
    detuning_hz: float = param(
        "tone minus cavity-mode frequency, red negative, measured like drive.detuning_hz "
        "(from the bare or effective resonance, as drive.detuning_reference says)",
        unit="Hz", check="real")
    noise_source: str = param(
        f"classical noise of the tone: \"{OWN_NOISE}\", its own phase_noise and "
        "intensity_noise tables below (none when left out); or the name of another tone "
        f"(\"{PRIMARY_TONE}\" for [drive]) made by the same laser, whose phase noise it "
        "shares (one random process) and whose intensity noise it shares unless it gives "
        "an intensity_noise table of its own", check="label", default=OWN_NOISE)
    phase_noise: PhaseNoise = section(
        PhaseNoise, "own classical phase noise of the tone; left out: none")
    intensity_noise: IntensityNoise = section(
        IntensityNoise, "classical intensity noise of the tone, independent of any other "
        "tone's (also when it shares another tone's laser); left out: none, or the "
        "shared laser's")

    def problems(self):
        """Cross-field checks: yields ``(key, message)`` for each inconsistency."""
        if 0 < self.power_w < MIN_DRIVE_POWER_W:
            yield ("power_w", f"{self.power_w!r} W is a rounding error, not a drive; "
                   f"expected 0 or at least {MIN_DRIVE_POWER_W:g} W")
        if not abs(self.detuning_hz) < MAX_AUXILIARY_HZ:
            yield ("detuning_hz", f"{self.detuning_hz!r} Hz is out of range; expected "
                   f"|detuning_hz| below {MAX_AUXILIARY_HZ:g} Hz")
        if self.noise_source != OWN_NOISE and self.phase_noise != PhaseNoise():
            yield ("noise_source", f"{self.noise_source!r} (the phase noise of that tone's "
                   "laser) with a phase_noise table of its own; expected either the shared "
                   f"phase noise or the tone's own (noise_source = \"{OWN_NOISE}\"), not both")


@_frozen
class Coupling:
    """``[[couplings]]``: single-photon coupling of a further cavity mode to a mechanical mode."""

    cavity_mode: str = param("name of a [[cavity_modes]] table (the coupling to the "
                             "[cavity] mode is mechanics.coupling_hz)", check="label")
    mechanics: str = param("name of a [[mechanics]] table", check="label")
    coupling_hz: float = param("single-photon coupling rate g0/2π of the pair; pairs "
                               "left out are uncoupled", unit="Hz", check="nonnegative",
                               high=1e9)


def tone_problems(scenario):
    """Cross-section checks of cavity modes, tones and couplings: yields ``(key, message)``."""
    modes = [PRIMARY_CAVITY]
    for i, mode in enumerate(scenario.cavity_modes):
        if mode.name in modes:
            yield (f"cavity_modes[{i}].name", f"{mode.name!r} is already used "
                   f"(\"{PRIMARY_CAVITY}\" names the [cavity] mode); expected unique names")
        modes.append(mode.name)
        if mode.linewidth_hz > mode.frequency_hz:
            yield (f"cavity_modes[{i}].linewidth_hz", f"{mode.linewidth_hz!r} Hz is wider "
                   f"than the mode's frequency {mode.frequency_hz!r} Hz; expected a "
                   "resonance (linewidth below its frequency)")
    drive = scenario.drive
    frequency = {PRIMARY_CAVITY: drive.carrier_frequency_hz - drive.detuning_hz}
    frequency.update({m.name: m.frequency_hz for m in scenario.cavity_modes})
    tones = [PRIMARY_TONE]
    for i, tone in enumerate(scenario.tones):
        if tone.name in tones:
            yield (f"tones[{i}].name", f"{tone.name!r} is already used (\"{PRIMARY_TONE}\" "
                   "names the [drive] tone); expected unique names")
        tones.append(tone.name)
        if tone.name == OWN_NOISE:
            yield (f"tones[{i}].name", f"\"{OWN_NOISE}\" is reserved (noise_source = "
                   f"\"{OWN_NOISE}\" means the tone's own noise); expected another name")
        if tone.cavity_mode not in modes:
            yield (f"tones[{i}].cavity_mode", f"{tone.cavity_mode!r} names no cavity mode; "
                   f"expected one of {', '.join(map(repr, modes))}")
        elif not abs(tone.detuning_hz) < frequency[tone.cavity_mode]:
            yield (f"tones[{i}].detuning_hz", f"{tone.detuning_hz!r} Hz puts the tone at "
                   f"{frequency[tone.cavity_mode] + tone.detuning_hz:.6g} Hz for a mode at "
                   f"{frequency[tone.cavity_mode]:.6g} Hz; expected |detuning_hz| below the "
                   "mode's frequency (the rotating-frame model assumes |Δ| ≪ its frequency)")
    yield from _noise_source_problems(scenario, tones)
    if scenario.detection.tone not in tones:
        yield ("detection.tone", f"{scenario.detection.tone!r} names no drive tone; expected "
               f"one of {', '.join(map(repr, tones))}")
    yield from detected_tones_problems(scenario, tones)
    mechanics, seen = [m.name for m in scenario.mechanics], set()
    for i, pair in enumerate(scenario.couplings):
        key = f"couplings[{i}]"
        if pair.cavity_mode == PRIMARY_CAVITY:
            yield (f"{key}.cavity_mode", f"\"{PRIMARY_CAVITY}\": the coupling to the [cavity] "
                   "mode is given by mechanics.coupling_hz; expected a [[cavity_modes]] name")
        elif pair.cavity_mode not in modes:
            yield (f"{key}.cavity_mode", f"{pair.cavity_mode!r} names no [[cavity_modes]] "
                   f"table; expected one of {', '.join(map(repr, modes[1:])) or '(none given)'}")
        if pair.mechanics not in mechanics:
            yield (f"{key}.mechanics", f"{pair.mechanics!r} names no [[mechanics]] table; "
                   f"expected one of {', '.join(map(repr, mechanics))}")
        if (pair.cavity_mode, pair.mechanics) in seen:
            yield (key, f"the pair ({pair.cavity_mode!r}, {pair.mechanics!r}) is given twice; "
                   "expected one coupling per pair")
        seen.add((pair.cavity_mode, pair.mechanics))


def _noise_source_problems(scenario, names):
    """Each tone's ``noise_source`` names a tone, and following them ends at a laser."""
    by_name = {t.name: t for t in scenario.tones}
    for i, tone in enumerate(scenario.tones):
        key, chain = f"tones[{i}].noise_source", [tone.name]
        while by_name.get(chain[-1]) is not None and (
                by_name[chain[-1]].noise_source != OWN_NOISE):
            chain.append(by_name[chain[-1]].noise_source)
            if chain[-1] in chain[:-1]:
                yield (key, f"{tone.noise_source!r} closes a loop of shared lasers "
                       f"({' → '.join(map(repr, chain))}); expected the chain of "
                       f"noise_source names to end at \"{PRIMARY_TONE}\" or at a tone "
                       f"with noise_source = \"{OWN_NOISE}\"")
                break
            if chain[-1] not in names:
                if len(chain) == 2:
                    yield (key, f"{tone.noise_source!r} names no tone; expected "
                           f"\"{OWN_NOISE}\" or one of {', '.join(map(repr, names))}")
                break


def noise_lasers(scenario):
    """``{tone name: (phase laser, intensity laser)}`` for ``[drive]`` and every tone.

    A laser is named by the tone whose tables hold its noise: ``[drive]`` and
    every tone with ``noise_source = "own"`` are lasers of their own. A tone
    naming another tone takes that tone's phase laser (the same random
    process) and its intensity laser, unless it has an ``intensity_noise``
    table of its own, which then is its own and independent. The scenario must
    be valid (no loops, see :func:`tone_problems`).
    """
    by_name = {t.name: t for t in scenario.tones}
    out = {PRIMARY_TONE: (PRIMARY_TONE, PRIMARY_TONE)}

    def resolve(name, visiting=()):
        if name in visiting:
            raise KeyError(f"loop of shared lasers through tone {name!r}")
        if name not in out:
            tone = by_name[name]
            if tone.noise_source == OWN_NOISE:
                out[name] = (name, name)
            else:
                phase, intensity = resolve(tone.noise_source, (*visiting, name))
                own = tone.intensity_noise != IntensityNoise()
                out[name] = (phase, name if own else intensity)
        return out[name]

    for tone in scenario.tones:
        resolve(tone.name)
    return out


def noise_tables(scenario, name):
    """``(phase_noise, intensity_noise, key)`` of the tone ``name``: its tables and their
    scenario path (``"drive"`` or ``"tones[i]"``)."""
    if name == PRIMARY_TONE:
        return scenario.drive.phase_noise, scenario.drive.intensity_noise, PRIMARY_TONE
    i = [t.name for t in scenario.tones].index(name)
    tone = scenario.tones[i]
    return tone.phase_noise, tone.intensity_noise, f"tones[{i}]"


def is_quiet(scenario):
    """True when no tone, nor the local oscillator, carries classical noise, and the drive
    no calibration tone."""
    d = scenario.drive
    tables = [d.phase_noise, d.intensity_noise, d.calibration_tone,
              scenario.detection.local_oscillator_phase_noise]
    tables += [x for t in scenario.tones for x in (t.phase_noise, t.intensity_noise)]
    return all(x == type(x)() for x in tables)


def detected_tone_names(scenario):
    """The demodulated tones: ``detection.tones``, or the one ``detection.tone``."""
    det = scenario.detection
    return det.tones if det.tones is not None else (det.tone,)


def reference_words(scenario):
    """What the receiver's reference sits at, in words for axis labels: "the drive",
    "tone <name>" (the detected tone, the first listed one with ``detection.tones``) or
    "the pair's mean frequency" (a back-action-evading pair)."""
    if scenario.detection.backaction_evading:
        return "the pair's mean frequency"
    name = detected_tone_names(scenario)[0]
    return "the drive" if name == PRIMARY_TONE else f"tone {name}"


def offset_words(scenario, *, above=False):
    """The heterodyne record's frequency axis in words: the offset from the receiver's
    reference (:func:`reference_words`) and where the lines are; ``above`` adds that
    positive offsets lie above the reference."""
    reference = reference_words(scenario)
    if scenario.detection.backaction_evading:
        return f"offset from {reference} (X1's line at 0)"
    return (f"offset from {reference} (> 0: anti-Stokes"
            + (f", above {reference})" if above else ")"))


def detected_tones_problems(scenario, tones):
    """Checks of ``detection.tones`` against the tones and the receiver: ``(key, message)``.

    One name is the same request as ``detection.tone``; several need the
    heterodyne iq receiver (one I/Q pair per demodulated tone). One real
    record holding every tone's sidebands at an intermediate frequency is not
    offered (docs/records.md, "Several tones").
    """
    det = scenario.detection
    if det.tones is None:
        return
    if det.tone != PRIMARY_TONE:
        yield ("detection.tones", f"given beside detection.tone = {det.tone!r}; expected one "
               "of the two (tones lists every demodulated tone, tone names a single one)")
    for i, name in enumerate(det.tones):
        if name not in tones:
            yield (f"detection.tones[{i}]", f"{name!r} names no drive tone; expected one "
                   f"of {', '.join(map(repr, tones))}")
    if len(det.tones) > 1 and (det.scheme != "heterodyne"
                               or (scenario.record.kind or "iq") != "iq"):
        what = ("homodyne" if det.scheme != "heterodyne"
                else f'record.kind = "{scenario.record.kind}"')
        yield ("detection.tones", f"{len(det.tones)} tones with {what}; expected scheme = "
               '"heterodyne" with record.kind = "iq": each tone is demodulated into its own '
               "I/Q pair (one real record holding every tone's sidebands at an intermediate "
               "frequency is not offered)")


def pair_problems(scenario):
    """Checks of a declared back-action-evading pair (``detection.backaction_evading``):
    the [drive] and exactly one [[tones]] table on the [cavity] mode, one mechanical
    mode, the receiver at the pair (``detection.tone`` the drive). Yields ``(key, message)``."""
    if not scenario.detection.backaction_evading:
        return
    key = "detection.backaction_evading"
    tones = scenario.tones
    if len(tones) != 1 or tones[0].cavity_mode != PRIMARY_CAVITY:
        where = ", ".join(f"{t.name!r} on {t.cavity_mode!r}" for t in tones) or "none"
        yield (key, f"true with [[tones]] {where}; expected the [drive] and exactly one "
               f"[[tones]] table on the \"{PRIMARY_CAVITY}\" mode, a pair at ±Ωm about it")
    if len(scenario.mechanics) != 1:
        yield (key, f"true with {len(scenario.mechanics)} [[mechanics]] tables; expected "
               "one mechanical mode, the one whose quadrature the pair measures")
    if scenario.schedule is not None:
        yield ("schedule", "a [schedule] with detection.backaction_evading is not supported "
               "yet (its segments kick and watch the mode's q, p; the pair's model holds "
               "X1, X2); expected no [schedule] for a back-action-evading pair")
    if not is_quiet(scenario):
        yield (key, "true with classical noise on a tone (drive.phase_noise, "
               "drive.intensity_noise, drive.calibration_tone, a tone's own noise tables) or "
               "a noisy local oscillator; the back-action-evading pair's model does not carry "
               "classical noise yet; expected quiet tones for a pair")
    if scenario.detection.tone != PRIMARY_TONE:
        yield ("detection.tone", f"{scenario.detection.tone!r} with detection."
               "backaction_evading: the receiver's reference sits at the pair's mean "
               f"frequency; expected \"{PRIMARY_TONE}\" (the default)")
