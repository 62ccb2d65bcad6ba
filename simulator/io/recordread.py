"""Reading a record file back: its layout checked, its samples, truth and scenario.

:func:`load_record` opens a file that :class:`simulator.io.recordfile.RecordFileWriter`
wrote, checks every attribute and dataset of the format (docs/records.md,
"The file") before it trusts one, and returns the
:class:`simulator.records.generate.Record` with its ground truth
(:func:`read_truth`). The format's name, version and the truth's attribute
names live here, beside the checks that read them; the writer imports them.
"""

from pathlib import Path

import numpy as np

from simulator.errors import InputError
from simulator.io.files import open_hdf5, require_format
from simulator.records.generate import Record, Truth

FORMAT = "noisechain-record"
FORMAT_VERSION = 2  # 2: several detected tones (samples (N, 2K), truth/channels); else as 1
_TRUTH_ARRAYS = ("occupation", "effective_frequency_hz", "effective_linewidth_hz",
                 "coupling_rate_hz", "zero_point_amplitude_m")
_CHANNEL_ARRAYS = ("coupling_rate_hz", "cooperativity")


def read_channels(group, path):
    """The per-tone truth that :func:`write_channels` stored, in the pairs' order."""
    tones = [_text(x) for x in group.attrs.get("tones", [])]
    out = []
    for k, tone in enumerate(tones):
        sub = group.get(str(k))
        if sub is None or "calibration" not in sub or _text(sub.attrs.get("tone", "")) != tone:
            raise InputError(f"record file {str(path)!r}: truth/channels/{k} is missing or "
                             f"not tone {tone!r}; expected one group per detected tone (a "
                             "file written by `noisechain record`)")
        entry = {key: (tuple(float(x) for x in value) if key in _CHANNEL_ARRAYS
                       else _plain(value)) for key, value in sub.attrs.items()}
        entry["calibration"] = {n: _plain(v) for n, v in sub["calibration"].attrs.items()}
        out.append(entry)
    return tuple(out)


def read_truth(group, path=""):
    """The :class:`simulator.records.generate.Truth` that :func:`write_truth` stored."""
    channels = read_channels(group["channels"], path) if "channels" in group else ()
    return Truth(mode_names=tuple(_text(x) for x in group.attrs["mode_names"]),
                 **{k: tuple(float(x) for x in group.attrs[k]) for k in _TRUTH_ARRAYS},
                 cavity_occupation=float(group.attrs["cavity_occupation"]),
                 calibration={k: _plain(v) for k, v in group["calibration"].attrs.items()},
                 channels=channels)


def _counts_of(path):
    """The counts of a record file (the samples alone: nothing else is read)."""
    return load_record(path, samples_only=True)


def load_record(path, *, start=0, stop=None, samples_only=False):
    """Read a record file back, with its ground truth and scenario.

    Parameters
    ----------
    path : str or pathlib.Path
    start, stop : int, optional
        Read only samples [start, stop) (and the same rows of the stored
        mechanical quadratures); by default the whole record.
    samples_only : bool
        Return only the counts (an ndarray), after the same checks of the
        file's layout; the mechanical quadratures and the scenario are not read.

    Returns
    -------
    simulator.records.generate.Record
        Or the counts alone with ``samples_only``.

    Raises
    ------
    simulator.errors.InputError
        Missing file, not HDF5, not a complete noisechain record, or a newer
        format version.
    """
    from simulator.scenario.loader import parse_scenario

    path = Path(path)
    with open_hdf5(path, "record file", "`noisechain record`") as f:
        require_format(f.attrs, path, FORMAT, f"is not a complete noisechain record (no "
                       f"format = {FORMAT!r} attribute; an interrupted write leaves such a "
                       "file)")
        a, s, t = _checked_layout(f, path)
        counts = s[start:stop]
        if samples_only:
            return counts
        mech = t["mechanical_quadratures"][start:stop] if "mechanical_quadratures" in t else None
        if mech is not None and not np.isfinite(mech).all():
            raise InputError(f"record file {str(path)!r}: truth/mechanical_quadratures holds "
                             f"{int(np.size(mech) - np.isfinite(mech).sum())} non-finite "
                             "values (NaN or infinity); expected finite numbers")
        truth = read_truth(t, path)
        scenario = parse_scenario(_text(a["scenario_toml"]), source=f"{path}:scenario_toml")
        tones = tuple(_text(x) for x in s.attrs.get("tones", ()))
        several = {} if not tones else dict(tones=tones, channel_shot_noise_per_count=tuple(
            float(x) for x in s.attrs["channel_shot_noise_per_count"]))
        return Record(**several,
            counts=counts, path=path, kind=_text(a["kind"]), scheme=_text(a["scheme"]),
            sample_rate_hz=float(a["sample_rate_hz"]), n_samples=int(a["n_samples"]),
            volts_per_count=float(s.attrs["volts_per_count"]),
            shot_noise_per_count=float(s.attrs["shot_noise_per_count"]),
            full_scale_v=float(s.attrs["full_scale_v"]), bits=int(s.attrs["bits"]),
            clipped_samples=int(a["clipped_samples"]),
            intermediate_frequency_hz=float(a["intermediate_frequency_hz"]),
            local_oscillator_side=_text(a["local_oscillator_side"]), seed=int(a["seed"]),
            form=_text(a["form"]), scenario=scenario, truth=truth,
            software_version=_text(a["software_version"]),
            created_utc=_text(a["created_utc"]), mechanical_quadratures=mech)


# What a record must hold, where: every name is read by load_record.
_ROOT_NUMBERS = ("format_version", "seed", "sample_rate_hz", "n_samples",
                 "intermediate_frequency_hz", "clipped_samples")
_ROOT_TEXT = ("scenario_toml", "kind", "scheme", "form", "local_oscillator_side",
              "software_version", "created_utc")
_SAMPLE_NUMBERS = ("volts_per_count", "shot_noise_per_count", "full_scale_v", "bits")


def _checked_layout(f, path):
    """The root attributes, samples and truth of an open record, every part checked.

    Raises :class:`InputError` naming the file and the missing or malformed
    part; the sample counts must be integers (a float dataset could hold NaN).
    """
    import h5py

    def bad(what, expected):
        return InputError(f"record file {str(path)!r}: {what}; expected {expected} (a file "
                          "written by `noisechain record`)")

    for where, group, names in (("root", f, _ROOT_NUMBERS + _ROOT_TEXT),
                                ("samples", f.get("samples"), _SAMPLE_NUMBERS),
                                ("truth", f.get("truth"),
                                 ("mode_names", "cavity_occupation") + _TRUTH_ARRAYS)):
        if group is None:
            raise bad(f"no {where!r} in the file", f"a dataset or group {where!r}")
        missing = [n for n in names if n not in group.attrs]
        if missing:
            raise bad(f"{where} lacks the attribute(s) {', '.join(missing)}",
                      "every attribute of the record format")
    a, s, t = f.attrs, f["samples"], f["truth"]
    for where, attrs, names in (("root", a, _ROOT_NUMBERS), ("samples", s.attrs,
                                                             _SAMPLE_NUMBERS)):
        for name in names:
            value = np.asarray(attrs[name])
            if value.shape != () or value.dtype.kind not in "iuf" or not np.isfinite(value):
                raise bad(f"{where} attribute {name} = {value!r}", "one finite number")
    version = int(a["format_version"])
    if version > FORMAT_VERSION:
        raise InputError(f"{str(path)!r} has record format version {version}; this "
                         f"software reads up to {FORMAT_VERSION}, upgrade noisechain")
    kind = _text(a["kind"])
    tones = s.attrs.get("tones", ()) if isinstance(s, h5py.Dataset) else ()
    shape = (int(a["n_samples"]), 2 * max(1, len(tones))) if kind == "iq" else (
        int(a["n_samples"]),)
    if len(tones) and np.size(s.attrs.get("channel_shot_noise_per_count", ())) != len(tones):
        raise bad(f"samples name {len(tones)} detected tones without one "
                  "channel_shot_noise_per_count each", "one scale per tone")
    if not isinstance(s, h5py.Dataset) or s.dtype.kind not in "iu":
        raise bad(f"samples are {getattr(s, 'dtype', 'a group')}, which can hold NaN or "
                  "infinity", "a dataset of integer ADC counts")
    if s.shape != shape:
        raise bad(f"samples have shape {s.shape} for a {kind!r} record of "
                  f"{int(a['n_samples'])} samples", f"shape {shape}")
    if not isinstance(t.get("calibration"), h5py.Group):
        raise bad("truth has no calibration group", "a group truth/calibration")
    return a, s, t


def _text(value):
    return value.decode("utf-8") if isinstance(value, bytes) else str(value)


def _plain(value):
    if isinstance(value, np.generic):
        return value.item()
    return _text(value) if isinstance(value, (bytes, str)) else value
