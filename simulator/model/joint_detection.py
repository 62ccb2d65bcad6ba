"""Several detected tones at once: one state space, one receiver per tone, channels stacked.

A scheme with several tones records more than one of them: the
probe-sideband scheme (Weinstein et al., Phys. Rev. X 4, 041003 (2014))
reads the red probe's anti-Stokes line and the blue probe's Stokes line, one
receiver (local oscillator or IQ reference) per probe. Each receiver
demodulates its own tone's output field (:mod:`simulator.model.detected_tone`);
the fields are driven by the same mechanical motion, so the records are
correlated, and a bound that uses both needs their joint spectral matrix.

:func:`joint_detection_chain` builds it from the one linear model: the
device's states and inputs once, then for every detected tone the
detection chain of :func:`simulator.model.chain.detection_chain` (its
detection loss, heterodyne split or amplifier, electronics and filter, each
with inputs and states of its own, named ``<tone>.<name>``), and the
channels of every tone stacked as the outputs (``<tone>.record.I``,
``<tone>.record.Q``, or ``<tone>.record`` for homodyne). The receivers'
noises are independent; the device's noises (every tone's vacuum and bath,
the mechanical baths) are shared, which is what correlates the channels.
:func:`joint_spectral_matrix` evaluates it on the record's frequency axis, at
the digitiser's rate or continuous. One tone alone gives exactly its own
:attr:`System.chain <simulator.model.system.System.chain>`.

The records of several receivers share one digitiser clock here (one rate
for every channel, :func:`joint_sample_rate`). Real (``if``) records, whose
channel is the real photocurrent at an intermediate frequency, are refused:
their joint matrix (each tone's image band beside the other's) is not built.
"""

import dataclasses

import numpy as np

from simulator.errors import InputError
from simulator.model.chain import detection_chain, receiver_of
from simulator.model.detected_tone import detected_parts
from simulator.model.sample_rate import automatic_sample_rate
from simulator.model.statespace import StateSpace


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class JointChain:
    """The device model with one detection chain per detected tone, channels stacked.

    Attributes
    ----------
    model : StateSpace
        Outputs: the channels of each tone in ``tones`` order, named ``<tone>.<channel>``.
    tones : tuple of str
    chains : tuple of DetectionChain
        Each tone's own chain (its scales, efficiency and added noise).
    receiver : str
        ``"iq"`` or ``"homodyne"`` (the same for every tone).
    """

    model: StateSpace
    tones: tuple
    chains: tuple
    receiver: str

    def channels_of(self, tone):
        """Output indices of ``tone``'s channels in :attr:`model`."""
        p = len(self.chains[0].model.outputs)
        k = self.tones.index(tone)
        return tuple(range(k * p, (k + 1) * p))


def tone_names(scenario):
    """Every tone a receiver can demodulate: ``"drive"`` and the ``[[tones]]`` names."""
    return ("drive",) + tuple(t.name for t in scenario.tones)


def check_tones(scenario, tones):
    """The tuple of ``tones``, or :class:`InputError` for an unknown, repeated or too short list."""
    known = tone_names(scenario)
    tones = tuple(tones)
    unknown = [t for t in tones if t not in known]
    if unknown or len(set(tones)) != len(tones) or not tones:
        raise InputError(f"detected tones {list(tones)!r}: expected distinct names among "
                         f"{', '.join(known)} (the [drive] tone is \"drive\")")
    return tones


def joint_detection_chain(scenario, point, model, tones):
    """The :class:`JointChain` of ``tones`` on the device ``model`` (module doc).

    Parameters
    ----------
    scenario : Scenario
    point, model
        The operating point and the whole linear model (every tone's field),
        as held by :class:`simulator.model.system.System` (``point``, ``model``).
    tones : sequence of str
        Names of the detected tones (``"drive"`` for the ``[drive]`` tone).
    """
    tones = check_tones(scenario, tones)
    receiver = receiver_of(scenario)
    if receiver == "if":
        raise InputError("record.kind = 'if': the joint record of several detected tones is "
                         "built for iq and homodyne receivers only; set record.kind = 'iq' "
                         "(the bound of one real photocurrent is that of its own tone)")
    chains = []
    for tone in tones:
        seen = scenario.replace("detection.tone", tone)
        chains.append(detection_chain(seen, *detected_parts(seen, point, model)))
    return JointChain(model=stack_chains(model, [c.model for c in chains], tones),
                      tones=tones, chains=tuple(chains), receiver=receiver)


def stack_chains(device, chain_models, tones):
    """One StateSpace: ``device``'s states and inputs once, each chain's own after them.

    Every chain model starts with the device's states and inputs (in that
    order) and appends its own (:func:`simulator.model.chain.detection_chain`);
    those are kept apart per chain, so the chains' noises are independent and
    the device's shared.
    """
    n0, m0 = len(device.states), len(device.inputs)
    extra_n = [len(c.states) - n0 for c in chain_models]
    extra_m = [len(c.inputs) - m0 for c in chain_models]
    n, m = n0 + sum(extra_n), m0 + sum(extra_m)
    p = sum(len(c.outputs) for c in chain_models)
    A, B, N = np.zeros((n, n)), np.zeros((n, m)), np.zeros((m, m))
    C, D = np.zeros((p, n)), np.zeros((p, m))
    A[:n0, :n0], B[:n0, :m0], N[:m0, :m0] = device.A, device.B, device.N
    coupling = np.zeros((n, n))
    coupling[:n0, :n0] = device.coupling
    states, inputs, outputs = list(device.states), list(device.inputs), []
    sources = list(device.sources)
    s, i, row = n0, m0, 0
    for tone, c, dn, dm in zip(tones, chain_models, extra_n, extra_m, strict=True):
        own_s, own_i = slice(s, s + dn), slice(i, i + dm)
        rows = slice(row, row + len(c.outputs))
        A[own_s, :n0], A[own_s, own_s] = c.A[n0:, :n0], c.A[n0:, n0:]
        B[own_s, :m0], B[own_s, own_i] = c.B[n0:, :m0], c.B[n0:, m0:]
        N[own_i, own_i] = c.N[m0:, m0:]
        C[rows, :n0], C[rows, own_s] = c.C[:, :n0], c.C[:, n0:]
        D[rows, :m0], D[rows, own_i] = c.D[:, :m0], c.D[:, m0:]
        states += [f"{tone}.{name}" for name in c.states[n0:]]
        inputs += [f"{tone}.{name}" for name in c.inputs[m0:]]
        outputs += [f"{tone}.{name}" for name in c.outputs]
        sources += [(f"{tone}: {label}", tuple(k - m0 + i for k in idx))
                    for label, idx in c.sources[len(device.sources):]]
        s, i, row = s + dn, i + dm, row + len(c.outputs)
    return StateSpace(A=A, B=B, N=N, C=C, D=D, states=tuple(states), inputs=tuple(inputs),
                      outputs=tuple(outputs), sources=tuple(sources), coupling=coupling)


def joint_sample_rate(scenario, joint):
    """One digitiser rate for every channel: ``digitizer.sample_rate_hz``, else the
    highest of the tones' automatic rates (each keeps every line of its record)."""
    if scenario.digitizer.sample_rate_hz:
        return float(scenario.digitizer.sample_rate_hz)
    return max(automatic_sample_rate(c) for c in joint.chains)


def joint_spectral_matrix(joint, frequency_hz, sample_rate_hz=None):
    """Spectral matrix of all detected channels on the record's FFT axis, shape (F, p, p).

    The two-sided density (chain units per Hz) of the real channels of every
    tone (:attr:`JointChain.model` outputs) at ``frequency_hz``; with
    ``sample_rate_hz`` that of the integrate-and-dump samples (aliased ×
    sinc², |f| < fs/2), else of the continuous record. The diagonal blocks
    are the tones' own :meth:`DetectionChain.sampled_channel_matrix`; the
    off-diagonal blocks are the cross densities the shared mechanics sets.
    """
    from simulator.model.poles import channel_form
    from simulator.model.units import angular

    f = np.asarray(frequency_hz, dtype=float).reshape(-1)
    form = channel_form(joint.model, sample_rate_hz=sample_rate_hz)
    return form.spectrum(-angular(f))[0]
