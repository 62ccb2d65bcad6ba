"""The user's estimator: what it sees, how it is loaded, run in isolation and checked.

``--estimator module:function`` (or ``path/to/file.py:function``) names
Python code that noisechain imports and runs with the user's privileges. It
is never imported into noisechain's own processes: the check before a run
and every trial run it in a forked child (:func:`simulator.workflows.processes.call_isolated`)
with a time limit, so an estimator that raises, exits, hangs or crashes
makes a failed trial with the reason, never a failed or silent run.

The function receives a :class:`PublicRecord` and returns
``{name: (value, uncertainty)}``. A record of several detected tones
(``detection.tones``) is handed to it one channel at a time, each a
one-tone :class:`PublicRecord` with ``tone`` set, and its quantities are
named ``<name>:<tone>``; an estimator that sets the attribute
``all_channels = True`` on its function receives the whole record at once
instead (``samples`` (N, K), one column per tone of ``tones``). Each pair must hold two real numbers
(``bool`` is not a number here), both finite, the uncertainty positive; a
quantity that breaks this is left out of the trial and named in its error.
"""

import dataclasses
import hashlib
import importlib
import importlib.util
import math
import numbers
import sys
from pathlib import Path

import numpy as np

from simulator.errors import InputError
from simulator.workflows.processes import call_isolated

DEFAULT_TIMEOUT_S = 600.0  # per trial; generous for a fit of a long record (our choice)


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class PublicRecord:
    """What an estimator may see: the data and the public description, no truth.

    ``samples`` are in shot-noise units (two-sided shot-noise density 1 per
    Hz): complex I + iQ for an ``iq`` record (anti-Stokes at positive
    frequency in an FFT), real for an ``if`` record. For an estimator with
    ``all_channels`` of a record of several detected tones, (N, K): column k
    the pair of ``tones[k]``, ``shot_noise_per_count`` the first's and
    ``channel_shot_noise_per_count`` each's. One channel handed alone has
    ``tone`` set to its tone (the anti-Stokes side is above that tone).
    """

    samples: np.ndarray
    kind: str
    scheme: str
    sample_rate_hz: float
    intermediate_frequency_hz: float
    local_oscillator_side: str
    volts_per_count: float
    shot_noise_per_count: float
    scenario: object
    tones: tuple = ()
    channel_shot_noise_per_count: tuple = ()
    tone: str = ""


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class PublicSpectrum:
    """What an estimator of averaged spectra may see: the estimate, no truth.

    ``estimate`` is a :class:`simulator.analysis.psd.PSDEstimate` in
    shot-noise units (two-sided for iq, one-sided for real records), as
    :func:`simulator.analysis.psd.averaged_periodogram` would return for the
    record; ``cross`` (iq) the averaged Z_f Z_{−f}/(fs N) on the same axis.
    An estimator tells the two inputs apart by type (or ``hasattr(x, "estimate")``).
    A spectrum of several detected tones is handed one tone at a time like a
    record (``tone`` set); an estimator with ``all_channels`` gets ``estimate``
    = a :class:`simulator.analysis.psd.SpectralMatrixEstimate` (every
    channel's spectrum, the cross- and pseudo-spectra), ``cross`` (F, K) each
    channel's own ±f term, and ``tones``.
    """

    estimate: object
    cross: np.ndarray | None
    segment_samples: int
    kind: str
    scheme: str
    sample_rate_hz: float
    intermediate_frequency_hz: float
    local_oscillator_side: str
    scenario: object
    tones: tuple = ()
    tone: str = ""


def public_view(record):
    """The :class:`PublicRecord` of a Record, or :class:`PublicSpectrum` of an averaged spectrum."""
    if hasattr(record, "segment_samples"):
        whole = dict(estimate=record.matrix(), tones=record.tones) if record.tones else dict(
            estimate=record.estimate())
        return PublicSpectrum(**whole, cross=record.cross,
                              segment_samples=record.segment_samples, kind=record.kind,
                              scheme=record.scheme, sample_rate_hz=record.sample_rate_hz,
                              intermediate_frequency_hz=record.intermediate_frequency_hz,
                              local_oscillator_side=record.local_oscillator_side,
                              scenario=record.scenario)
    several = {} if not getattr(record, "tones", ()) else dict(
        tones=record.tones, channel_shot_noise_per_count=record.channel_shot_noise_per_count)
    return PublicRecord(samples=record.shot_noise_units(), kind=record.kind,
                        scheme=record.scheme, sample_rate_hz=record.sample_rate_hz,
                        intermediate_frequency_hz=record.intermediate_frequency_hz,
                        local_oscillator_side=record.local_oscillator_side,
                        volts_per_count=record.volts_per_count,
                        shot_noise_per_count=record.shot_noise_per_count,
                        scenario=record.scenario, **several)


def channel_views(record):
    """``(tone, PublicRecord)`` of each detected tone's channel of ``record`` alone
    (``PublicSpectrum`` of each tone's averaged spectrum)."""
    if hasattr(record, "segment_samples"):
        return [(tone, dataclasses.replace(public_view(record.channel(tone)), tone=tone))
                for tone in record.tones]
    whole = public_view(record)
    return [(tone, dataclasses.replace(
        whole, samples=record.channel(tone), shot_noise_per_count=scale, tones=(),
        channel_shot_noise_per_count=(), tone=tone))
        for tone, scale in zip(record.tones, record.channel_shot_noise_per_count, strict=True)]


def apply_estimator(func, record):
    """``func``'s estimates of ``record``: whole, or channel by channel (module doc)."""
    if not getattr(record, "tones", ()) or getattr(func, "all_channels", False):
        return func(public_view(record))
    merged = {}
    for tone, view in channel_views(record):
        out = func(view)
        if not isinstance(out, dict):
            return out  # refused by checked(), with what it was
        merged.update({f"{name}:{tone}": value for name, value in out.items()})
    return merged


def load_estimator(spec):
    """Import ``module:function`` or ``path/to/file.py:function`` into this process.

    This runs the user's code here; noisechain itself calls it only inside
    the isolated child (see :func:`check_estimator` and :func:`estimate`).
    """
    module_name, sep, func_name = str(spec).rpartition(":")
    if not sep or not module_name or not func_name:
        raise InputError(f"--estimator {spec!r}: expected 'module:function' or "
                         "'path/to/file.py:function'")
    try:
        if module_name.endswith(".py"):
            path = Path(module_name)
            if not path.is_file():
                raise InputError(f"--estimator {spec!r}: file {path} "
                                 f"{'is a folder' if path.is_dir() else 'not found'}; "
                                 "expected a Python file")
            name = f"_noisechain_estimator_{hashlib.sha256(bytes(path.resolve())).hexdigest()}"
            module_spec = importlib.util.spec_from_file_location(name, path)
            module = importlib.util.module_from_spec(module_spec)
            sys.modules[name] = module
            module_spec.loader.exec_module(module)
        elif not all(part.isidentifier() for part in module_name.split(".")):
            raise InputError(f"--estimator {spec!r}: {module_name} is neither a module name "
                             "nor a .py file; expected 'module:function' or "
                             "'path/to/file.py:function'")
        else:
            module = importlib.import_module(module_name)
    except InputError:
        raise
    except Exception as exc:  # noqa: BLE001 - user code: report, don't crash
        raise InputError(f"--estimator {spec!r}: importing {module_name} failed "
                         f"({type(exc).__name__}: {exc})") from None
    func = getattr(module, func_name, None)
    if not callable(func):
        raise InputError(f"--estimator {spec!r}: {module_name} has no function "
                         f"{func_name!r}")
    return func


def _source_digest(spec):
    """Loads the estimator (in the child); digest of its module's source file."""
    func = load_estimator(spec)
    path = getattr(sys.modules.get(getattr(func, "__module__", ""), None), "__file__", None)
    try:
        return hashlib.sha256(Path(path).read_bytes()).hexdigest() if path else ""
    except OSError:
        return ""


def check_estimator(spec, timeout_s=DEFAULT_TIMEOUT_S):
    """Import the estimator in an isolated child; return the digest of its source.

    Raises
    ------
    simulator.errors.InputError
        The spec is malformed, the module does not import (whatever it does:
        raise, exit, hang), or it has no such function.
    """
    digest, failure = call_isolated(lambda: _source_digest(spec), timeout_s)
    if failure:
        if failure.startswith("InputError: "):
            raise InputError(failure.removeprefix("InputError: "))
        raise InputError(f"--estimator {spec!r}: loading it failed: {failure}")
    return digest


def estimate(spec, record, timeout_s=DEFAULT_TIMEOUT_S):
    """Run the estimator on ``record`` in an isolated child.

    Returns
    -------
    estimates : dict
        ``{name: [value, uncertainty]}`` of the quantities that passed the
        checks (see the module notes).
    failure : str
        Empty when every quantity passed; else the reasons, in words.
    """
    outcome, failure = call_isolated(
        lambda: checked(apply_estimator(load_estimator(spec), record)), timeout_s)
    if failure:
        return {}, failure
    return outcome["estimates"], "; ".join(outcome["rejected"])


def checked(estimates):
    """Split an estimator's return value into valid estimates and rejections.

    Returns
    -------
    dict
        ``{"estimates": {name: [value, uncertainty]}, "rejected": [reason, ...]}``

    Raises
    ------
    TypeError
        Not a non-empty dict.
    """
    if not isinstance(estimates, dict) or not estimates:
        raise TypeError(f"the estimator returned {type(estimates).__name__} "
                        f"{str(estimates)[:80]!r}; expected a non-empty dict "
                        "{name: (value, uncertainty)}")
    good, rejected = {}, []
    for name, pair in estimates.items():
        if (not isinstance(pair, (tuple, list)) or len(pair) != 2
                or not all(_real(x) for x in pair)):
            rejected.append(f"estimate {str(name)!r} is {str(pair)[:80]}; expected a pair "
                            "of real numbers (value, uncertainty)")
            continue
        value, error = (float(x) for x in pair)
        if not (math.isfinite(value) and math.isfinite(error) and error > 0):
            rejected.append(f"estimate {str(name)!r} is ({value!r}, {error!r}); expected a "
                            "finite value and a finite, positive uncertainty")
            continue
        good[str(name)] = [value, error]
    return {"estimates": good, "rejected": rejected}


def _real(x):
    return isinstance(x, numbers.Real) and not isinstance(x, (bool, np.bool_))
