"""Averaged-spectrum files: one synthetic averaged periodogram per HDF5 file, with its truth.

The companion of :mod:`simulator.io.recordfile` for
:func:`simulator.analysis.synthetic_spectrum.synthetic_averaged_spectrum`;
the same conventions (docs/records.md, "Synthetic averaged spectra"), and h5py
alone reads it:

- root attributes ``format = "noisechain-averaged-spectrum"``,
  ``format_version``, ``scenario_toml``, ``seed``, ``software_version``,
  ``created_utc``, ``kind``, ``scheme``, ``sample_rate_hz``, ``n_samples``,
  ``duration_s``, ``intermediate_frequency_hz``, ``local_oscillator_side``,
  ``frequency_convention``, and the estimator's settings ``segment_samples``,
  ``averages``, ``window``, ``sided``, ``resolution_hz``,
  ``noise_bandwidth_hz``, ``rounding_variance``, ``units``;
- datasets ``frequency_hz``, ``density`` and, for iq, ``cross`` (complex:
  the averaged Z_f Z_{−f}/(fs N));
- group ``truth`` as in a record file, with the exact means
  ``truth/expected_density`` (and ``truth/expected_cross``);
- with several detected tones (format version 2): root attributes
  ``tones`` and ``channel_rounding_variance`` (one per tone, in the
  channels' order); ``density`` and ``cross`` of shape (F, K), column k
  tone k's; complex datasets ``spectral_matrix`` and ``pseudo_matrix``
  (F, K, K): the averaged Z_j(f) Z_l(f)*/(fs N) and Z_j(f) Z_l(−f)/(fs N)
  (diagonals: ``density`` and ``cross``), their exact means under
  ``truth/``; each tone's frame and calibration in ``truth/channels`` as
  in a record file.

Written through :class:`simulator.io.files.AtomicFile`: a temporary file
renamed when complete, the ``format`` attribute last.
"""

from pathlib import Path

import numpy as np

from simulator.errors import InputError
from simulator.io.files import AtomicFile, open_hdf5, require_format
from simulator.io.recordfile import FREQUENCY_CONVENTION, _text, read_truth, write_truth

FORMAT = "noisechain-averaged-spectrum"
FORMAT_VERSION = 2  # 2: several detected tones (tones, matrices); else as 1
UNITS = "shot-noise units squared per Hz (shot-noise floor 1 per Hz, two-sided)"
_NUMBERS = ("seed", "sample_rate_hz", "n_samples", "intermediate_frequency_hz",
            "segment_samples", "averages", "resolution_hz", "noise_bandwidth_hz",
            "rounding_variance")
_TEXT = ("kind", "scheme", "local_oscillator_side", "window", "sided", "software_version",
         "created_utc")


def write_averaged_spectrum(spectrum, path, *, overwrite=False):
    """Write ``spectrum`` (an AveragedSpectrum) to ``path`` atomically; return the path."""
    import h5py

    path = Path(path)
    if path.is_dir() or not path.parent.is_dir():
        raise InputError(f"output {str(path)!r}: expected a file name such as spectrum.h5 "
                         "in an existing folder")
    with AtomicFile(path, overwrite=overwrite) as out:  # renamed into place on a clean exit
        try:
            handle = h5py.File(out.tmp, "w")
        except OSError as exc:
            raise InputError(f"cannot write {str(path)!r} ({exc})") from None
        with handle as f:
            f.create_dataset("frequency_hz", data=spectrum.frequency_hz)
            f.create_dataset("density", data=spectrum.density)
            truth = f.create_group("truth")
            write_truth(truth, spectrum.truth)
            truth.create_dataset("expected_density", data=spectrum.expected_density)
            if spectrum.cross is not None:
                f.create_dataset("cross", data=spectrum.cross)
                truth.create_dataset("expected_cross", data=spectrum.expected_cross)
            a = f.attrs
            a["scenario_toml"] = spectrum.scenario.to_toml()
            for key in _NUMBERS + _TEXT:
                a[key] = getattr(spectrum, key)
            a["duration_s"] = spectrum.n_samples / spectrum.sample_rate_hz
            a["units"] = UNITS
            a["frequency_convention"] = FREQUENCY_CONVENTION
            if spectrum.tones:
                _write_channels(f, spectrum)
            a["format_version"] = FORMAT_VERSION if spectrum.tones else 1
            a["format"] = FORMAT
    return path


def load_averaged_spectrum(path):
    """Read an averaged-spectrum file back as an AveragedSpectrum (with truth and scenario).

    Raises
    ------
    simulator.errors.InputError
        Missing file, not HDF5, not a complete averaged-spectrum file, a
        missing or malformed part, or a newer format version.
    """
    from simulator.analysis.synthetic_spectrum import AveragedSpectrum
    from simulator.scenario.loader import parse_scenario

    path = Path(path)
    with open_hdf5(path, "averaged-spectrum file", "`noisechain record --averaged`") as f:
        a = f.attrs
        require_format(a, path, FORMAT, "is not a complete noisechain averaged spectrum "
                       f"(no format = {FORMAT!r} attribute)")
        if int(a.get("format_version", 0)) > FORMAT_VERSION:
            raise InputError(f"{str(path)!r} has averaged-spectrum format version "
                             f"{int(a['format_version'])}; this software reads up to "
                             f"{FORMAT_VERSION}, upgrade noisechain")
        try:
            iq = _text(a["kind"]) == "iq"
            data = {k: f[k][:] for k in ("frequency_hz", "density")}
            expected = f["truth/expected_density"][:]
            cross = (f["cross"][:], f["truth/expected_cross"][:]) if iq else (None, None)
            numbers = {k: float(a[k]) for k in _NUMBERS}
            text = {k: _text(a[k]) for k in _TEXT}
            truth = read_truth(f["truth"], path)
            several = _read_channels(f) if "tones" in a else {}
        except KeyError as exc:
            raise InputError(f"averaged-spectrum file {str(path)!r} lacks {exc}; expected "
                             "every part of the format (docs/records.md)") from None
        if several:
            _check_channels(path, several, data["density"].shape, truth)
        if not all(np.isfinite(x).all() for x in (data["density"], expected)):
            raise InputError(f"averaged-spectrum file {str(path)!r}: density holds NaN or "
                             "infinity; expected finite numbers")
        scenario = parse_scenario(_text(a["scenario_toml"]), source=f"{path}:scenario_toml")
    for key in ("seed", "n_samples", "segment_samples", "averages"):
        numbers[key] = int(numbers[key])
    return AveragedSpectrum(**data, cross=cross[0], expected_density=expected,
                            expected_cross=cross[1], scenario=scenario, truth=truth,
                            path=path, **numbers, **text, **several)


_MATRICES = ("spectral_matrix", "pseudo_matrix")


def _write_channels(f, spectrum):
    """The tones, their rounding and the spectral matrices of a spectrum of several tones."""
    import h5py

    f.attrs["tones"] = np.array(spectrum.tones, dtype=h5py.string_dtype())
    f.attrs["channel_rounding_variance"] = np.asarray(spectrum.channel_rounding_variance,
                                                      dtype=float)
    for name in _MATRICES:
        f.create_dataset(name, data=getattr(spectrum, name))
        f["truth"].create_dataset(name, data=getattr(spectrum, f"expected_{name}"))


def _check_channels(path, several, shape, truth):
    """Refuse matrices, densities and per-tone truths whose sizes disagree."""
    k = len(several["tones"])
    want = (shape[0], k, k)
    shapes = [several[key].shape for key in several if key.endswith("matrix")]
    if len(shape) != 2 or shape[1] != k or any(s != want for s in shapes) or len(
            truth.channels) != k or len(several["channel_rounding_variance"]) != k:
        raise InputError(f"averaged-spectrum file {str(path)!r}: density {shape}, matrices "
                         f"{shapes} and {len(truth.channels)} channel truths for {k} tones; "
                         f"expected (F, {k}), (F, {k}, {k}) and one truth and rounding "
                         "variance per tone")


def _read_channels(f):
    """What :func:`_write_channels` stored, as AveragedSpectrum fields."""
    out = {"tones": tuple(_text(x) for x in f.attrs["tones"]),
           "channel_rounding_variance": tuple(float(x) for x in
                                              f.attrs["channel_rounding_variance"])}
    for name in _MATRICES:
        out[name] = f[name][:]
        out[f"expected_{name}"] = f[f"truth/{name}"][:]
    return out
