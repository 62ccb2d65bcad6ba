"""Parameter paths of a back-action-evading pair as one thing: ``pair.power_w`` and its kin.

A declared pair (``detection.backaction_evading = true``: the ``[drive]`` and
one ``[[tones]]`` table at ±Ωm about the cavity) is tuned as a pair, not tone
by tone: its total power with the two tones' ratio kept (so a balanced pair
stays balanced; an upper tone a little stronger than the lower one
anti-damps the mode), its centre and its spacing. Moving one tone alone
changes all three at once, and a search over the two tones' powers follows a
ridge one part in 10⁴ wide (the balance), which no coarse grid resolves.
These paths give sweeps and plans the pair's own coordinates:

``pair.power_w`` (or ``pair.power_dbm``)
    the two tones' summed power; setting it scales both by the same factor.
``pair.mean_detuning_hz``
    Δ̄ = (Δ− + Δ+)/2, the pair's centre from the cavity (measured as
    ``drive.detuning_reference`` says); setting it moves both tones together.
``pair.spacing_offset_hz``
    ν − Ωm, half the tones' spacing ν = (Δ+ − Δ−)/2 less the mechanical
    frequency (0 for the ideal pair: the tones at exactly ±Ωm about their
    centre); setting it keeps the centre.

They exist for a declared pair only; elsewhere they are refused with the
reason. :class:`simulator.scenario.loader.Scenario` hands them here from
``get`` and ``replace`` (which builds the new scenario from :func:`replaced_data`).
"""

import math

from simulator.errors import ScenarioError
from simulator.scenario import units

PREFIX = "pair."
POWER, POWER_DBM = "pair.power_w", "pair.power_dbm"
MEAN_DETUNING, SPACING_OFFSET = "pair.mean_detuning_hz", "pair.spacing_offset_hz"
PATHS = (POWER, POWER_DBM, MEAN_DETUNING, SPACING_OFFSET)


def is_pair_path(path):
    """True for a path in the ``pair.`` family (known or not: an unknown one is refused here)."""
    return str(path).startswith(PREFIX)


def _require_pair(scenario, path):
    if str(path) not in PATHS:
        raise ScenarioError(f"no parameter at path {path!r}; the pair's paths are "
                            f"{', '.join(PATHS)}", source=scenario.source, key=str(path))
    if not scenario.detection.backaction_evading or len(scenario.tones) != 1:
        raise ScenarioError(
            f"path {path!r} names the two tones of a back-action-evading pair; expected "
            "detection.backaction_evading = true with the [drive] and one [[tones]] table",
            source=scenario.source, key=str(path))


def get(scenario, path):
    """Value of a ``pair.`` path (module notes)."""
    _require_pair(scenario, path)
    drive, tone = scenario.drive, scenario.tones[0]
    if path in (POWER, POWER_DBM):
        total = drive.power_w + tone.power_w
        return units.dbm_from_watts(total) if path == POWER_DBM else total
    if path == MEAN_DETUNING:
        return (drive.detuning_hz + tone.detuning_hz) / 2
    return abs(tone.detuning_hz - drive.detuning_hz) / 2 - scenario.mechanics[0].frequency_hz


def replaced_data(scenario, path, value):
    """Plain data of ``scenario`` with the pair's ``path`` set to ``value`` (module notes);
    the loader builds and checks the new scenario from it (:func:`restated` words its
    errors)."""
    _require_pair(scenario, path)
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(
            float(value)):
        raise ScenarioError(f"{value!r} is not a finite number; expected a number for "
                            f"{path!r}", source=scenario.source, key=path)
    value = float(value)
    data = scenario.to_dict()
    drive, tone = data["drive"], data["tones"][0]
    if path in (POWER, POWER_DBM):
        total = units.watts_from_dbm(value) if path == POWER_DBM else value
        if not total > 0 or not math.isfinite(total):
            raise ScenarioError(f"{value!r}{' dBm' if path == POWER_DBM else ' W'}; expected "
                                "a positive, finite total power of the pair",
                                source=scenario.source, key=path)
        now = scenario.drive.power_w + scenario.tones[0].power_w
        shares = ((scenario.drive.power_w / now, scenario.tones[0].power_w / now) if now > 0
                  else (0.5, 0.5))
        for table, share in zip((drive, tone), shares, strict=True):
            table.pop("power_dbm", None)
            table["power_w"] = total * share
    else:
        omega = scenario.mechanics[0].frequency_hz
        mean, half = get(scenario, MEAN_DETUNING), get(scenario, SPACING_OFFSET) + omega
        if path == MEAN_DETUNING:
            mean = value
        elif value > -omega:
            half = omega + value
        else:
            raise ScenarioError(f"{value!r} Hz; expected an offset of half the tones' "
                                f"spacing from Ωm/2π = {omega:.6g} Hz above −Ωm/2π (a "
                                "positive spacing)", source=scenario.source, key=path)
        upper_is_tone = scenario.tones[0].detuning_hz >= scenario.drive.detuning_hz
        sign = 1.0 if upper_is_tone else -1.0
        tone["detuning_hz"], drive["detuning_hz"] = mean + sign * half, mean - sign * half
    return data


def restated(exc, path, value):
    """The error of the scenario built by :func:`replaced_data`, naming the pair's path."""
    return ScenarioError(f"{path} = {value!r} makes the tones invalid: {exc.detail}",
                         source=exc.source, key=path)
