"""The detected tone: the one tone whose output field the receiver demodulates.

With several drive tones (``[[tones]]``) the linear model
(:func:`simulator.model.optomechanics.several_tones_model`) has one output
field per tone, each in that tone's own frame. The receiver's local
oscillator (or microwave IQ reference) sits at the frequency of one of them,
``detection.tone``; the record sees the sidebands around that tone, filtered by
its cavity mode, while the mechanics carries the occupation set by every tone.

:func:`detected_parts` gives the operating point and model as every stage
after the steady state reads them: the point's one-tone fields (frequency,
photons, detunings, the linewidths of its cavity mode, each mechanical mode's
g = g0·√n and cooperativity) are the detected tone's, and the model's
outputs ``output.X/Y`` are that tone's output field alone: the receiver,
tuned to that tone, rejects the fields of the others (they lie at the tones'
spacing, outside its band; docs/physics.md §13 states when that holds). Every
state, input and noise source is kept: the
spectra, records and bounds computed from this model hold the scattering of
all tones. With the drive detected (the default) both are returned unchanged,
so a one-tone scenario is bit for bit what it was.

With ``detection.tones`` (several tones demodulated into one record,
:mod:`simulator.model.tone_channels`) the detected view is that of the first
listed tone; :func:`detected_tone_names` and :func:`tone_indices` name and
place every demodulated tone.
"""

import dataclasses

import numpy as np

from simulator.errors import InputError
from simulator.model.optomechanics import OUTPUTS
from simulator.scenario.tone_sections import (  # noqa: F401  (detected_tone_names: part of this module's API)
    PRIMARY_TONE,
    detected_tone_names,
)


def detected_index(scenario, point):
    """Index in ``point.tones`` of the tone named by ``detection.tone`` (0: the drive);
    with ``detection.tones``, of the first one listed."""
    return tone_indices(point, detected_tone_names(scenario)[:1])[0]


def require_quiet_detection(scenario):
    """Refuse a calibration tone with several tones unless the drive's receiver alone
    records (see :func:`detected_parts`).

    The tone modulates the drive's phase: its lines sit at ±Ω about the drive, in the
    drive's own output field. The drive's receiver sees them there, beside the drive's
    motional sidebands, as with one tone (the mechanics' response to the modulation
    carries every tone's damping and spring). Another tone's receiver would see them
    at the tones' spacing ± Ω, in the drive's field, which the model of several tones
    leaves out of that receiver's record (its carrier and sidebands too); what is left
    there is the mechanics' response alone, with no line of known depth beside the
    motional sidebands to calibrate them against, so it is refused.
    """
    names = detected_tone_names(scenario)
    if scenario.drive.calibration_tone.depth_rad > 0 and tuple(names) != (PRIMARY_TONE,):
        raise InputError(
            f"a calibration tone (drive.calibration_tone) recorded by the receiver of "
            f"{', '.join(repr(n) for n in names)}: the tone modulates the drive, and its "
            "lines lie in the drive's field, at the tones' spacing ± Ω from that receiver, "
            "where the model of several tones keeps none of the drive's field; expected "
            "detection.tone = \"drive\" (the drive's receiver sees the lines at ±Ω), or "
            "no calibration tone")


def detected_parts(scenario, point, model):
    """``(point, model)`` as seen by the receiver of ``detection.tone`` (module doc).

    Raises
    ------
    InputError
        With several tones, a calibration tone on the drive and another tone's
        receiver (:func:`require_quiet_detection`).
    """
    if not point.several_tones:
        return point, model
    require_quiet_detection(scenario)
    if scenario.detection.backaction_evading:  # the pair's field, at its mean frequency
        from simulator.model.backaction_evasion import pair_point

        return pair_point(scenario, point), model
    k = detected_index(scenario, point)
    seen = point if k == 0 else tone_point_of(scenario, point, k)
    return seen, _detected_outputs(model, k)


def tone_point_of(scenario, point, k):
    """The operating point with its one-tone fields taken from tone ``k`` of ``point.tones``
    (which, with the cavity modes, it keeps)."""
    from simulator.model.tone_point import coupling_matrix_hz

    tone = point.tones[k]
    cav = point.cavity_modes[tone.cavity_mode]
    g0 = coupling_matrix_hz(scenario)[tone.cavity_mode]
    modes = tuple(_mode_for_tone(mode, g0[j], tone.coupling_rates_hz[j], cav.linewidth_hz)
                  for j, mode in enumerate(point.modes))
    return dataclasses.replace(
        point, drive_frequency_hz=tone.frequency_hz, input_photon_flux=tone.input_photon_flux,
        photon_number=tone.photon_number, detuning_bare_hz=tone.detuning_bare_hz,
        detuning_effective_hz=tone.detuning_effective_hz,
        cavity_linewidth_hz=cav.linewidth_hz, external_linewidth_hz=cav.external_linewidth_hz,
        cavity_bath_occupation=cav.bath_occupation, modes=modes)


def _mode_for_tone(mode, g0_hz, g_hz, kappa_hz):
    """A mechanical mode's coupling quantities for one tone: g, C = 4g²/(κΓm), C/n_th."""
    cooperativity = 4 * g_hz**2 / (kappa_hz * mode.linewidth_hz)
    with np.errstate(divide="ignore", invalid="ignore"):
        quantum = (np.float64(cooperativity) / mode.bath_occupation
                   if mode.bath_occupation > 0 else np.inf)
    return dataclasses.replace(
        mode, single_photon_coupling_hz=float(g0_hz), coupling_rate_hz=float(g_hz),
        cooperativity=float(cooperativity), quantum_cooperativity=float(quantum),
        sideband_resolution=mode.frequency_hz / float(kappa_hz))


def _detected_outputs(model, k):
    """``model`` with tone ``k``'s output pair alone, named ``output.X/Y``: what the
    receiver demodulates (the other tones' fields pass it by, see the module doc)."""
    rows = [2 * k, 2 * k + 1]
    return dataclasses.replace(model, C=model.C[rows], D=model.D[rows], outputs=OUTPUTS)


def tone_indices(point, names):
    """Index in ``point.tones`` of every name in ``names`` (0: the drive, with one tone)."""
    known = [tone.name for tone in point.tones]
    if not known:
        return [0 for _ in names]
    missing = [n for n in names if n not in known]
    if missing:
        raise InputError(f"detected tone(s) {', '.join(map(repr, missing))} name no drive "
                         f"tone; expected names among {', '.join(map(repr, known))}")
    return [known.index(n) for n in names]


def channel_index(tones, tone, single):
    """Index of the detected tone ``tone`` among ``tones`` (a record's or averaged
    spectrum's channels); ``single`` says what to use when it holds one tone.

    Raises
    ------
    InputError
        One detected tone only, or no channel of that name.
    """
    if not tones:
        raise InputError(f"channel({tone!r}): this {single}")
    if tone not in tones:
        raise InputError(f"channel({tone!r}): no such detected tone; expected one of "
                         f"{', '.join(map(repr, tones))}")
    return tones.index(tone)
