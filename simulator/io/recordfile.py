"""Record files: one digitised record per HDF5 file, with its ground truth.

Layout (docs/records.md, "The file"; a reader needs h5py alone):

- root attributes ``format = "noisechain-record"``, ``format_version``,
  ``scenario_toml``, ``seed``, ``software_version``, ``sample_rate_hz``,
  ``kind`` (``"iq"`` or ``"if"``), ``created_utc``, and the detection
  settings that place the record on the optical axis;
- dataset ``samples``: integer ADC counts, (N, 2) for I, Q or (N,) for if,
  chunked, byte-shuffled and deflate-compressed (HDF5's built-in shuffle and
  gzip filters, so any HDF5 reader decodes it), with attributes
  ``volts_per_count`` and ``shot_noise_per_count``;
- group ``truth``: per-mode attribute arrays and the cavity occupation,
  subgroup ``truth/calibration`` with the conversion factors, optional
  dataset ``truth/mechanical_quadratures`` (N, 2 × modes).

The chunks of ``samples`` are shuffled and compressed here (:func:`encode_chunk`,
exactly what HDF5's filters would store) rather than by the HDF5 library, so
that the generator's worker threads compress them in parallel (zlib releases
the GIL); the main thread writes the finished bytes with HDF5's direct chunk
write.

The file is written under a temporary name in the target folder and renamed
when complete; the ``format`` attribute is written last, so a file that a
killed run leaves behind is neither at the target path nor loadable.
Reading a file back and checking its layout: :mod:`simulator.io.recordread`.
"""

import datetime
import functools
import zlib
from pathlib import Path

import numpy as np

from simulator.errors import InputError
from simulator.io.files import AtomicFile, OutputError
from simulator.io.recordread import (  # noqa: F401 (part of this module's API)
    _CHANNEL_ARRAYS,
    _TRUTH_ARRAYS,
    FORMAT,
    FORMAT_VERSION,
    _counts_of,
    _plain,
    _text,
    load_record,
    read_channels,
    read_truth,
)
from simulator.records.generate import Record, record_header, record_shape

HDF5_CHUNK_ROWS = 1 << 18  # 1 MB chunks of int16 pairs: few chunks even for 10⁹ samples
FREQUENCY_CONVENTION = ("I + iQ: anti-Stokes sideband (light above the drive) at positive "
                        "frequency of numpy.fft / scipy.signal.welch; if records: local "
                        "oscillator below the drive puts it above the intermediate frequency")
DEFLATE_LEVEL = 1  # zlib level of the samples: fastest; higher levels gain < 1 % (docs/records.md)
# Bytes of samples after which the disk is asked to start writing them (not to wait):
# the final flush of a long record then has only the last part left to write.
WRITE_BACK_BYTES = 32 << 20
COMPRESSIONS = ("none", "deflate")  # of the samples; docs/records.md weighs size against speed


class RecordFileWriter:
    """Streams a record into a temporary HDF5 file; renames it on :meth:`finish`.

    Use as a context manager: leaving the block by an exception closes and
    deletes the temporary file.
    """

    def __init__(self, path, plan, chunk_rows=HDF5_CHUNK_ROWS, *, overwrite=False,
                 compression="none"):
        import h5py

        if compression not in COMPRESSIONS:
            raise InputError(f"compression = {compression!r}; expected one of "
                             f"{', '.join(map(repr, COMPRESSIONS))}")
        self.deflate = compression == "deflate"

        self.path, self.plan = Path(path), plan
        if self.path.is_dir():
            raise InputError(f"output {str(self.path)!r} is a folder; expected a file name "
                             "such as record.h5")
        if not self.path.parent.is_dir():
            raise InputError(f"output folder {str(self.path.parent)!r} does not exist; "
                             "create it first")
        refuse_beyond_free_space(self.path, plan)
        self.output = AtomicFile(self.path, overwrite=overwrite)
        self.mech = None
        try:
            # no chunk cache: a chunk reaches the file when written, so a full disk
            # fails that write instead of a later flush that leaves HDF5 unable to
            # close the file (and crashing the interpreter at exit)
            self.file = h5py.File(self.output.tmp, "w", rdcc_nbytes=0)
        except OSError as exc:
            self.output.discard()
            raise InputError(f"cannot write {str(self.path)!r} ({exc})") from None
        try:
            n, rows = plan.n_samples, max(1, min(chunk_rows, HDF5_CHUNK_ROWS, plan.n_samples))
            shape = record_shape(plan)
            self.samples = self.file.create_dataset(
                "samples", shape=shape, dtype=np.int16 if plan.bits <= 16 else np.int32,
                chunks=(rows,) + shape[1:],
                **(dict(compression="gzip", compression_opts=DEFLATE_LEVEL, shuffle=True)
                   if self.deflate else {}))
            self.rows, self.partial, self.unflushed = rows, {}, 0
            self.truth = self.file.create_group("truth")
            if plan.watched.size:
                self.mech = self.truth.create_dataset(
                    "mechanical_quadratures", shape=(n, plan.watched.size), dtype=np.float64,
                    chunks=(rows, plan.watched.size), compression="gzip", compression_opts=1)
        except BaseException as exc:
            self.__exit__(type(exc), exc, None)
            raise

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        if exc_type is not None:
            self._close(strict=False)
            self.output.__exit__(exc_type, exc, tb)  # removes the file; names a write error
        return False

    def _close(self, *, strict):
        """Close the file once (h5py closes its datasets first, then the file).

        A second close of a file whose first close failed crashes HDF5, so
        the handle is dropped before trying. ``strict`` re-raises a failing
        close (disk full at the last flush); otherwise the error that brought
        us here is the one to report.
        """
        file, self.file = self.file, None
        self.mech = self.samples = self.truth = None
        if file is None:
            return
        try:
            file.close()
        except (OSError, RuntimeError) as exc:  # h5py reports a failed final flush as either
            if strict:
                raise OSError(str(exc)) from None

    def write(self, first, counts, mech):
        """Write a chunk of counts (and mechanical quadratures) from sample ``first``."""
        self.write_encoded(first, counts, mech, self.encode(first, counts))

    def encode(self, first, counts):
        """The compressed HDF5 chunks lying wholly in samples [first, first + len(counts)).

        Safe on any thread (it reads only its arguments); returns a list of
        (chunk index, bytes). A chunk that ends the record counts as whole.
        """
        rows, n = self.rows, self.plan.n_samples
        end = first + len(counts)
        out = []
        for k in range(-(-first // rows), (end - 1) // rows + 1):
            lo, hi = k * rows, min((k + 1) * rows, n)
            if hi <= end:
                out.append((k, encode_chunk(counts[lo - first:hi - first], rows, self.deflate)))
        return out

    def write_encoded(self, first, counts, mech, encoded):
        """Write the chunks :meth:`encode` made, and gather the rows of the chunks cut short.

        Rows of a chunk that straddles two calls are kept until the chunk is
        complete, then compressed and written here.
        """
        rows, n = self.rows, self.plan.n_samples
        whole = set()
        for k, data in encoded:
            self._put(k, data)
            whole.add(k)
        end = first + len(counts)
        for k in range(first // rows, (end - 1) // rows + 1):
            if k in whole:
                continue
            lo, hi = max(k * rows, first), min((k + 1) * rows, end)
            size = min((k + 1) * rows, n) - k * rows
            buffer, filled = self.partial.get(k, (np.empty((size,) + counts.shape[1:],
                                                           dtype=counts.dtype), 0))
            buffer[lo - k * rows:hi - k * rows] = counts[lo - first:hi - first]
            filled += hi - lo
            if filled == size:
                self.partial.pop(k, None)
                self._put(k, encode_chunk(buffer, rows, self.deflate))
            else:
                self.partial[k] = (buffer, filled)
        if mech is not None:
            self.mech[first:first + len(mech)] = mech

    def _put(self, k, data):
        offset = (k * self.rows,) + (0,) * (self.samples.ndim - 1)
        self.samples.id.write_direct_chunk(offset, data)
        self.unflushed += memoryview(data).nbytes
        if self.unflushed >= WRITE_BACK_BYTES:
            self.output.start_write_back()
            self.unflushed = 0

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
        s["columns"] = np.array(_columns(header), dtype=h5py.string_dtype())
        if plan.chain.tones:
            s["tones"] = np.array(plan.chain.tones, dtype=h5py.string_dtype())
            s["channel_shot_noise_per_count"] = np.asarray(header[
                "channel_shot_noise_per_count"], dtype=float)
        truth = plan.truth
        write_truth(self.truth, truth)
        if getattr(plan, "timeline", None) is not None:  # a scheduled record's truth in time
            from simulator.io.timelinefile import write_timeline
            write_timeline(self.truth.create_group("timeline"), plan.timeline)
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
        root["format_version"] = FORMAT_VERSION if plan.chain.tones else 1
        root["format"] = FORMAT
        self._close(strict=True)
        self.output.commit()
        return Record(counts=None, path=self.path, clipped_samples=clipped,
                      scenario=plan.scenario, truth=truth, created_utc=created,
                      mechanical_quadratures=None,
                      reader=functools.partial(_counts_of, self.path), **header)


def write_truth(group, truth):
    """The ground truth as attributes of ``group`` and its subgroup ``calibration``."""
    import h5py

    t = group.attrs
    t["mode_names"] = np.array(truth.mode_names, dtype=h5py.string_dtype())
    for name in _TRUTH_ARRAYS:
        t[name] = np.asarray(getattr(truth, name), dtype=float)
    t["cavity_occupation"] = truth.cavity_occupation
    cal = group.create_group("calibration").attrs
    for key, value in truth.calibration.items():
        cal[key] = value
    if truth.channels:
        write_channels(group.create_group("channels"), truth.channels)


def write_channels(group, channels):
    """Each detected tone's truth as a subgroup ``<k>`` of ``group`` (k = its pair's index),
    attributes its frame and couplings, sub-subgroup ``calibration``."""
    group.attrs["tones"] = np.array([c["tone"] for c in channels], dtype=_strings())
    for k, channel in enumerate(channels):
        sub = group.create_group(str(k))
        for key, value in channel.items():
            if key == "calibration":
                cal = sub.create_group("calibration").attrs
                for name, number in value.items():
                    cal[name] = number
            elif key in _CHANNEL_ARRAYS:
                sub.attrs[key] = np.asarray(value, dtype=float)
            else:
                sub.attrs[key] = value


def _strings():
    import h5py

    return h5py.string_dtype()


def _columns(header):
    """Names of the sample columns: I, Q; <tone>.I, <tone>.Q per detected tone; or r."""
    if header.get("tones"):
        return [f"{tone}.{q}" for tone in header["tones"] for q in "IQ"]
    return ["I", "Q"] if header["kind"] == "iq" else ["r"]


def encode_chunk(counts, rows, deflate=True):
    """One chunk of counts as HDF5 stores it: raw, or through its shuffle and deflate filters.

    The chunk is padded with zeros to ``rows`` rows (HDF5 stores edge chunks
    whole), its elements' bytes are regrouped by significance (the shuffle
    filter: all first bytes, then all second bytes, …) and the result is
    deflated with a zlib header, which is the HDF5 gzip filter's format
    (The HDF Group, HDF5 User's Guide, "Filters"; common practice of writers
    that compress chunks themselves). zlib releases the GIL while it works.
    Returns the deflated bytes, or for a raw chunk the (padded) array itself:
    h5py writes its buffer without another copy.
    """
    if len(counts) == rows:  # a whole chunk goes as it is: no padded copy
        block = np.ascontiguousarray(counts)
    else:
        block = np.zeros((rows,) + counts.shape[1:], dtype=counts.dtype)
        block[:len(counts)] = counts
    if not deflate:
        return block  # h5py's write_direct_chunk takes the array's buffer as it is
    width = block.dtype.itemsize
    shuffled = np.ascontiguousarray(block.reshape(-1).view(np.uint8).reshape(-1, width).T)
    return zlib.compress(shuffled.data, DEFLATE_LEVEL)


def record_bytes(plan):
    """Bytes of the samples of ``plan`` as written uncompressed (the truth is small)."""
    per_sample = int(np.prod(record_shape(plan)[1:])) * (2 if plan.bits <= 16 else 4)
    return plan.n_samples * per_sample


def refuse_beyond_free_space(path, plan):
    """Refuse, before any work, a record larger than the free space of its folder.

    Without this a slip in --duration (seconds for milliseconds) fills the disk
    for hours before the write fails. Deflate saves about a tenth
    (docs/records.md), which this check does not count on.
    """
    import shutil

    need = record_bytes(plan)
    free = shutil.disk_usage(path.parent).free
    if need > free:
        raise OutputError(
            f"output {str(path)!r}: a record of {plan.n_samples / plan.sample_rate_hz:.6g} s "
            f"at {plan.sample_rate_hz:.6g} samples/s is {plan.n_samples:.4g} samples, "
            f"{need / 1e9:.4g} GB, but the folder has {free / 1e9:.4g} GB free; expected a "
            "shorter --duration, another folder, or --averaged N (the averaged spectrum "
            "of the whole record, drawn from its law in milliseconds)")
