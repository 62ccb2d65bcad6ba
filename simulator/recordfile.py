"""Record files: one digitised record per HDF5 file, with its ground truth.

Layout (docs/records.md, "The file"; a reader needs h5py alone):

- root attributes ``format = "noisechain-record"``, ``format_version``,
  ``scenario_toml``, ``seed``, ``software_version``, ``sample_rate_hz``,
  ``kind`` (``"iq"`` or ``"if"``), ``created_utc``, and the detection
  settings that place the record on the optical axis;
- dataset ``samples``: integer ADC counts, (N, 2) for I, Q or (N,) for if,
  chunked and gzip-compressed, with attributes ``volts_per_count`` and
  ``shot_noise_per_count``;
- group ``truth``: per-mode attribute arrays and the cavity occupation,
  subgroup ``truth/calibration`` with the conversion factors, optional
  dataset ``truth/mechanical_quadratures`` (N, 2 × modes).

The file is written under a temporary name in the target folder and renamed
when complete; the ``format`` attribute is written last, so a file that a
killed run leaves behind is neither at the target path nor loadable.
"""

import datetime
import os
import tempfile
from pathlib import Path

import numpy as np

from simulator.errors import InputError
from simulator.records import Record, Truth, record_header

FORMAT = "noisechain-record"
FORMAT_VERSION = 1
HDF5_CHUNK_ROWS = 1 << 18  # 1 MB chunks of int16 pairs: few chunks even for 10⁹ samples
FREQUENCY_CONVENTION = ("I + iQ: anti-Stokes sideband (light above the drive) at positive "
                        "frequency of numpy.fft / scipy.signal.welch; if records: local "
                        "oscillator below the drive puts it above the intermediate frequency")
_TRUTH_ARRAYS = ("occupation", "effective_frequency_hz", "effective_linewidth_hz",
                 "coupling_rate_hz", "zero_point_amplitude_m")


class RecordFileWriter:
    """Streams a record into a temporary HDF5 file; renames it on :meth:`finish`.

    Use as a context manager: leaving the block by an exception closes and
    deletes the temporary file.
    """

    def __init__(self, path, plan, chunk_rows=HDF5_CHUNK_ROWS):
        import h5py

        self.path, self.plan = Path(path), plan
        if self.path.is_dir():
            raise InputError(f"output {str(self.path)!r} is a folder; expected a file name "
                             "such as record.h5")
        if not self.path.parent.is_dir():
            raise InputError(f"output folder {str(self.path.parent)!r} does not exist; "
                             "create it first")
        fd, tmp = tempfile.mkstemp(dir=self.path.parent, prefix=f".{self.path.name}.",
                                   suffix=".part")
        os.close(fd)
        mask = os.umask(0)
        os.umask(mask)
        os.chmod(tmp, 0o666 & ~mask)  # mkstemp makes it private; a record is an ordinary file
        self.tmp = Path(tmp)
        try:
            self.file = h5py.File(self.tmp, "w")
        except OSError as exc:
            self.tmp.unlink(missing_ok=True)
            raise InputError(f"cannot write {str(self.path)!r} ({exc})") from None
        n, rows = plan.n_samples, max(1, min(chunk_rows, HDF5_CHUNK_ROWS, plan.n_samples))
        shape = (n, 2) if plan.chain.record_kind == "iq" else (n,)
        self.samples = self.file.create_dataset(
            "samples", shape=shape, dtype=np.int16 if plan.bits <= 16 else np.int32,
            chunks=(rows,) + shape[1:], compression="gzip", compression_opts=1,
            shuffle=True)
        self.truth = self.file.create_group("truth")
        self.mech = None
        if plan.watched.size:
            self.mech = self.truth.create_dataset(
                "mechanical_quadratures", shape=(n, plan.watched.size), dtype=np.float64,
                chunks=(rows, plan.watched.size), compression="gzip", compression_opts=1)

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        if exc_type is not None:
            self.file.close()
            self.tmp.unlink(missing_ok=True)
        return False

    def write(self, first, counts, mech):
        """Write a chunk of counts (and mechanical quadratures) from sample ``first``."""
        self.samples[first:first + len(counts)] = counts
        if mech is not None:
            self.mech[first:first + len(mech)] = mech

    def finish(self, clipped):
        """Write the attributes, close, and rename into place; return the Record."""
        import h5py

        plan = self.plan
        header = record_header(plan, plan.chain.record_kind)
        created = datetime.datetime.now(datetime.UTC).isoformat(timespec="seconds")
        s = self.samples.attrs
        s["volts_per_count"] = header["volts_per_count"]
        s["shot_noise_per_count"] = header["shot_noise_per_count"]
        s["full_scale_v"] = header["full_scale_v"]
        s["bits"] = header["bits"]
        s["columns"] = np.array(["I", "Q"] if header["kind"] == "iq" else ["r"],
                                dtype=h5py.string_dtype())
        truth = plan.truth
        t = self.truth.attrs
        t["mode_names"] = np.array(truth.mode_names, dtype=h5py.string_dtype())
        for name in _TRUTH_ARRAYS:
            t[name] = np.asarray(getattr(truth, name), dtype=float)
        t["cavity_occupation"] = truth.cavity_occupation
        cal = self.truth.create_group("calibration").attrs
        for key, value in truth.calibration.items():
            cal[key] = value
        if self.mech is not None:
            self.mech.attrs["columns"] = np.array(
                [f"{m}.{q}" for m in truth.mode_names for q in "qp"], dtype=h5py.string_dtype())
            self.mech.attrs["meaning"] = ("mode quadratures q, p at the start of each sample "
                                          "interval, vacuum variance 1/2; displacement "
                                          "x = sqrt(2) * zero_point_amplitude_m * q")
        root = self.file.attrs
        root["scenario_toml"] = plan.scenario.to_toml()
        for key in ("seed", "software_version", "sample_rate_hz", "kind", "scheme", "form",
                    "n_samples", "intermediate_frequency_hz", "local_oscillator_side"):
            root[key] = header[key]
        root["duration_s"] = plan.n_samples / plan.sample_rate_hz
        root["clipped_samples"] = clipped
        root["created_utc"] = created
        root["frequency_convention"] = FREQUENCY_CONVENTION
        root["format_version"] = FORMAT_VERSION
        root["format"] = FORMAT
        self.file.flush()
        self.file.close()
        with open(self.tmp, "rb") as handle:
            os.fsync(handle.fileno())
        os.replace(self.tmp, self.path)
        return Record(counts=None, path=self.path, clipped_samples=clipped,
                      scenario=plan.scenario, truth=truth, created_utc=created,
                      mechanical_quadratures=None, **header)


def load_record(path, *, start=0, stop=None):
    """Read a record file back, with its ground truth and scenario.

    Parameters
    ----------
    path : str or pathlib.Path
    start, stop : int, optional
        Read only samples [start, stop) (and the same rows of the stored
        mechanical quadratures); by default the whole record.

    Returns
    -------
    simulator.records.Record

    Raises
    ------
    simulator.errors.InputError
        Missing file, not HDF5, not a complete noisechain record, or a newer
        format version.
    """
    import h5py

    from simulator.scenario import parse_scenario

    path = Path(path)
    if not path.is_file():
        raise InputError(f"record file {str(path)!r} not found; expected an HDF5 file "
                         "written by `noisechain record`")
    try:
        handle = h5py.File(path, "r")
    except OSError as exc:
        raise InputError(f"{str(path)!r} is not a readable HDF5 file ({exc})") from None
    with handle as f:
        if f.attrs.get("format") != FORMAT:
            raise InputError(f"{str(path)!r} is not a complete noisechain record (no "
                             f"format = {FORMAT!r} attribute; an interrupted write leaves "
                             "such a file)")
        version = int(f.attrs["format_version"])
        if version > FORMAT_VERSION:
            raise InputError(f"{str(path)!r} has record format version {version}; this "
                             f"software reads up to {FORMAT_VERSION}, upgrade noisechain")
        a, s, t = f.attrs, f["samples"], f["truth"]
        counts = s[start:stop]
        mech = t["mechanical_quadratures"][start:stop] if "mechanical_quadratures" in t else None
        truth = Truth(mode_names=tuple(_text(x) for x in t.attrs["mode_names"]),
                      **{k: tuple(float(x) for x in t.attrs[k]) for k in _TRUTH_ARRAYS},
                      cavity_occupation=float(t.attrs["cavity_occupation"]),
                      calibration={k: _plain(v) for k, v in t["calibration"].attrs.items()})
        scenario = parse_scenario(_text(a["scenario_toml"]), source=f"{path}:scenario_toml")
        return Record(
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


def _text(value):
    return value.decode("utf-8") if isinstance(value, bytes) else str(value)


def _plain(value):
    if isinstance(value, np.generic):
        return value.item()
    return _text(value) if isinstance(value, (bytes, str)) else value
