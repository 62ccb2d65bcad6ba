"""The plan of a synthetic record: every setting resolved before the first sample.

:func:`plan_record` checks the seed, duration and form, builds the detection
chain's exact discrete model at the sample interval, sets the digitiser's
full scale and computes the ground truth (:class:`Truth`) stored beside the
record; :class:`RecordPlan` holds all of it for
:func:`simulator.records.generate.generate`, which runs the recursion.
"""

import dataclasses

import numpy as np

from simulator.errors import InputError

FULL_SCALE_SIGMAS = 8.0  # automatic full scale, in standard deviations of the record


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class Truth:
    """The exact answer stored beside a record.

    Per-mode tuples follow ``mode_names``. ``calibration`` holds the
    conversion factors with their units in the key names (see
    :meth:`simulator.model.chain.DetectionChain.calibration`). ``channels``
    (a record of several detected tones) holds one dict per I/Q pair: the
    tone, its frame (frequency, detunings, cavity mode), photons, each mode's
    coupling rate and cooperativity for that tone, and its own calibration
    (:func:`channel_truths`); empty for a one-tone record.
    """

    mode_names: tuple
    occupation: tuple
    effective_frequency_hz: tuple
    effective_linewidth_hz: tuple
    coupling_rate_hz: tuple
    zero_point_amplitude_m: tuple
    cavity_occupation: float
    calibration: dict
    channels: tuple = ()


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class RecordPlan:
    """Everything fixed before the first sample: models, scales and sizes."""

    system: object
    scenario: object
    seed: int
    form: str
    chain: object
    discrete: object
    sample_rate_hz: float
    n_samples: int
    full_scale_v: float
    bits: int
    truth: Truth
    watched: np.ndarray  # state indices of the mechanical quadratures to store
    innovations: object = None

    def recursion_stepper(self):
        """The recursion the record runs, bound to its kernel (:func:`kernels.stepper`).

        The hook :func:`generate` calls; a scheduled record's plan returns a
        stepper that switches models at segment boundaries instead.
        """
        from simulator.records.kernels import stepper

        return stepper(self)

    def tone_samples(self):
        """``signal(first, count)``: the calibration tone's samples, or None without one."""
        from simulator.model.tone import tone_signal

        return tone_signal(self.chain, self.scenario, self.sample_rate_hz)

    @property
    def volts_per_count(self):
        """Voltage step of one digitiser count (V): full range 2·full_scale_v / 2^bits."""
        return 2.0 * self.full_scale_v / 2.0**self.bits

    @property
    def shot_noise_per_count(self):
        """One count in shot-noise units (two-sided shot-noise density 1 per Hz)."""
        return self.volts_per_count / self.chain.volts_per_unit

    @property
    def channel_shot_noise_per_count(self):
        """With several detected tones, :attr:`shot_noise_per_count` of each tone's pair."""
        return tuple(self.volts_per_count / s["volts_per_unit"]
                     for s in self.chain.channel_scales)


def plan_record(system, *, seed=None, duration_s=None, form="auto", store_mechanics=None):
    """Resolve every setting of a record and build its exact discrete model.

    See :func:`simulator.workflows.record.simulate_record` for the parameters.
    """
    from simulator.linear.steady_state import steady_state
    from simulator.model.detected_tone import detected_tone_names
    from simulator.model.sample_rate import record_sample_rate
    from simulator.model.system import as_system
    from simulator.model.tone import tone_amplitude
    from simulator.records.channels import channel_truths
    from simulator.records.discretize import discretize, innovations_form

    channels = as_system(system, several_tones=True).channels  # several detected tones
    system = as_system(system, several_tones="detected")
    scenario = system.scenario
    seed = scenario.scenario.seed if seed is None else seed
    if (isinstance(seed, bool) or not isinstance(seed, (int, np.integer))
            or not 0 <= seed < 2**63):
        raise InputError(f"seed = {seed!r}; expected a non-negative integer below 2**63")
    if duration_s is not None:
        if not (isinstance(duration_s, (int, float)) and np.isfinite(duration_s)
                and duration_s > 0):
            raise InputError(f"duration = {duration_s!r} s; expected a positive number of "
                             "seconds")
        system = system.replace("record.duration_s", float(duration_s))
    if store_mechanics is not None and store_mechanics != scenario.record.store_mechanics:
        system = system.replace("record.store_mechanics", bool(store_mechanics))
    scenario = system.scenario
    store = scenario.record.store_mechanics
    if store and scenario.detection.backaction_evading:
        raise InputError("record.store_mechanics with detection.backaction_evading: the "
                         "pair's model holds the quadratures X1, X2 in the frame turning at "
                         "half the tones' spacing, not q, p; storing them is not supported "
                         "yet; expected store_mechanics = false")
    if form not in ("auto", "full-state", "innovations"):
        raise InputError(f"form = {form!r}; expected 'auto', 'full-state' or 'innovations'")
    if form == "innovations" and store:
        raise InputError("the innovations form does not carry the mechanical state; use "
                         "form = 'full-state' to store the mechanical quadratures")
    if form == "auto":
        form = "full-state" if store else "innovations"

    point, steady, chain = system.point, steady_state(system), channels or system.chain
    det, dig = scenario.detection, scenario.digitizer
    fs = record_sample_rate(scenario, chain)
    n = int(round(scenario.record.duration_s * fs))
    if n < 1:
        raise InputError(f"duration {scenario.record.duration_s!r} s at {fs:.6g} samples/s "
                         "gives no sample; expected a duration of at least one sample "
                         "interval")
    discrete = discretize(chain.model, 1.0 / fs, integrator_drift=chain.integrator_drift())
    full_scale = dig.full_scale_v or (  # the noise's 8σ plus the coherent tone on top
        FULL_SCALE_SIGMAS * chain.record_std(discrete)
        + tone_amplitude(chain, scenario) * chain.volts_per_unit)
    names = tuple(m.name for m in point.modes)
    watched = np.array([chain.model.index(f"{name}.{q}") for name in names for q in "qp"]
                       if store else [], dtype=np.int64)
    calibration = dict(chain.calibration(), full_scale_v=full_scale, bits=dig.bits,
                       bandwidth_hz=scenario.electronics.bandwidth_hz or float("inf"))
    if chain.front_end == "optical":  # a microwave receiver has no photocurrent
        calibration.update(transimpedance_ohm=scenario.electronics.transimpedance_ohm,
                           local_oscillator_power_w=det.local_oscillator_power_w)
    if point.several_tones:  # the (first) tone whose sidebands the record holds
        calibration.update(detected_tone=detected_tone_names(scenario)[0],
                           detected_tone_frequency_hz=float(point.drive_frequency_hz))
        if det.backaction_evading:  # the reference sits at the pair's mean frequency
            calibration.update(detected_tone="back-action-evading pair (mean frequency)")
    truth = Truth(mode_names=names,
                  occupation=tuple(m.occupation for m in steady.modes),
                  effective_frequency_hz=tuple(m.effective_frequency_hz for m in steady.modes),
                  effective_linewidth_hz=tuple(m.effective_linewidth_hz for m in steady.modes),
                  coupling_rate_hz=tuple(m.coupling_rate_hz for m in point.modes),
                  zero_point_amplitude_m=tuple(m.zero_point_amplitude_m for m in point.modes),
                  cavity_occupation=steady.cavity_occupation, calibration=calibration,
                  channels=channel_truths(system, chain, calibration) if chain.tones else ())
    return RecordPlan(system=system, scenario=scenario, seed=int(seed), form=form, chain=chain,
                      discrete=discrete, sample_rate_hz=float(fs), n_samples=n,
                      full_scale_v=float(full_scale), bits=dig.bits, truth=truth,
                      watched=watched,
                      innovations=innovations_form(discrete) if form == "innovations"
                      else None)
