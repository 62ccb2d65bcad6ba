"""Several detected tones in one record: one heterodyne demodulator per tone.

``detection.tones = ["red_probe", "blue_probe"]`` asks for a record with one
I/Q pair per listed tone, as a digitiser with several digital demodulators
delivers it: the receiver's reference for pair k sits at tone k's frequency,
and pair k holds tone k's output field in that tone's own frame
(docs/physics.md §13: one fluctuation field per tone). The pairs come from
one linear model: the same mechanical motion scatters every tone's
sidebands, so the channels are jointly Gaussian and correlated, and the
record is generated from that joint model (one state, 2K outputs), never
from K separate ones.

Each demodulator adds its own detection-loss vacuum, heterodyne (or
amplifier) added noise and current noise, independent of the others': each
pair is modelled as seeing its own tone's band only, like the one-tone
record (where the bands of two demodulators overlap, the shared vacuum
correlates them only at offsets a tone spacing apart, which averages out of
the time-averaged spectral matrix; docs/physics.md §13). The correlation
between the channels comes from the device's states alone.

:func:`simulator.linear.channel_spectra.joint_spectral_matrix` is the
analytic spectral matrix of the K complex channels (each channel's density
on the diagonal, the cross-spectra off it, and their pseudo-spectra), at
the cavity port or at the digitiser, continuous or of the samples.
"""

import dataclasses


def channels_chain(scenario, point, model):
    """The detection chain with one demodulator per tone of ``detection.tones``.

    ``point`` and ``model`` are the whole several-tone System's (every tone's
    output field). Returns None when one tone is demodulated (the one-tone
    chain of :attr:`simulator.model.system.System.chain` then serves). Called
    once per System by :attr:`simulator.model.system.System.channels`.
    """
    from simulator.model.detected_tone import (
        detected_tone_names,
        require_quiet_detection,
        tone_indices,
        tone_point_of,
    )

    names = detected_tone_names(scenario)
    if len(names) < 2:
        return None
    require_quiet_detection(scenario)
    indices = tone_indices(point, names)
    points = [tone_point_of(scenario, point, k) for k in indices]
    rows = [(2 * k, 2 * k + 1) for k in indices]
    return tone_channels_chain(scenario, names, points, model, rows)


def tone_channels_chain(scenario, names, points, model, rows):
    """The heterodyne iq chain of several demodulators, one per detected tone.

    ``names`` are the detected tones, ``points`` each one's one-tone operating
    point (:func:`simulator.model.detected_tone.tone_point_of`), ``rows`` the
    index pair of its output field among ``model``'s outputs. Each
    demodulator mixes in its own loss vacuum, added noise and current noise
    (module doc). Outputs ``record.<tone>.I/Q``, in the order of ``names``;
    the scale fields of the chain are the first tone's, every tone's are in
    ``channel_scales``.
    """
    from simulator.model.chain import ChainBuilder, DetectionChain, demodulator, receiver_scales
    from simulator.scenario.receiver import amplifier_added_quanta

    det, el = scenario.detection, scenario.electronics
    share = 1.0 if det.balanced else 0.5
    eta = det.efficiency * share
    added = amplifier_added_quanta(scenario) or 0.5  # the heterodyne split without one
    side = 1.0 if det.local_oscillator_side == "above" else -1.0
    builder = ChainBuilder(model)
    channels, outputs, per_tone = [], [], []
    for tag, point, pair in zip(names, points, rows, strict=True):
        scales = receiver_scales(scenario, "iq", share, side, point.drive_frequency_hz)
        electronic = scales.pop("electronic")
        ch, nm = demodulator(builder, scenario, "iq", eta, added, electronic, rows=pair,
                             tag=tag)
        channels += ch
        outputs += nm
        per_tone.append(dict(scales, electronic_noise=electronic))
    chain_model = builder.finish(channels, tuple(outputs), el.bandwidth_hz, 0.0)
    first = {k: v for k, v in per_tone[0].items() if k != "electronic_noise"}
    return DetectionChain(model=chain_model, receiver="iq", carrier_rad_s=0.0, efficiency=eta,
                          added_quanta=added, electronic_noise=per_tone[0]["electronic_noise"],
                          tones=tuple(names), channel_scales=tuple(per_tone), **first)


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
