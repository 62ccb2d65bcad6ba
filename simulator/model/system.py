"""One built system per scenario: what every stage after the scenario takes.

A :class:`System` is built once from a :class:`simulator.scenario.loader.Scenario`:
the operating point (intracavity field, static shift, bistability, g = g0·√n̄,
bath occupations), the linear state-space model with its named states and
signals (cavity, mechanical modes, laser-noise states), and the stability
verdict; the detection chain (losses, local oscillator, amplifier,
electronics, the record's channels) is built on first use and kept.
Steady state, spectra, sideband summary, noise budget, records, feasibility
and the master-equation comparison all take this object; none of them
rebuilds the operating point or the model it was handed.

A scenario with several drive tones (``[[tones]]``) builds a System (operating
point, model, stability) that the steady state takes whole. The stages that
follow the receiver (spectra, sideband summary, noise budget, detection chain,
records, feasibility, inspection) take its :attr:`System.detected` view, in
which the tone named by ``detection.tone`` plays the drive's part
(:mod:`simulator.model.detected_tone`); the master equation and the other
stages still refuse it through :func:`as_system` and
:meth:`System.require_one_tone`.

A System is immutable, like the scenario it holds. New ones are derived by
path (:meth:`System.replace`); a change that cannot alter the physics (the
record's duration or chunking, its seed) keeps the operating point and model.
"""

import functools

from simulator.errors import InputError
from simulator.model.chain import detection_chain
from simulator.model.detected_tone import detected_parts
from simulator.model.operating_point import operating_point
from simulator.model.optomechanics import linear_model
from simulator.model.stability import require_stable, stability

# Scenario paths that change neither the operating point, the model nor its chain;
# and those that change the chain only (the receiver's record kind, the electronics
# after the detector, the digitiser).
_RECORD_ONLY = ("record.duration_s", "record.chunk_samples", "record.store_mechanics",
                "record.in_run", "scenario.seed", "scenario.name", "scenario.description")
_CHAIN_ONLY = ("record.kind", "electronics.", "digitizer.")


class System:
    """A scenario built once: operating point, linear model, stability and detection chain.

    Parameters
    ----------
    scenario : simulator.scenario.loader.Scenario

    Attributes
    ----------
    scenario : Scenario
    point : simulator.model.operating_point.OperatingPoint
    model : simulator.model.statespace.StateSpace
        The device model: cavity quadratures, mechanical modes, laser-noise states.
    stability : simulator.model.stability.Stability
    chain : simulator.model.chain.DetectionChain
        The model extended by the detection chain to the record's channels
        (built on first use).
    """

    def __init__(self, scenario, *, _parts=None, _detected=False):
        point, model, verdict = _parts or _build(scenario)
        for name, value in (("scenario", scenario), ("point", point), ("model", model),
                            ("stability", verdict), ("_detected", _detected)):
            object.__setattr__(self, name, value)

    def __setattr__(self, name, value):
        raise AttributeError(f"a System is immutable; derive a new one with "
                             f"System.replace (tried to set {name!r})")

    def __repr__(self):
        return (f"System({self.scenario.scenario.name!r}, {len(self.point.modes)} mode(s), "
                f"{len(self.model.states)} states, "
                f"{'stable' if self.stability.stable else 'unstable'})")

    @property
    def stable(self):
        """True when every eigenvalue of the drift matrix decays."""
        return self.stability.stable

    def require_stable(self):
        """This system, or :class:`simulator.errors.OperatingPointError` if it is unstable."""
        require_stable(self.stability)
        return self

    @functools.cached_property
    def chain(self):
        """The model extended by the detection chain (built on first use, then kept)."""
        seen = self.detected
        return detection_chain(self.scenario, seen.point, seen.model)

    @functools.cached_property
    def channels(self):
        """The detection chain with one demodulator per tone of ``detection.tones``
        (:func:`simulator.model.tone_channels.channels_chain`), built on first use;
        None when one tone is demodulated (:attr:`chain` is then the record's)."""
        from simulator.model.tone_channels import channels_chain

        if self._detected:
            return System(self.scenario).channels
        return channels_chain(self.scenario, self.point, self.model)

    @functools.cached_property
    def detected(self):
        """The system as the receiver sees it: with several tones, the operating point's
        one-tone fields and the model's ``output.X/Y`` are those of ``detection.tone``
        (:func:`simulator.model.detected_tone.detected_parts`); otherwise this system."""
        if self._detected or not self.several_tones:
            return self
        point, model = detected_parts(self.scenario, self.point, self.model)
        return System(self.scenario, _parts=(point, model, self.stability), _detected=True)

    @property
    def several_tones(self):
        """True when the scenario drives further tones (``[[tones]]``) beside ``[drive]``."""
        return self.point.several_tones

    def require_one_tone(self, what):
        """This system, or :class:`simulator.errors.InputError` naming ``what`` if it has
        several tones, which ``what`` does not support yet."""
        if self.several_tones:
            names = ", ".join(repr(t.name) for t in self.point.tones)
            why = next((text for stage, text in _WHY_ONE_TONE if what.startswith(stage)), "")
            if self.scenario.detection.backaction_evading and what.startswith("simulator.master"):
                why = _WHY_NOT_PAIR  # the per-tone fields do not hold the pair either
            raise InputError(
                f"{what} does not yet support several drive tones (this scenario has "
                f"{names}){why}; supported so far: the operating point, the linear model, its "
                "stability, the steady state (every tone included), and for the tone named "
                "by detection.tone the spectra, sideband summary, noise budget, records, "
                "feasibility, inspect, plan and sweep, every tone of detection.tones in one "
                "stationary record with their joint bound (simulator.analysis."
                "joint_feasibility), classical noise on every tone, a back-action-evading "
                "pair (detection.backaction_evading), and the linearised master equation "
                "(simulator.master.tone_fields); remove the [[tones]] "
                "tables for everything else")
        return self

    def replace(self, path, value):
        """A new System of the scenario with ``path`` set to ``value``.

        Paths that cannot change the device (the record's length, kind,
        chunking and stored quadratures, the electronics and the digitiser,
        the seed and the names) keep this system's operating point and model;
        any other path builds them anew.
        """
        scenario = self.scenario.replace(path, value)
        if path not in _RECORD_ONLY and not path.startswith(_CHAIN_ONLY):
            return System(scenario)
        derived = System(scenario, _parts=(self.point, self.model, self.stability),
                         _detected=self._detected)
        if path in _RECORD_ONLY:  # the chains are the same too
            for name in ("chain", "channels"):
                if name in self.__dict__:
                    derived.__dict__[name] = self.__dict__[name]
        return derived


def _build(scenario):
    point = operating_point(scenario)
    model = linear_model(scenario, point)
    return point, model, stability(model, point)


def as_system(item, *, several_tones=False, stage=None):
    """``item`` if it is a :class:`System`; a System built from it if it is a Scenario.

    The one-line path for scripts (``steady_state(scenario)``); a caller that
    evaluates one scenario several ways builds the System once and passes it.
    Every stage takes its system through here: a system with several tones is
    refused with :class:`~simulator.errors.InputError` naming ``stage`` (the
    calling stage's public name, ``"module.function"``, given by the caller), unless
    the caller says it handles them: ``several_tones=True`` (the whole system, every
    tone's field alike) or ``several_tones="detected"`` (its :attr:`System.detected`
    view, the detected tone in the drive's place).
    """
    from simulator.scenario.loader import Scenario

    if isinstance(item, Scenario):
        item = System(item)
    elif not isinstance(item, System):
        raise TypeError(f"expected a simulator.System or a simulator.scenario.loader.Scenario; "
                        f"got {type(item).__name__}")
    if several_tones == "detected":
        return item.detected
    return item if several_tones else item.require_one_tone(stage or _UNNAMED_STAGE)


# Why a stage refuses several tones, by the start of its public name
_WHY_ONE_TONE = (
    ("simulator.master", ": its Fock space holds one cavity mode in the frame of the drive, "
     "and the full model of several tones beats at their spacing (no stationary state in "
     "one frame); for the steady state with every tone use the linearised master equation "
     "with one Hilbert factor per tone field, "
     "simulator.master.tone_fields.tone_fields_steady_state (`noisechain inspect --master "
     "--master-model linearised`), or the linear steady state "
     "(simulator.linear.steady_state), which it reproduces"),
)
_WHY_NOT_PAIR = (
    ": a back-action-evading pair is a model of its own (one cavity field at the pair's "
    "mean frequency; docs/physics.md, \"Back-action evasion\"), which neither the full nor "
    "the linearised master equation (one field per tone) holds yet; its exact steady state "
    "is the linear one (simulator.linear.steady_state, `noisechain inspect` without --master)")
_UNNAMED_STAGE = "this computation"  # for a caller that does not name its stage
