"""Non-stationary records: the segments of a ``[schedule]``, exact in every segment.

A scenario's ``[schedule]`` (:mod:`simulator.scenario.schedule_section`)
cuts a record into segments, each running the scenario with its own
parameter changes: a ring-down with the drive off, cooling switched on,
re-thermalisation with it off again, a stepped detuning. Within a segment the
linear model dx = A x dt + B dW is fixed, so

- the record is the exact integrate-and-dump discretisation of that
  segment's model (:func:`simulator.records.discretize.discretize`), run by
  the full-state kernel (:func:`simulator.records.kernels.full_state_step`):
  no time-step error, whatever the segment's length;
- the state is carried over from one segment to the next (the models of the
  segments must share their state layout, which a change of parameters
  keeps; a change that adds or removes states is refused);
- with several detected tones (``detection.tones``) every segment runs its
  joint model of all channels (:attr:`simulator.model.system.System.channels`,
  one I/Q pair per tone), as a stationary record does; the segments must keep
  the tones and each channel's scale;
- the mean obeys dm/dt = A m, so a coherent kick at a segment's start decays
  with the segment's effective damping and rotates at its effective
  frequency; the record carries it exactly, since the recursion is linear;
- the covariance obeys the Lyapunov differential equation
  dV/dt = A V + V Aᵀ + B N Bᵀ, solved in closed form: V(t) = e^{At}(V₀ − V∞)
  e^{Aᵀt} + V∞ for a stable segment (:func:`covariance_flow`), or by Van
  Loan's block exponential for any A (:func:`covariance_flow_van_loan`; both
  in :mod:`simulator.records.protocol_flow`).

The truth of a protocol record is a :class:`Timeline`: occupation, mean
quadratures, effective frequency and linewidth of every mode as functions of
time, from the exact mean and covariance evolution.

A segment may be unstable (a blue-detuned pulse beyond the threshold of
parametric instability): it has no steady state, but its exact
discretisation and covariance flow exist, so it is run within a stated limit
on its growth (:func:`segment_systems`).

References
----------
Van Loan, IEEE Trans. Autom. Control 23, 395 (1978) (integrals of matrix
exponentials). Gardiner, Stochastic Methods, 4th ed. (Springer, 2009),
Sec. 4.5.6 (moments of the Ornstein–Uhlenbeck process: the mean e^{At} m₀ and
the covariance equation above).
"""

import dataclasses

import numpy as np

from simulator.errors import InputError, OperatingPointError
from simulator.records.generate import FULL_SCALE_SIGMAS, RecordPlan
from simulator.records.protocol_flow import (  # noqa: F401  (part of this module's API)
    covariance_flow,
    covariance_flow_van_loan,
    segment_flow,
    segment_starts,
    state_moments,
)
from simulator.records.unstable import (
    check_unstable,
    effective_from_eigenvalues,
    uncoupled_covariance,
)

VOLTS_RTOL = 1e-12  # relative change of volts per unit that still counts as one calibration


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class SegmentPlan:
    """One segment: its System, detection chain, exact discrete model and samples."""

    name: str
    first: int
    n_samples: int
    system: object
    chain: object
    discrete: object
    noise_factor: np.ndarray  # (n + p, width), zero columns padding to the widest segment
    kick_index: int
    kick: float  # added to the mean of state ``kick_index`` at the segment's start


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class Timeline:
    """Exact truth of a protocol record as functions of time.

    Arrays have one row per time in ``times_s`` (from the record's first
    sample) and one column per mode of ``mode_names``. ``occupation`` is the
    thermal occupation of the fluctuations, (⟨δq²⟩ + ⟨δp²⟩ − 1)/2;
    ``mean_q``, ``mean_p`` the mean quadratures (a coherent amplitude β has
    ⟨q⟩ + i⟨p⟩ = √2 β), so the total phonon number is occupation +
    (mean_q² + mean_p²)/2. The effective frequency and linewidth are those of
    the segment in force (steady-state values of its linear model; for an
    unstable segment, from its drift's eigenvalues, the linewidth negative).
    """

    mode_names: tuple
    segment_names: tuple
    segment_starts_s: np.ndarray
    times_s: np.ndarray
    segment: np.ndarray
    occupation: np.ndarray
    mean_q: np.ndarray
    mean_p: np.ndarray
    effective_frequency_hz: np.ndarray
    effective_linewidth_hz: np.ndarray
    cavity_occupation: np.ndarray


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class ProtocolPlan(RecordPlan):
    """A :class:`RecordPlan` made of segments, with the start state and the timeline.

    ``system``, ``chain`` and ``discrete`` are those of the first segment;
    ``truth`` holds the first segment's steady state (the stationary truth
    fields) and ``timeline`` the truth in time.
    """

    segments: tuple
    start_mean: np.ndarray
    start_covariance: np.ndarray
    timeline: Timeline

    def recursion_stepper(self):
        """The full-state recursion of every segment in turn, the state carried over."""
        from simulator.records.protocol_stepper import segment_stepper

        return segment_stepper(self)

    def tone_samples(self):
        """The calibration tone's samples of every segment, or None when none has one."""
        from simulator.records.protocol_stepper import segment_tone

        return segment_tone(self)


def segment_systems(scenario):
    """``(name, System)`` of every segment of ``scenario``'s schedule, checked.

    A segment whose linear model is unstable (a blue-detuned pulse above the
    threshold of parametric instability: optical anti-damping beyond Γm) has
    no steady state, but its exact discretisation and covariance flow exist:
    it is allowed when it is finite and amplifies the state's variance by at
    most :data:`MAX_VARIANCE_GROWTH` (e^{2 Re λ_max T}, λ_max the eigenvalue
    of the drift with the largest real part, T the segment's duration), and
    never as the first segment of a schedule that starts in the steady state
    (:mod:`simulator.records.unstable`).
    """
    from simulator.model.system import System

    schedule = scenario.schedule
    if schedule is None:
        raise InputError(f"scenario {scenario.scenario.name!r} has no [schedule]; expected "
                         "[[schedule.segments]] tables for a protocol record")
    base = System(dataclasses.replace(scenario, schedule=None))
    out = []
    for i, segment in enumerate(schedule.segments):
        system = base
        for path, value in (segment.changes or {}).items():
            system = system.replace(path, value)
        if not system.stable:
            check_unstable(i, segment, system, schedule.start)
        out.append((segment.name, system))
    if all(not system.stable for _, system in out):
        raise OperatingPointError(
            "every schedule segment is unstable; expected at least one stable segment, "
            "whose steady state gives the record's stationary truth and calibration")
    return out


def _check_layout(first, chain, name):
    """Refuse a segment whose detection chain differs from the first in layout or scale."""
    ref = first
    if chain.tones != ref.tones:
        raise InputError(f"schedule segment {name!r} changes the detected tones (channels "
                         f"{list(chain.tones)!r}, the first segment's {list(ref.tones)!r}); "
                         "expected every segment to record the same tones in the same "
                         "order (detection.tones)")
    if chain.model.states != ref.model.states or chain.model.outputs != ref.model.outputs:
        extra = sorted(set(chain.model.states) ^ set(ref.model.states))
        raise InputError(
            f"schedule segment {name!r} changes the model's state layout (states that "
            f"differ: {', '.join(extra) or 'their order'}); a schedule may change "
            "parameters only, not add or remove noise sources, modes or receiver states")
    if (chain.record_kind != ref.record_kind or chain.receiver != ref.receiver
            or chain.carrier_rad_s != ref.carrier_rad_s):
        raise InputError(f"schedule segment {name!r} changes the receiver or the record "
                         "kind; expected the detection scheme to stay the same in a record")
    volts, ref_volts = chain.output_volts_per_unit(), ref.output_volts_per_unit()
    if np.any(np.abs(volts - ref_volts) > VOLTS_RTOL * np.abs(ref_volts)):
        raise InputError(f"schedule segment {name!r} changes the detection gain (volts per "
                         "shot-noise unit) of a channel; expected the calibration of every "
                         "channel to stay the same in one record (a detected tone's "
                         "frequency sets its scale)")


def plan_protocol(scenario, *, seed=None):
    """Resolve a scheduled record: every segment's exact model, the start and the truth.

    Parameters
    ----------
    scenario : simulator.scenario.loader.Scenario
        With a ``[schedule]``.
    seed : int, optional
        Default: the scenario's seed.

    Returns
    -------
    ProtocolPlan
    """
    from simulator.model.chain import automatic_sample_rate
    from simulator.model.tone import tone_amplitude
    from simulator.records.discretize import discretize, noise_factor
    from simulator.records.generate import plan_record

    systems = segment_systems(scenario)
    stable = next(system for _, system in systems if system.stable)
    first_plan = plan_record(stable, seed=seed, form="full-state")
    store = first_plan.scenario.record.store_mechanics
    det, dig = scenario.detection, scenario.digitizer
    chains = [system.channels or system.chain for _, system in systems]  # every tone
    for (name, _), chain in zip(systems, chains, strict=True):
        _check_layout(chains[0], chain, name)
    fs = dig.sample_rate_hz or max(automatic_sample_rate(c, det.intermediate_frequency_hz)
                                   for c in chains)
    discretes = [discretize(c.model, 1.0 / fs, integrator_drift=c.integrator_drift())
                 for c in chains]
    factors = [noise_factor(d.noise_covariance) for d in discretes]
    width = max(f.shape[1] for f in factors)
    segments, first = [], 0
    for (name, system), chain, disc, factor, spec in zip(
            systems, chains, discretes, factors, scenario.schedule.segments, strict=True):
        n = int(round(spec.duration_s * fs))
        if n < 1:
            raise InputError(f"schedule segment {name!r}: duration_s = {spec.duration_s!r} s "
                             f"at {fs:.6g} samples/s gives no sample; expected at least one "
                             "sample interval")
        padded = np.zeros((factor.shape[0], width))
        padded[:, :factor.shape[1]] = factor
        mode = system.point.modes[spec.excite_mode].name
        segments.append(SegmentPlan(
            name=name, first=first, n_samples=n, system=system, chain=chain, discrete=disc,
            noise_factor=np.ascontiguousarray(padded),
            kick_index=chain.model.index(f"{mode}.q"),
            kick=float(np.sqrt(2.0 * spec.excite_phonons))))
        first += n
    mean0, cov0 = start_state(scenario.schedule, segments[0])
    timeline, peaks, louds = exact_timeline(segments, mean0, cov0,
                                           scenario.schedule.truth_points, fs)
    full_scale = dig.full_scale_v or max(  # each segment's loudest state (its transient)
        FULL_SCALE_SIGMAS * s.chain.record_std(dataclasses.replace(s.discrete,
                                                                   state_covariance=loud))
        + (tone_amplitude(s.chain, s.system.scenario) + peak) * s.chain.volts_per_unit
        for s, peak, loud in zip(segments, peaks, louds, strict=True))
    fields = {f.name: getattr(first_plan, f.name) for f in dataclasses.fields(RecordPlan)}
    truth = dataclasses.replace(first_plan.truth, calibration=dict(
        first_plan.truth.calibration, full_scale_v=float(full_scale)))
    # the file's own values (not the first segment's changes), as every estimator
    # applies each segment's changes to them itself
    fields.update(truth=truth, scenario=dataclasses.replace(scenario,
                                                            record=first_plan.scenario.record),
                  system=segments[0].system, chain=segments[0].chain,
                  sample_rate_hz=float(fs), n_samples=first, full_scale_v=float(full_scale),
                  discrete=discretes[0], innovations=None)
    if not store:
        fields["watched"] = np.array([], dtype=np.int64)
    return ProtocolPlan(**fields, segments=tuple(segments), start_mean=mean0,
                        start_covariance=cov0, timeline=timeline)


def start_state(schedule, segment):
    """Mean and covariance at the first sample, before the first segment's kick.

    ``steady``: the stationary covariance of the first segment. ``thermal`` and
    ``occupation``: the same with every mechanical mode's (q, p) block set to
    (n + ½)·1 and its correlations with the other states removed (n the bath
    occupation or ``start_occupation``), which is a covariance again (a
    block-diagonal matrix of positive semi-definite blocks). An unstable first
    segment (never with ``steady``) has no steady state: the other states
    then start in the steady state of its model without the optomechanical
    coupling (the cavity and detection chain at the segment's drive).
    """
    cov = np.array(segment.discrete.state_covariance, dtype=float)
    if not segment.system.stable:  # no steady state: the rest as if uncoupled (stable)
        cov = uncoupled_covariance(segment.chain.model)
    if schedule.start != "steady":
        for mode in segment.system.point.modes:
            n = mode.bath_occupation if schedule.start == "thermal" else (
                schedule.start_occupation)
            idx = [segment.chain.model.index(f"{mode.name}.{q}") for q in "qp"]
            cov[idx, :] = 0.0
            cov[:, idx] = 0.0
            cov[idx, idx] = n + 0.5
    return np.zeros(len(cov)), cov


MEAN_CHUNK = 1 << 16  # samples of the noiseless mean run at a time (bounded memory)


def _mean_output_peak(segment, mean):
    """Largest |Γ m_n| over a segment: the noiseless recursion run from its start mean.

    Exact (the full-state kernel with no noise), so the automatic full scale
    holds a kicked mode's sideband without wasting the digitiser's range.
    With several detected tones each channel counts at its own scale, given
    in the first tone's units (those of ``chain.volts_per_unit``).
    """
    from simulator.records.kernels import full_state_step

    phi = np.ascontiguousarray(segment.discrete.transition)
    gam = np.ascontiguousarray(segment.discrete.output)
    n, p = gam.shape[1], gam.shape[0]
    if not np.any(mean):
        return 0.0
    state, silent = np.array(mean, dtype=float), np.zeros((n + p, 1))
    peak, left = 0.0, segment.n_samples
    while left:
        count = min(left, MEAN_CHUNK)
        y = np.empty((count, p))
        full_state_step(phi, gam, silent, state, np.zeros((count, 1)), y,
                        np.empty(0, dtype=np.int64), np.empty((count, 0)))
        if segment.chain.tones:  # several detected tones: each channel's scale
            y *= segment.chain.output_volts_per_unit() / segment.chain.volts_per_unit
        if segment.chain.receiver == "if":  # r = 2 Re[e^{iφ} ρ]
            peak = max(peak, 2.0 * float(np.hypot(y[:, 0], y[:, 1]).max()))
        else:
            peak = max(peak, float(np.abs(y[:, :1 if segment.chain.receiver == "homodyne"
                                             else p]).max()))
        left -= count
    return peak


# sample offsets after a segment's start where its transient is weighed for the full scale
TRANSIENT_SAMPLES = tuple(2 ** k for k in range(13))  # 1 … 4096: the cavity's catching up


def loudest_covariance(seg, v0, fs):
    """The state covariance of segment ``seg`` (started from ``v0``) whose samples are
    largest: among its steady state (a stable segment), its start, its end and
    :data:`TRANSIENT_SAMPLES` after its start. A start hotter than the segment's steady
    state (``start = "thermal"`` before cooling, a given occupation) is loudest soon
    after the start, once the cavity follows the hot mode; an unstable segment at its
    end. The automatic full scale is set from it.
    """
    candidates = [v0, segment_flow(seg, v0, seg.n_samples / fs)[0]]
    candidates += [segment_flow(seg, v0, k / fs)[0] for k in TRANSIENT_SAMPLES
                   if k < seg.n_samples]
    if seg.system.stable:
        candidates.append(seg.discrete.state_covariance)
    return max(candidates, key=lambda v: seg.chain.record_std(
        dataclasses.replace(seg.discrete, state_covariance=v)))


def exact_timeline(segments, mean, cov, points, fs):
    """The :class:`Timeline` from the exact mean and covariance flow; each segment's peak
    mean output and loudest state covariance (:func:`loudest_covariance`)."""
    from simulator.linear.steady_state import steady_state

    modes = segments[0].system.point.modes
    names = tuple(m.name for m in modes)
    model0 = segments[0].chain.model
    iq = [model0.index(f"{n}.q") for n in names]
    ip = [model0.index(f"{n}.p") for n in names]
    cavity = [model0.index(s) for s in ("cavity.X", "cavity.Y") if s in model0.states]
    rows, peaks, louds = [], [], []
    for k, (seg, m0, v0) in enumerate(segment_starts(segments, mean, cov, fs)):
        peaks.append(_mean_output_peak(seg, m0))
        if seg.system.stable:
            steady = steady_state(seg.system)
            freq = [m.effective_frequency_hz for m in steady.modes]
            width = [m.effective_linewidth_hz for m in steady.modes]
        else:
            freq, width = effective_from_eigenvalues(seg.system)
        louds.append(loudest_covariance(seg, v0, fs))
        for t in np.linspace(0.0, seg.n_samples / fs, points):
            v, e = segment_flow(seg, v0, t)
            m = e @ m0
            n_cav = (0.5 * (v[cavity[0], cavity[0]] + v[cavity[1], cavity[1]] - 1.0)
                     if cavity else np.nan)
            rows.append((seg.first / fs + t, k,
                         0.5 * (np.diag(v)[iq] + np.diag(v)[ip] - 1.0), m[iq], m[ip],
                         freq, width, n_cav))
    cols = list(zip(*rows, strict=True))
    return Timeline(
        mode_names=names, segment_names=tuple(s.name for s in segments),
        segment_starts_s=np.array([s.first / fs for s in segments]),
        times_s=np.array(cols[0]), segment=np.array(cols[1], dtype=np.int64),
        occupation=np.array(cols[2]), mean_q=np.array(cols[3]), mean_p=np.array(cols[4]),
        effective_frequency_hz=np.array(cols[5]), effective_linewidth_hz=np.array(cols[6]),
        cavity_occupation=np.array(cols[7])), peaks, louds

