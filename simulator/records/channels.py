"""The truth of each channel of a record of several detected tones.

A record with ``detection.tones`` holds one I/Q pair per tone
(:mod:`simulator.model.tone_channels`). The occupations, effective
frequencies and linewidths are the device's, shared by every pair; what
differs from pair to pair is the tone's frame (its frequency and detuning,
the cavity mode it drives), its photons and couplings g = g0·√n, and the
scale of its channel (volts per shot-noise unit follow the tone's
frequency). :func:`channel_truths` gathers them, one dict per pair.
"""

import dataclasses


def channel_truths(system, chain, common):
    """One dict per detected tone of ``chain`` (in its order): frame, photons,
    couplings and calibration.

    Parameters
    ----------
    system : simulator.model.system.System
        The detected view of a several-tone system (its point keeps every tone).
    chain : simulator.model.chain.DetectionChain
        With ``tones`` and ``channel_scales`` (:attr:`System.channels`).
    common : dict
        The record's calibration; each channel's replaces the scale entries by its own.
    """
    from simulator.model.detected_tone import tone_indices, tone_point_of

    point, scenario = system.point, system.scenario
    cavity_names = [c.name for c in point.cavity_modes]
    out = []
    for name, k, scales in zip(chain.tones, tone_indices(point, chain.tones),
                               chain.channel_scales, strict=True):
        seen = tone_point_of(scenario, point, k)
        own = dataclasses.replace(chain, **scales)
        calibration = dict(common)
        calibration.pop("detected_tone", None)
        calibration.pop("detected_tone_frequency_hz", None)
        calibration.update(own.calibration())
        out.append({
            "tone": name, "cavity_mode": cavity_names[point.tones[k].cavity_mode],
            "frequency_hz": float(seen.drive_frequency_hz),
            "detuning_bare_hz": float(seen.detuning_bare_hz),
            "detuning_effective_hz": float(seen.detuning_effective_hz),
            "photon_number": float(seen.photon_number),
            "coupling_rate_hz": tuple(float(m.coupling_rate_hz) for m in seen.modes),
            "cooperativity": tuple(float(m.cooperativity) for m in seen.modes),
            "calibration": calibration})
    return out and tuple(out)
