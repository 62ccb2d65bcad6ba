"""Feasibility of a scheme that records several tones: the joint Whittle information.

A several-tone scheme records more than one tone (the probe-sideband scheme
reads a red and a blue probe, one receiver each). The records are
correlated: every tone's field carries the same mechanical motion. The
information of the pair is that of their joint spectral matrix S(f), the
stacked real channels of every receiver
(:func:`simulator.model.tone_channels.tones_chain`, the model that also
generates records of several tones),

    F_ij / T = ½ ∫_{−fs/2}^{fs/2} df tr[S⁻¹ ∂_i S S⁻¹ ∂_j S]

(Whittle, Ark. Mat. 2, 423 (1953)), evaluated by the engine of
:mod:`simulator.analysis.information` on the joint model. It is not the sum
of the records' own informations: where both records see the same line
their thermal fluctuations are the same and the second record adds less.
When the channels share no noise (tones on different cavity modes coupled
to different mechanical modes) S is block diagonal and the information is
exactly the sum; the joint information is never below that of either
record alone (a record is a function of the pair). It can exceed the sum
only when one record measures noise that masks the other (not the case for
lines of one mechanical mode seen through independent receivers).

The bound reported (:func:`joint_bound`) is the Cramér–Rao error of the
occupation n, σ_n² T = ∇n · F₁⁻¹ · ∇n, with the bath, the coupling of every
detected tone's cavity mode and the detection efficiency unknown, for the
tones together and each alone on the same footing; and the time
T = z² σ_n(1 s)² / (n + 1)² after which the sideband ratio R = n/(n + 1)
inferred from n lies z standard deviations from the classical R = 1
(σ_R = σ_n/(n + 1)², 1 − R = 1/(n + 1)). This time assumes the exact model
with only those parameters unknown; the lineshape time of
:func:`simulator.analysis.feasibility.asymmetry_time` frees the whole
lineshape of one record (floor, centre, width, both areas) and is usually
the longer one.
"""

import dataclasses
import math

import numpy as np

from simulator.analysis.feasibility import (
    ASYMMETRY_SIGNIFICANCE,
    _coupling_path,
    _CovarianceResponse,
)
from simulator.analysis.information import SteppedModels, fisher_blocks
from simulator.errors import InputError


def _full_system(item):
    """The whole System (every tone's field), stable; a detected view (one tone's output,
    :attr:`System.detected`) is rebuilt whole from its scenario."""
    from simulator.model.system import System, as_system

    system = as_system(item, several_tones=True)
    if system.several_tones and system.detected is system:
        system = System(system.scenario)
    return system.require_stable()


class _JointModels:
    """The joint record model of ``tones`` for the base and each stepped scenario, built once."""

    def __init__(self, system, tones):
        self.stepped = SteppedModels(system)
        self.tones = tones
        self._joint = {}

    def joint(self, scenario):
        from simulator.model.tone_channels import tones_chain

        key = id(scenario)
        if key not in self._joint:
            built = self.stepped.system_of(scenario)
            self._joint[key] = tones_chain(scenario, built.point, built.model, self.tones)
        return self._joint[key]

    def record_model(self, scenario):
        return self.joint(scenario).model


def joint_default_paths(scenario, tones, mode=0):
    """Bath of ``mode``, the coupling of every detected tone's cavity mode to it, efficiency."""
    m = scenario.mechanics[mode]
    bath = "bath_occupation" if m.bath_occupation is not None else "bath_temperature_k"
    couplings = [_coupling_path(scenario.replace("detection.tone", t), mode) for t in tones]
    return (f"mechanics[{mode}].{bath}", *dict.fromkeys(couplings), "detection.efficiency")


def joint_fisher(system, tones, groups, *, sample_rate_hz=None, models=None):
    """Whittle information per unit time of the joint record of ``tones``, per path group.

    Parameters
    ----------
    system : System or Scenario
    tones : sequence of str
        Detected tones (``"drive"`` for the ``[drive]`` tone); one tone gives
        that tone's own record (:func:`simulator.analysis.feasibility.fisher_matrix`).
    groups : sequence of sequences of str
        Parameter paths estimated jointly.
    sample_rate_hz : float, optional
        Default the record's (:func:`simulator.model.sample_rate.record_sample_rate`
        of the joint chain: ``digitizer.sample_rate_hz`` or the automatic rate,
        one digitiser clock for every channel);
        ``math.inf`` for the continuous records.

    Returns
    -------
    list of ndarray, one (k, k) matrix per group, in 1/(s · unit_i · unit_j).
    """
    from simulator.analysis.feasibility import _grid_of_form
    from simulator.model.poles import channel_form
    from simulator.model.sample_rate import record_sample_rate
    from simulator.model.tone_channels import check_tones

    system = _full_system(system)
    tones = check_tones(system.scenario, tones)
    models = models or _JointModels(system, tones)
    joint = models.joint(system.scenario)
    fs = (record_sample_rate(system.scenario, joint) if sample_rate_hz is None
          else float(sample_rate_hz))
    if not fs > 0:
        raise InputError(f"sample_rate_hz = {sample_rate_hz!r}; expected a positive rate in Hz "
                         "(or math.inf for the continuous records)")
    finite = None if math.isinf(fs) else fs
    omega = None if finite else _grid_of_form(channel_form(joint.model), fs)
    return fisher_blocks(models.record_model, system.scenario, groups, omega,
                         sample_rate_hz=finite, steps_of=models.stepped.steps)


@dataclasses.dataclass(frozen=True, kw_only=True)
class ToneSetBound:
    """Cramér–Rao bound on a mode's occupation from the records of a set of tones."""

    tones: tuple
    mode: str
    occupation: float
    paths: tuple
    error_one_second: float  # σ_n after 1 s
    information_per_second: float  # F of the bath parameter alone (1/(s·unit²))
    significance: float
    duration_s: float  # z² σ_n(1 s)²/(n + 1)²: the ratio n/(n + 1) told from 1 at z σ


def joint_bound(system, tones, mode=0, paths=None, *, significance=ASYMMETRY_SIGNIFICANCE,
                sample_rate_hz=None):
    """:class:`ToneSetBound` of ``tones`` recorded together (module doc)."""
    return tone_set_bounds(system, [tones], mode, paths, significance=significance,
                           sample_rate_hz=sample_rate_hz)[0]


def tone_set_bounds(system, tone_sets, mode=0, paths=None, *,
                    significance=ASYMMETRY_SIGNIFICANCE, sample_rate_hz=None):
    """:class:`ToneSetBound` of each set of tones, on the same footing (same paths, same rate).

    ``paths`` default: :func:`joint_default_paths` of the union of the sets, so
    that every set is bounded with the same parameters unknown.
    """
    from simulator.model.sample_rate import record_sample_rate
    from simulator.model.tone_channels import check_tones

    if not significance > 0:
        raise InputError(f"significance = {significance!r}; expected a positive number "
                         "of standard deviations")
    system = _full_system(system)
    scenario = system.scenario
    tone_sets = [check_tones(scenario, t) for t in tone_sets]
    union = tuple(dict.fromkeys(t for tones in tone_sets for t in tones))
    paths = tuple(paths) if paths is not None else joint_default_paths(scenario, union, mode)
    if sample_rate_hz is None:
        sample_rate_hz = record_sample_rate(scenario,
                                            _JointModels(system, union).joint(scenario))
    response = _CovarianceResponse(system)
    n = response.occupation(mode)
    grad = np.array([response.occupation_derivative(path, mode) for path in paths])
    bounds = []
    for tones in tone_sets:
        fisher = joint_fisher(system, tones, [paths], sample_rate_hz=sample_rate_hz)[0]
        try:
            variance = float(grad @ np.linalg.solve(fisher, grad))
        except np.linalg.LinAlgError:
            variance = math.inf
        if not variance >= 0:
            variance = math.inf
        error = math.sqrt(variance)
        bounds.append(ToneSetBound(
            tones=tones, mode=scenario.mechanics[mode].name, occupation=n, paths=paths,
            error_one_second=error, information_per_second=float(fisher[0, 0]),
            significance=float(significance),
            duration_s=float((significance * error / (n + 1)) ** 2)))
    return bounds


def detected_tone_sets(scenario):
    """The sets the report compares: each tone alone, then all together.

    The tones are the ``[[tones]]`` (probes; the ``[drive]`` is taken as the
    cooling tone, not recorded) when there are two or more, else the drive and
    the one added tone. Empty for the drive alone and for ``if`` records
    (whose joint record is not built).
    """
    from simulator.model.chain import receiver_of

    names = tuple(t.name for t in scenario.tones)
    if not names or receiver_of(scenario) == "if":
        return []
    if len(names) == 1:
        names = ("drive",) + names
    return [(name,) for name in names] + [names]


def tone_set_text(bounds):
    """Terminal lines of :func:`tone_set_bounds`, one block per mechanical mode."""
    lines = []
    for mode in dict.fromkeys(b.mode for b in bounds):
        block = [b for b in bounds if b.mode == mode]
        first = block[0]
        lines += ["", f"feasibility of the tones recorded together, mode {mode} "
                      "(joint Whittle information of every receiver's channels)",
                  f"  unknown: {', '.join(first.paths)}",
                  f"  T: the sideband ratio n/(n+1) told from 1 at {first.significance:g} "
                  "standard deviations, from σ_n with the device known apart from the "
                  "unknowns above",
                  "  (shorter than the time to resolve the asymmetry above, which frees "
                  "the whole lineshape of one record; docs/analysis.md)"]
        for b in block:
            label = (" and ".join(b.tones) + " together" if len(b.tones) > 1
                     else f"{b.tones[0]} alone")
            lines.append(f"  {label + ':':<36} σ_n after 1 s {b.error_one_second:.4g}, "
                         f"T = {b.duration_s:.4g} s")
    return lines
