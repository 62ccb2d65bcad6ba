"""Cross-section checks of the local oscillator's reference (``detection.local_oscillator_*``
against the drive's phase noise and the mechanical frequencies).

A common local oscillator shares the phase noise of the detected tone's laser
(the drive's, unless ``detection.tone`` names another tone), delayed by τ (a
one-state Padé delay, valid for 2π f τ ≤ ``DELAY_LIMIT``); a locked one follows
it within a lock bandwidth; an independent one has its own phase noise, which
must have a stationary spectrum (no white frequency noise). Called by the
loader (:class:`simulator.scenario.loader.Scenario`).
"""

import math

from simulator.scenario.tone_sections import noise_lasers, noise_tables

DELAY_LIMIT = 0.5  # largest 2π f_m τ of the one-state (Padé) delay of the LO path


def local_oscillator_problems(scenario):
    """Cross-section checks of the LO reference: yields ``(key, message)``."""
    det, noise, key = scenario.detection, *_detected_phase_noise(scenario)
    source, tau = det.local_oscillator_source, det.local_oscillator_delay_s
    if source == "locked" and det.local_oscillator_lock_bandwidth_hz is None:
        yield ("detection.local_oscillator_lock_bandwidth_hz", 'missing with '
               'local_oscillator_source = "locked"; expected the lock bandwidth in Hz')
    if source != "locked" and det.local_oscillator_lock_bandwidth_hz is not None:
        yield ("detection.local_oscillator_lock_bandwidth_hz", f'set with '
               f'local_oscillator_source = "{source}"; expected it only for "locked"')
    if source != "common" and tau > 0:
        yield ("detection.local_oscillator_delay_s", f'{tau!r} s with '
               f'local_oscillator_source = "{source}"; expected 0 (a delay applies to a '
               'common local oscillator only)')
    if source == "independent" and noise.linewidth_hz > 0:
        yield (f"{key}.phase_noise.linewidth_hz", f"{noise.linewidth_hz!r} Hz with an "
               "independent local oscillator: the relative phase of white frequency "
               "noise is a random walk (the beat note diffuses), which has no "
               'stationary spectrum; expected local_oscillator_source = "common" (with '
               'local_oscillator_delay_s) or "locked", or linewidth_hz = 0')
    own = det.local_oscillator_phase_noise
    if own != type(own)() and source != "independent":
        yield ("detection.local_oscillator_phase_noise", f'given with '
               f'local_oscillator_source = "{source}"; expected it only for "independent" '
               '(a common or locked local oscillator takes its phase from the drive)')
    if own.linewidth_hz > 0:
        yield ("detection.local_oscillator_phase_noise.linewidth_hz", f"{own.linewidth_hz!r} "
               "Hz: the beat of two free-running sources is a random walk in phase with no "
               "stationary spectrum; expected 0 (give the floor and peak of the local "
               'oscillator\'s phase noise), or local_oscillator_source = "locked"')
    if source == "common" and tau > 0:
        for mode in scenario.mechanics:
            x = 2 * math.pi * mode.frequency_hz * tau
            if x > DELAY_LIMIT:
                yield ("detection.local_oscillator_delay_s", f"{tau!r} s gives 2π f τ = "
                       f"{x:.3g} at mode {mode.name}; expected 2π f τ ≤ {DELAY_LIMIT}, "
                       "where the one-state delay model errs by at most (2π f τ)²/6 "
                       "≈ 4 % in the phase-difference spectrum")


def _detected_phase_noise(scenario):
    """(phase noise, its section path) of the laser of the tone ``detection.tone`` names:
    the local oscillator's reference (the drive's unless a tone is detected)."""
    try:
        laser = noise_lasers(scenario)[scenario.detection.tone][0]
    except KeyError:  # a bad tone name or a loop, reported by tone_problems
        laser = "drive"
    noise, _, key = noise_tables(scenario, laser)
    return noise, key
