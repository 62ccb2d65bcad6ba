"""Building blocks of the detection chain: the builder, one demodulator, the receiver's scale.

:func:`simulator.model.chain.detection_chain` (and, for several detected
tones, :mod:`simulator.model.tone_channels`) assembles the chain from these:
:class:`ChainBuilder` appends white inputs (loss vacuum, added noise, current
noise) to a copy of the linear model and ends in the record's channels behind
an optional single-pole low-pass; :func:`demodulator` gives the channels of
one receiver (iq, if or homodyne, the conventions of
:mod:`simulator.model.chain`); :func:`receiver_scales` the volts (and
photocurrent) per record unit of an optical or microwave receiver
(:mod:`simulator.model.scales`).
"""

import numpy as np

from simulator.model.scales import microwave_scales, optical_scales
from simulator.model.statespace import StateSpace
from simulator.model.units import angular


def receiver_scales(scenario, receiver, share, side, f_tone):
    """Volts (and photocurrent) per record unit of a receiver referenced to ``f_tone``."""
    if scenario.detection.receiver == "microwave":
        return microwave_scales(scenario, receiver, f_tone)
    return optical_scales(scenario, share, side, f_tone)


def demodulator(builder, scenario, receiver, eta, added, electronic, *, rows=(0, 1),
                 tag=""):
    """The record channels of one demodulator: the field of ``model`` outputs ``rows``
    through loss, added noise and current noise; their names.

    ``tag`` (a tone's name) names the inputs and channels of one of several
    demodulators (``loss.<tag>.X``, ``record.<tag>.I``, ``record.<tag>`` for
    homodyne); empty, the one-tone names.
    """
    det = scenario.detection
    part = f".{tag}" if tag else ""
    x_d = builder.detected(np.sqrt(eta), rows=rows, tag=tag)
    if added > 0:
        a = builder.add_inputs((f"added{part}.X", f"added{part}.Y"), added, tag=tag)
        x_d = [_add(x_d[0], a[0]), _add(x_d[1], a[1])]
    if receiver == "iq":
        channels = [x_d[0] / np.sqrt(2), -x_d[1] / np.sqrt(2)]
        names, noise_names, noise = (f"record{part}.I", f"record{part}.Q"), (
            f"electronics{part}.I", f"electronics{part}.Q"), electronic
    elif receiver == "if":
        channels = [x_d[0] / np.sqrt(2), x_d[1] / np.sqrt(2)]
        names = ("record.envelope.re", "record.envelope.im")
        noise_names, noise = ("electronics.re", "electronics.im"), electronic / 4.0
    else:
        phi = det.quadrature_angle_rad
        channels = [np.sqrt(2) * (np.cos(phi) * x_d[0] + np.sin(phi) * x_d[1])]
        names, noise_names, noise = (f"record{part}",), (f"electronics{part}",), electronic
    if noise > 0:
        e = builder.add_inputs(noise_names, noise, tag=tag)
        channels = [_add(ch, ei) for ch, ei in zip(channels, e, strict=True)]
    return channels, names


class ChainBuilder:
    """Collects signal rows over (base states | all inputs) while inputs are added."""

    def __init__(self, model):
        self.base = model
        self.inputs = list(model.inputs)
        self.intensity = []
        self.sources = list(model.sources)

    def _row(self, state_part, input_part):
        return np.concatenate([state_part, input_part])

    def detected(self, gain, rows=(0, 1), tag=""):
        """Rows of the quadratures at the detector, X_d and Y_d, of the field at outputs
        ``rows`` of the base model (``tag``: the tone of one of several demodulators)."""
        signal = [gain * self._row(self.base.C[i], self.base.D[i]) for i in rows]
        if gain < 1.0:
            names = (f"loss.{tag}.X", f"loss.{tag}.Y") if tag else ("loss.X", "loss.Y")
            loss = self.add_inputs(names, 0.5, "detection loss vacuum", tag=tag)
            signal = [_add(r, np.sqrt(1 - gain**2) * lo)
                      for r, lo in zip(signal, loss, strict=True)]
        return signal

    def add_inputs(self, names, intensity, source=None, tag=""):
        """Append white inputs of the given intensity; return their unit rows."""
        start = len(self.inputs)
        self.inputs += list(names)
        self.intensity.append(np.full(len(names), float(intensity)))
        width = len(self.base.states) + len(self.inputs)
        rows = []
        for k in range(len(names)):
            row = np.zeros(width)
            row[len(self.base.states) + start + k] = 1.0
            rows.append(row)
        label = source or {"added": "added noise (heterodyne split or amplifier)",
                           "electronics": "electronics current noise"}[names[0].split(".")[0]]
        if tag:
            label = f"{label} ({tag})"
        self.sources.append((label, tuple(range(start, start + len(names)))))
        return rows

    def finish(self, channels, names, bandwidth_hz, theta):
        """The chain's StateSpace: outputs ``names`` from the signal rows ``channels``,
        behind a single-pole low-pass of ``bandwidth_hz`` (rotating at ``theta`` for
        the if receiver's pair) when one is given."""
        base, n0 = self.base, len(self.base.states)
        m = len(self.inputs)
        rows = np.array([_pad(ch, n0 + m) for ch in channels])
        c_sig, d_sig = rows[:, :n0], rows[:, n0:]
        m0 = len(base.inputs)
        N = np.zeros((m, m))
        N[:m0, :m0] = base.N
        if m > m0:
            N[m0:, m0:] = np.diag(np.concatenate(self.intensity))
        p = len(names)
        if bandwidth_hz is None:
            A, B = base.A, np.hstack([base.B, np.zeros((n0, m - m0))])
            return StateSpace(A=A, B=B, N=N, C=c_sig, D=d_sig, states=base.states,
                              inputs=tuple(self.inputs), outputs=names,
                              sources=tuple(self.sources),
                              coupling=base.coupling)
        wc = float(angular(bandwidth_hz))
        filt = -wc * np.eye(p)
        if p == 2:
            filt += np.array([[0.0, theta], [-theta, 0.0]])
        A = np.block([[base.A, np.zeros((n0, p))], [wc * c_sig, filt]])
        B = np.vstack([np.hstack([base.B, np.zeros((n0, m - m0))]), wc * d_sig])
        coupling = np.zeros_like(A)
        coupling[:n0, :n0] = base.coupling
        states = base.states + tuple(f"filter.{name.split('.', 1)[1]}" if "." in name
                                     else "filter" for name in names)
        C = np.hstack([np.zeros((p, n0)), np.eye(p)])
        return StateSpace(A=A, B=B, N=N, C=C, D=np.zeros((p, m)), states=states,
                          inputs=tuple(self.inputs), outputs=names,
                          sources=tuple(self.sources), coupling=coupling)


def _pad(row, width):
    return np.concatenate([row, np.zeros(width - row.size)])


def _add(a, b):
    """Sum of two signal rows, the shorter one padded with zeros (later inputs)."""
    width = max(a.size, b.size)
    return _pad(a, width) + _pad(b, width)
