"""The truth in time of a scheduled record: group ``truth/timeline`` of its file.

Datasets (one row per time, one column per mode where it applies):
``times_s``, ``segment`` (index into the attribute ``segment_names``),
``occupation``, ``mean_q``, ``mean_p``, ``effective_frequency_hz``,
``effective_linewidth_hz``, ``cavity_occupation``; attributes ``mode_names``,
``segment_names``, ``segment_starts_s`` (docs/records.md, "Schedules").
The schedule itself is part of the scenario stored in ``scenario_toml``.
"""

from pathlib import Path

import numpy as np

from simulator.errors import InputError

_ARRAYS = ("times_s", "segment", "occupation", "mean_q", "mean_p", "effective_frequency_hz",
           "effective_linewidth_hz", "cavity_occupation")


def write_timeline(group, timeline):
    """Store a :class:`simulator.records.protocol.Timeline` in an open HDF5 group."""
    import h5py

    for name in _ARRAYS:
        group.create_dataset(name, data=np.asarray(getattr(timeline, name)))
    text = h5py.string_dtype()
    group.attrs["mode_names"] = np.array(timeline.mode_names, dtype=text)
    group.attrs["segment_names"] = np.array(timeline.segment_names, dtype=text)
    group.attrs["segment_starts_s"] = np.asarray(timeline.segment_starts_s, dtype=float)
    group.attrs["meaning"] = ("exact truth in time: occupation of the fluctuations, mean "
                              "quadratures (vacuum variance 1/2), and the effective frequency "
                              "and linewidth of the segment in force")


def read_timeline(path):
    """The :class:`simulator.records.protocol.Timeline` stored in a record file."""
    import h5py

    from simulator.records.protocol import Timeline

    path = Path(path)
    try:
        handle = h5py.File(path, "r")
    except OSError as exc:
        raise InputError(f"{str(path)!r} is not a readable HDF5 file ({exc})") from None
    with handle as f:
        if "truth/timeline" not in f:
            raise InputError(f"record file {str(path)!r} has no truth/timeline group; "
                             "expected a record of a scenario with a [schedule]")
        g = f["truth/timeline"]
        names = {k: tuple(x.decode() if isinstance(x, bytes) else str(x) for x in g.attrs[k])
                 for k in ("mode_names", "segment_names")}
        return Timeline(**names, segment_starts_s=np.asarray(g.attrs["segment_starts_s"]),
                        **{k: g[k][()] for k in _ARRAYS})
