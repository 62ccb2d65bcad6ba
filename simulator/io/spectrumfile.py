"""Spectrum files: NetCDF (via xarray) and CSV, written by the one atomic writer.

:meth:`simulator.linear.spectrum.Spectrum.save` hands off to
:func:`save_spectrum`. The NetCDF variables carry their units and names in
attributes; the CSV starts with ``# key: value`` lines.
"""

import csv
import io
from pathlib import Path

import numpy as np

from simulator.errors import InputError
from simulator.io.files import atomic_write_text, write_netcdf


def spectrum_dataset(spectrum):
    """``spectrum`` as an :class:`xarray.Dataset` with units in attributes."""
    import xarray as xr  # imported when a file is written: a slow import

    coords = {"frequency": ("frequency", np.asarray(spectrum.frequency_hz),
                            {"units": "Hz", "long_name": spectrum.axis})}
    data = {"total": ("frequency", np.asarray(spectrum.total), {"units": spectrum.units})}
    for prefix, curves in (("budget", spectrum.contributions), ("reference", spectrum.reference)):
        for i, (name, arr) in enumerate(curves.items()):
            data[f"{prefix}_{i}"] = ("frequency", np.asarray(arr),
                                     {"units": spectrum.units, "long_name": name})
    if spectrum.lines:
        names = "; ".join(line.name for line in spectrum.lines)
        data["line_frequency"] = ("line", [x.frequency_hz for x in spectrum.lines],
                                  {"units": "Hz", "long_name": names})
        data["line_power"] = ("line", [x.power for x in spectrum.lines],
                              {"units": f"{spectrum.units} x Hz", "long_name": names})
    attrs = {"sided": spectrum.sided, "density": int(spectrum.density), "units": spectrum.units,
             "quantity": spectrum.quantity, "axis": spectrum.axis}
    attrs.update({f"calibration_{k}": v for k, v in spectrum.calibration.items()})
    attrs.update({f"provenance_{k}": str(v) for k, v in spectrum.provenance.items()})
    return xr.Dataset(data, coords=coords, attrs=attrs)


def save_spectrum(spectrum, path, *, overwrite=False):
    """Write ``spectrum`` to ``path``: NetCDF (``.nc``) or CSV (``.csv``), atomically.

    The CSV starts with ``# key: value`` lines (axis, sidedness, units,
    calibration, provenance except the embedded scenario), then one column
    per curve with a header row. Any other extension, or an existing file
    without ``overwrite``, raises :class:`~simulator.errors.InputError`.
    """
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in (".nc", ".csv"):
        raise InputError(f"output file {str(path)!r} has extension {path.suffix!r}; "
                         "expected .nc (NetCDF) or .csv")
    if suffix == ".csv":
        atomic_write_text(path, csv_text(spectrum), overwrite=overwrite)
    else:
        write_netcdf(spectrum_dataset(spectrum), path, overwrite=overwrite)
    return path


def csv_text(spectrum):
    """The CSV file of ``spectrum`` as text: ``# key: value`` lines, then one column per curve."""
    out = io.StringIO()
    meta = {"quantity": spectrum.quantity, "axis": spectrum.axis, "sided": spectrum.sided,
            "units": spectrum.units, "density": spectrum.density,
            **{f"calibration {k}": v for k, v in spectrum.calibration.items()},
            **{f"provenance {k}": v for k, v in spectrum.provenance.items()
               if k != "scenario_toml"}}
    for key, value in meta.items():
        out.write(f"# {key}: {value}\n")
    for line in spectrum.lines:
        out.write(f"# line: {line.name}; frequency_hz = {line.frequency_hz!r}; "
                  f"power = {line.power!r} ({spectrum.units} x Hz)\n")
    columns = {"frequency_hz": spectrum.frequency_hz, "total": spectrum.total,
               **spectrum.contributions,
               **{f"reference: {k}": v for k, v in spectrum.reference.items()}}
    csv.writer(out, lineterminator="\n").writerow(list(columns))
    table = np.column_stack([np.asarray(v, dtype=float) for v in columns.values()])
    np.savetxt(out, table, fmt="%.17g", delimiter=",")
    return out.getvalue()
