"""The block means of a scheduled record's anti-Stokes sideband, as the heating
likelihood reads them (:mod:`simulator.analysis.heating_likelihood`).

The record is demodulated at the mode's frequency with one phase for the whole
record (the amplitude is continuous across a switch) and averaged over blocks
short enough to resolve the force noise, with the Stokes image in a null
(:func:`block_length`). Each run of blocks remembers its segment, so the state-space
model can switch its moments there; a kicked segment (``excite_phonons``) marks
the block where its deterministic mean enters and the blocks the detection needs
to follow the kick (:func:`kick_settling`), which the likelihood leaves out.
"""

import dataclasses

import numpy as np

from simulator.errors import InputError

BLOCK_RESOLUTION = 0.5  # block length × ω_c: the force noise is resolved (our choice)
NULL_LEAK = 1e-3  # amplitude of the Stokes line a block mean may pass (our choice)
KICK_SETTLE = 25.0  # cavity amplitude decay times left out after a kick: e^−25 ≈ 1e−11 (our choice)


@dataclasses.dataclass(frozen=True, kw_only=True)
class ScheduledBlocks:
    """Block means of a scheduled record and what each run of blocks belongs to.

    ``runs`` holds ``(segment index, spacing_s, count)``: ``count`` blocks of
    ``spacing_s`` seconds in segment ``index`` of ``models`` (a segment's
    samples left over after its whole blocks make one shorter block).
    """

    u: np.ndarray
    runs: tuple
    models: tuple  # protocol_bound.SegmentModel of each segment
    names: tuple  # segment names in order of first appearance (the first's phase is 0)
    shifts: tuple  # δ_s (rad/s): the line's offset from the demodulation frequency
    start: str  # schedule.start
    start_occupation: float  # n at the first sample unless the start is ``steady``
    sample_rate_hz: float
    kicks: tuple = ()  # first block of every kicked segment (a mean enters there)
    unobserved: tuple = ()  # blocks left out: the detection still settling after a kick

    def start_phonons(self, theta):
        """n at the record's first sample: the first segment's n_∞ (``steady``; ∞ if it
        does not relax), else the known start (the nominal bath's or the schedule's)."""
        if self.start != "steady":
            return self.start_occupation
        first = self.models[0]
        rate = theta[0] + first.optical_damping
        return (theta[1] + first.optical_heating) / rate if rate > 0 else np.inf


def block_length(models, theta, sample_rate_hz, frequency_hz):
    """Samples per block: at most :data:`BLOCK_RESOLUTION`/ω_c for every segment (the
    block moments are exact for any Γ_s Δ), with the Stokes image in a null.

    The block mean at +f passes the Stokes line at −f by sinc(2fL/fs); the
    longest length within the limit whose leak is below :data:`NULL_LEAK` is
    taken, else the shortest up to twice the limit, else the best of
    :func:`simulator.analysis.ringdown.mirror_null_block`.
    """
    from simulator.analysis.ringdown import mirror_null_block

    gamma_m, heating = theta
    longest = min(BLOCK_RESOLUTION / np.sqrt(m.gain * (heating + m.optical_heating) / m.floor)
                  for m in models)
    target = max(1, int(longest * sample_rate_hz))
    lengths = np.arange(1, 2 * target + 1)
    cycles = 2.0 * frequency_hz * lengths / sample_rate_hz
    good = lengths[np.abs(np.sin(np.pi * cycles)) / np.maximum(cycles, 1.0) < NULL_LEAK]
    if np.any(good <= target):
        return int(good[good <= target].max())
    if good.size:
        return int(good.min())
    return mirror_null_block(target, sample_rate_hz, frequency_hz)


def scheduled_blocks(z, scenario, block_samples, models, shifts, sample_rate_hz,
                     bath_occupation, settle_s=0.0):
    """:class:`ScheduledBlocks` of record ``z`` demodulated at the first mode's frequency.

    A ``thermal`` start is at ``bath_occupation``: the nominal n_th of the
    scenario (the cryostat's temperature), known like the schedule itself, so
    that the start does not tie H to Γm. The blocks that begin within
    ``settle_s`` of a kick are left out of the likelihood (``unobserved``).
    """
    from simulator.analysis.ringdown import demodulated_amplitude

    fs, f = sample_rate_hz, scenario.mechanics[0].frequency_hz
    z = np.asarray(z)
    parts, runs, first, kicks, count, unobserved = [], [], 0, [], 0, []
    for i, segment in enumerate(scenario.schedule.segments):
        if segment.excite_phonons > 0:
            kicks.append(count)
            unobserved += range(count, count + 1 + int(settle_s * fs) // block_samples)
        n = int(round(segment.duration_s * fs))
        whole = (n // block_samples) * block_samples
        pieces = [(block_samples, whole)] + ([(n - whole, n - whole)] if n > whole else [])
        start = first
        for size, length in pieces:
            if length == 0:
                continue
            _, u = demodulated_amplitude(z[start:start + length], fs, f, size)
            parts.append(u * np.exp(-2j * np.pi * f * start / fs))  # one phase for all
            runs.append((i, size / fs, len(u)))
            count += len(u)
            start += length
        first += n
    if first > len(z):
        raise InputError(f"the record has {len(z)} samples; its schedule needs {first}")
    schedule = scenario.schedule
    return ScheduledBlocks(u=np.concatenate(parts), runs=tuple(runs), models=tuple(models),
                           names=tuple(dict.fromkeys(m.name for m in models)),
                           shifts=tuple(shifts), start=schedule.start,
                           start_occupation=float(bath_occupation if schedule.start == "thermal"
                                                  else schedule.start_occupation),
                           sample_rate_hz=float(fs), kicks=tuple(kicks),
                           unobserved=tuple(k for k in unobserved if k < count))


def switch_phases(blocks):
    """Start values of every name's phase φ (rad): the mean phase step of the block
    means across the switches from the first name to it and back.

    The anti-Stokes line reaches the record through the cavity, whose phase at
    +f_m moves with the detuning: the amplitude jumps by e^{i(φ_B − φ_A)} at a
    switch from A to B (about 1 rad for the example's resonant probe). A name
    that never meets the first is reached through the names between (ring-down,
    cooling, probe: the probe's phase through the cooling's); a switch into a
    kicked segment is passed over, its step being mostly the kick's.
    """
    bounds, first = [], 0  # [segment index, first block, end] of every segment
    for index, _, count in blocks.runs:
        if not bounds or bounds[-1][0] != index:
            bounds.append([index, first, first + count])
        else:
            bounds[-1][2] = first + count
        first += count
    steps = {}
    for (i, _, end), (j, start, _) in zip(bounds[:-1], bounds[1:], strict=False):
        a, b = blocks.models[i].name, blocks.models[j].name
        if a != b and start not in blocks.kicks:  # a kick's own step says nothing of φ
            steps[(a, b)] = steps.get((a, b), 0j) + blocks.u[start] * np.conj(blocks.u[end - 1])
    phase = {blocks.names[0]: 0.0}
    while len(phase) < len(blocks.names):  # along the switches, from the first name on
        links = [(a, b) for a in phase for b in blocks.names if b not in phase
                 and ((a, b) in steps or (b, a) in steps)]
        if not links:
            break
        a, b = links[0]
        phase[b] = phase[a] + np.angle(steps.get((a, b), 0j) + np.conj(steps.get((b, a), 0j)))
    return np.array([phase.get(name, 0.0) for name in blocks.names[1:]])


def kick_settling(scenario):
    """Seconds after a kick in which the record is not yet the mode's amplitude
    times a constant: :data:`KICK_SETTLE` amplitude decay times 2/κ of the
    narrowest cavity among the kicked segments (0 without kicks).

    The kick moves the mode at once, but the cavity field that carries it to
    the detector follows within 2/κ; the block means there miss the mean by a
    part of the kick itself, thousands of the force noise's steps for a strong
    kick, which the likelihood would read as heating.
    """
    from simulator.analysis.heating import segment_system_of

    names = {s.name for s in scenario.schedule.segments if s.excite_phonons > 0}
    if not names:
        return 0.0
    systems = segment_system_of(scenario, names, require_stable=False)
    kappa = min(s.scenario.cavity.linewidth_hz for s in systems.values())
    return KICK_SETTLE / (np.pi * kappa)
