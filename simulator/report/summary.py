"""The answer a report leads with: verdict, occupations, feasibility, best operating point.

:func:`at_a_glance` builds the first section of a run's report from the
inspection (plain data of
:meth:`simulator.workflows.inspection.Inspection.to_dict`), the sideband
summary and any "best operating point" rows. The last are a slot: a sweep
gives them through :func:`best_sweep_points`, and any other search for an
operating point (a planner) hands its own rows of (what, where, value) to the
same argument, so the reader finds the answer in one place whatever produced
it.
"""

import numpy as np

from simulator.report import html
from simulator.scenario.labels import axis_label


def at_a_glance(data, sidebands=(), best=()):
    """HTML of the answer: one sentence of verdict, a table per mode, the best points.

    Parameters
    ----------
    data : dict
        The inspection as plain data (non-finite numbers as None).
    sidebands : sequence of simulator.linear.sidebands.SidebandSummary
    best : sequence of (what, where, value)
        Best operating points found by a sweep or planner; "where" names the
        parameters in words (see :mod:`simulator.scenario.labels`).
    """
    parts = [f"<p><strong>{html.escape(_verdict(data))}</strong></p>"]
    ratio = {s.mode: s.occupation_from_ratio for s in sidebands}
    feasibility = {f["mode"]: f for f in data.get("feasibility") or ()}
    rows = []
    for m in data["modes"]:
        f = feasibility.get(m["name"], {})
        rows.append([m["name"], _value(m.get("occupation")), _value(ratio.get(m["name"])),
                     _value(f.get("occupation_error_1s")), _value(f.get("asymmetry_time_s"))])
    significance = next(iter(feasibility.values()), {}).get("significance", 5)
    parts.append(html.table(rows, header=[
        "mode", "phonon occupation n", "n from the sideband ratio",
        "error on n after 1 s (Cramér–Rao)",
        f"time to resolve the asymmetry at {significance:g}σ (s)"]))
    parts += _together(data)
    if data.get("backaction_evasion"):
        parts.append(quadrature_table(data["backaction_evasion"]))
    if best:
        parts.append("<p>Best stable operating points found:</p>" + html.table(
            [list(row) for row in best], header=["criterion", "where", "value"]))
    notes = _notes(data)
    parts.append(html.warnings_block(notes))
    return "\n".join(parts)


def _together(data):
    """With several recorded tones, the sentence that gives their joint bound beside the
    table (whose numbers are the detected tone's record alone)."""
    sets = [b for b in data.get("tone_sets") or () if len(b["tones"]) > 1]
    if not sets:
        return []
    return ["<p>" + html.escape(
        f"The table's bounds are the record of tone {data.get('detected_tone')} alone. "
        f"{' and '.join(b['tones'])} recorded together, mode {b['mode']}: error on n after "
        f"1 s {b['error_one_second']:.4g}, the sideband ratio told from 1 at "
        f"{b['significance']:g}σ after {b['duration_s']:.4g} s (joint Whittle information; "
        "the table below the figures compares each tone alone).") + "</p>" for b in sets]


def quadrature_table(bae):
    """HTML of a back-action-evading pair: X1 and X2, the imprecision, the resolution
    beside one tone's (the plain data of the inspection's ``backaction_evasion``)."""
    rows = [["X1 variance (measured; zero-point 0.5)", bae["x1_variance"]],
            ["X1: counter-rotating residual back-action", bae["x1_counter_rotating_backaction"]],
            ["X2 variance (conjugate)", bae["x2_variance"]],
            ["X2: back-action heating", bae["x2_backaction_heating"]],
            ["imprecision referred to X1, ideal detector (quanta)", bae["imprecision_quanta"]],
            ["imprecision referred to X1, this record (quanta)",
             bae["record_imprecision_quanta"]],
            ["least noise one tone adds (standard quantum limit, quanta)",
             bae["standard_quantum_limit_quanta"]]]
    rows += [[f"{r['scheme']}: error on n_th after 1 s (n_th the only unknown)",
              _value(r["occupation_error_1s"])] for r in bae.get("resolution", ())]
    return (f"<p>Back-action-evading measurement of mode {html.escape(bae['mode'])}:</p>"
            + html.table(rows, header=["quantity", "value"]))


def _verdict(data):
    if not data["stable"]:
        return f"Unstable operating point: {data['instability_cause']}. No steady state."
    regime = data.get("regime") or {}
    level = regime.get("level", "linear")
    text = "Stable operating point"
    text += ("; the linearised model holds" if level == "linear"
             else f"; linear engine: {level}")
    return text + "."


def _notes(data):
    notes = list(data.get("warnings") or ())
    regime = data.get("regime")
    if regime is not None and regime.get("level") != "linear":
        notes.insert(0, f"regime verdict: {regime['level']} — {regime['reason']}")
    return notes


def _value(x):
    return "—" if x is None or (isinstance(x, float) and not np.isfinite(x)) else float(x)


def _where(dataset, index):
    """The swept parameters at flat point ``index``, in words."""
    stable = dataset["stable"]
    position = np.unravel_index(index, stable.shape)
    parts = []
    names = tuple(str(m) for m in dataset["mode"].values)
    for dim, i in zip(stable.dims, position, strict=True):
        coords = [c for c in dataset.coords.values() if c.dims == (dim,) and c.name != dim]
        for coord in ([] if dim == "point" else [dataset[dim]]) + coords:
            parts.append(f"{coord_label(coord, names)} = {float(coord.values[i]):.4g}")
    return "; ".join(parts)


def coord_label(coord, mode_names=()):
    """Human label of a sweep coordinate from its ``path`` and ``units`` attributes."""
    path = coord.attrs.get("path", coord.name)
    units = coord.attrs.get("units", "")
    unit_path = units.removeprefix("in units of ") if units.startswith("in units of ") \
        else None
    return axis_label(path, unit_path, mode_names)


def best_sweep_points(dataset, optima):
    """(criterion, where, value) rows of a sweep's best stable points, in words.

    ``optima`` are the entries of
    :func:`simulator.workflows.sweep_optimum.sweep_optima` (the one search for
    a sweep's best points); each may carry ``notes`` (caveats in words), shown
    beside its value.
    """
    rows = []
    for e in optima:
        flat = int(np.ravel_multi_index(tuple(e["index"]), dataset["stable"].shape))
        unit = f" {e['units']}" if e.get("units") else ""
        notes = "; ".join(e.get("notes") or ())
        rows.append([f"{e['description']} of {e['mode']}", _where(dataset, flat),
                     f"{e['value']:.4g}{unit}" + (f" ({notes})" if notes else "")])
    return rows
