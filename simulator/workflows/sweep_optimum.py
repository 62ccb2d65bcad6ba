"""Where a sweep's best point is: the optimum of each figure of merit, and its neighbourhood.

For every figure of merit (the lowest occupation, the shortest time to
resolve the sideband asymmetry) and every mode, the best stable point of the
sweep, with three flags a reader should not miss: the optimum lies on the
grid's edge (a wider range may do better), beside an unstable cell, or
beside (or on) a bistable cell, where a small drift of power or detuning
moves the device off its operating point. Stored as the ``optima`` attribute
(JSON text) of the sweep Dataset and printed by ``noisechain sweep``.
"""

import json
import math

import numpy as np

from simulator.analysis.planner import grid_flags
from simulator.report.summary import coord_label
from simulator.workflows.inspection_text import LONG_INTEGRATION_S

# figure of merit → words; every one is minimised
FIGURES_OF_MERIT = {
    "occupation": "lowest occupation",
    "asymmetry_time_s": "shortest time to resolve the sideband asymmetry",
    "recorded_tones_time_s": "shortest time of the tones recorded together",
    "thermal_variance_error_1s": "smallest error of the thermal variance after 1 s",
}


def sweep_optima(dataset):
    """The optimum of each figure of merit and mode of a sweep Dataset (list of dicts)."""
    stable = dataset["stable"].values == 1
    masks = {"unstable": dataset["stable"].values == 0,
             "bistable": dataset["bistable"].values == 1}
    dims = dataset["stable"].dims
    names = tuple(str(m) for m in dataset["mode"].values)
    out = []
    for name, words in FIGURES_OF_MERIT.items():
        if name not in dataset:
            continue
        for m, mode in enumerate(dataset["mode"].values):
            values = np.where(stable, dataset[name].values[..., m], np.nan)
            if not np.isfinite(values).any():
                continue
            index = np.unravel_index(int(np.nanargmin(values)), values.shape)
            at, labels = {}, {}
            for d in dataset.coords:
                coord = dataset[d]
                if d != "mode" and coord.dims and set(coord.dims) <= set(dims):
                    at[d] = float(coord.values[tuple(index[dims.index(k)]
                                                     for k in coord.dims)])
                    labels[d] = coord_label(coord, names)
            entry = {"quantity": name, "description": words, "mode": str(mode),
                     "value": float(values[index]),
                     "units": dataset[name].attrs.get("units", ""), "at": at,
                     "labels": labels,
                     "index": [int(i) for i in index],
                     "bistable": bool(masks["bistable"][index])}
            entry.update(grid_flags(index, values.shape, masks))
            out.append(entry)
    return out


def optima_json(dataset):
    """:func:`sweep_optima` as JSON text (a NetCDF attribute holds text, not lists)."""
    return json.dumps(sweep_optima(dataset))


def caveats(entry):
    """The flags of one optimum in words (empty when there is nothing to say)."""
    words = []
    if entry["on_edge"]:
        words.append("on the edge of the sweep: a wider range may do better")
    if entry["next_to_unstable"]:
        words.append("next to unstable points")
    if entry["bistable"] or entry["next_to_bistable"]:
        words.append("on or next to bistable points")
    if entry.get("units") == "s" and entry["value"] > LONG_INTEGRATION_S:
        words.append("more than a day even here: a sideband weak against the record's floor "
                     "sets it; `noisechain plan` searches detuning and power beyond this grid")
    return words


def optima_lines(optima):
    """One line per optimum for the terminal."""
    lines = []
    for e in optima:
        labels = e.get("labels", {})
        where = ", ".join(f"{labels.get(k, k)} = {v:.4g}" for k, v in e["at"].items())
        unit = f" {e['units']}" if e["units"] else ""
        note = "; ".join(caveats(e))
        lines.append(f"  {e['description']} of {e['mode']}: {e['value']:.4g}{unit} at "
                     f"{where}" + (f"  [{note}]" if note else ""))
    return lines


def compare_own(optima, own_modes, own_feasibility):
    """Rows (figure, mode, own value, best value, ratio) linking the scenario's point to the best.

    ``own_modes`` and ``own_feasibility`` are the ``modes`` and ``feasibility``
    entries of the scenario's inspection (:meth:`Inspection.to_dict`).
    """
    own = {}
    for mode in own_modes:
        own[("occupation", mode["name"])] = mode.get("occupation")
    for f in own_feasibility:
        own[("asymmetry_time_s", f["mode"])] = f.get("asymmetry_time_s")
    rows = []
    for e in optima:
        mine = own.get((e["quantity"], e["mode"]))
        ratio = (mine / e["value"] if mine is not None and e["value"] > 0
                 and math.isfinite(mine) else None)
        rows.append((e["description"], e["mode"], mine, e["value"], ratio))
    return rows
