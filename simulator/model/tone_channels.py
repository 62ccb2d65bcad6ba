"""Several detected tones: one state space, one demodulator per tone, channels stacked.

A record with ``detection.tones = ["red_probe", "blue_probe"]`` holds one
I/Q pair per listed tone, as a digitiser with several digital demodulators
delivers it; a scheme that records several tones with receivers of their
own (the probe-sideband scheme, Weinstein et al., Phys. Rev. X 4, 041003
(2014): the red probe's anti-Stokes line and the blue probe's Stokes line)
is bounded from the same joint model
(:mod:`simulator.analysis.joint_feasibility`). The reference of demodulator
k sits at tone k's frequency, and its channels hold tone k's output field in
that tone's own frame (docs/physics.md §13: one fluctuation field per tone).
The channels come from one linear model: the same mechanical motion
scatters every tone's sidebands, so they are jointly Gaussian and
correlated, and records, spectral matrices and bounds are computed from
that joint model (one state, every channel an output), never from K
separate ones.

:func:`tones_chain` builds it: the device's states and inputs once, then
for every tone the receiver of :func:`simulator.model.chain.detection_chain`
(:func:`~simulator.model.chain.demodulator`): its own detection-loss vacuum,
heterodyne split or amplifier added noise and electronics current noise,
each an input of its own, and a low-pass filter state per channel. Outputs
``record.<tone>.I/Q`` (heterodyne iq) or ``record.<tone>`` (homodyne, every
detector at ``detection.quadrature_angle_rad``). Each demodulator is
modelled as seeing its own tone's band only, like the one-tone record
(where the bands of two demodulators overlap, the shared vacuum correlates
them only at offsets a tone spacing apart, which averages out of the
time-averaged spectral matrix; docs/physics.md §13). The correlation between
the channels comes from the device's states alone. Every demodulator is
referred to its own tone's laser (the local-oscillator reference of
:func:`simulator.model.laser_noise.laser_model`, given the demodulated
tones), and its scales (volts per record unit, the local oscillator's or
h f of the microwave receiver) follow its tone's frequency. One tone alone
gives exactly its own :attr:`System.chain <simulator.model.system.System.chain>`
(the channels named after the tone).

:func:`simulator.linear.channel_spectra.joint_spectral_matrix` is the
analytic spectral matrix of the channels, at the cavity port or at the
digitiser, continuous or of the samples. Real (``if``) records, whose
channel is the real photocurrent at an intermediate frequency, are refused:
their joint matrix (each tone's image band beside the other's) is not built.
"""

import dataclasses

from simulator.errors import InputError


def channels_chain(scenario, point, model):
    """The detection chain with one demodulator per tone of ``detection.tones``.

    ``point`` and ``model`` are the whole several-tone System's (every tone's
    output field). Returns None when one tone is demodulated (the one-tone
    chain of :attr:`simulator.model.system.System.chain` then serves). Called
    once per System by :attr:`simulator.model.system.System.channels`.
    """
    from simulator.model.detected_tone import detected_tone_names

    names = detected_tone_names(scenario)
    if len(names) < 2:
        return None
    return tones_chain(scenario, point, model, names)


def tone_names(scenario):
    """Every tone a receiver can demodulate: ``"drive"`` and the ``[[tones]]`` names."""
    return ("drive",) + tuple(t.name for t in scenario.tones)


def check_tones(scenario, tones):
    """The tuple of ``tones``, or :class:`InputError` for an unknown, repeated or empty list."""
    known = tone_names(scenario)
    tones = tuple(tones)
    unknown = [t for t in tones if t not in known]
    if unknown or len(set(tones)) != len(tones) or not tones:
        raise InputError(f"detected tones {list(tones)!r}: expected distinct names among "
                         f"{', '.join(known)} (the [drive] tone is \"drive\")")
    return tones


def tones_chain(scenario, point, model, tones):
    """The chain of one demodulator per tone of ``tones`` on the device ``model`` (module doc).

    Parameters
    ----------
    scenario : Scenario
    point, model
        The operating point and the whole linear model (every tone's field),
        as held by :class:`simulator.model.system.System` (``point``, ``model``).
    tones : sequence of str
        Names of the demodulated tones (``"drive"`` for the ``[drive]`` tone).

    Returns
    -------
    DetectionChain
        With ``tones`` and ``channel_scales``; the scale fields are the first
        tone's, every tone's are in ``channel_scales``.
    """
    from simulator.model.chain import (
        ChainBuilder,
        DetectionChain,
        demodulator,
        receiver_of,
        receiver_scales,
    )
    from simulator.model.detected_tone import require_quiet_detection, tone_indices, tone_point_of
    from simulator.scenario.receiver import amplifier_added_quanta

    tones = check_tones(scenario, tones)
    receiver = receiver_of(scenario)
    if receiver == "if":
        raise InputError("record.kind = 'if': the joint record of several detected tones is "
                         "built for iq and homodyne receivers only; set record.kind = 'iq' "
                         "(the bound of one real photocurrent is that of its own tone)")
    if scenario.detection.backaction_evading:
        raise InputError("detection.backaction_evading: the pair is demodulated as one field "
                         "at its mean frequency (System.chain); a joint record of its tones "
                         "apart is not built")
    if point.several_tones:
        require_quiet_detection(scenario)
    model = demodulated_model(scenario, point, model, tones)
    det, el = scenario.detection, scenario.electronics
    share = 1.0 if det.balanced else 0.5
    eta = det.efficiency * share
    added = amplifier_added_quanta(scenario)
    if receiver == "iq" and added == 0.0:
        added = 0.5  # the heterodyne split's vacuum
    side = 1.0 if det.local_oscillator_side == "above" else -1.0
    builder = ChainBuilder(model)
    channels, outputs, per_tone = [], [], []
    for tag, k in zip(tones, tone_indices(point, tones), strict=True):
        seen = tone_point_of(scenario, point, k) if point.several_tones else point
        scales = receiver_scales(scenario, receiver, share, side, seen.drive_frequency_hz)
        electronic = scales.pop("electronic")
        ch, nm = demodulator(builder, scenario, receiver, eta, added, electronic,
                             rows=(2 * k, 2 * k + 1), tag=tag)
        channels += ch
        outputs += nm
        per_tone.append(dict(scales, electronic_noise=electronic))
    chain_model = builder.finish(channels, tuple(outputs), el.bandwidth_hz, 0.0)
    first = {k: v for k, v in per_tone[0].items() if k != "electronic_noise"}
    return DetectionChain(model=chain_model, receiver=receiver, carrier_rad_s=0.0,
                          efficiency=eta, added_quanta=added,
                          electronic_noise=per_tone[0]["electronic_noise"],
                          tones=tones, channel_scales=tuple(per_tone), **first)


def demodulated_model(scenario, point, model, tones):
    """``model`` with the local oscillator referred to the lasers of ``tones``.

    The System's model refers the outputs of the scenario's demodulated tones
    (``detection.tones`` or ``detection.tone``) to the local oscillator and
    leaves every other tone's output in its own laser's frame
    (:func:`simulator.model.laser_noise.laser_model`). A joint bound of other
    tones needs their outputs referred instead; with quiet lasers, or the
    same tones, ``model`` itself serves.
    """
    from simulator.model import laser_noise
    from simulator.model.detected_tone import detected_tone_names
    from simulator.model.optomechanics import several_tones_model

    if (not point.several_tones or laser_noise.is_quiet(scenario)
            or set(tones) == set(detected_tone_names(scenario))):
        return model
    return several_tones_model(scenario, point, demodulated=tones)


def detected_fields(scenario, point, model):
    """``model`` with the output fields of the demodulated tones alone, in their order:
    outputs ``<tone>.X``, ``<tone>.Y`` (quadratures of the field leaving each tone's
    port, in its own frame, vacuum ½). The joint model of the detected tones at the
    cavity ports, before any receiver; every state, input and source is kept."""
    from simulator.model.detected_tone import detected_tone_names, tone_indices

    names = detected_tone_names(scenario)
    rows = [r for k in tone_indices(point, names) for r in (2 * k, 2 * k + 1)]
    outputs = tuple(f"{name}.{q}" for name in names for q in "XY")
    return dataclasses.replace(model, C=model.C[rows], D=model.D[rows], outputs=outputs)
