"""Master-equation numbers set beside the linear engine's, for ``inspect --master``.

Plain data and text only; the command line prints them, this module does not
know about it.
"""

import math

from simulator.master.steady import master_steady_state


def master_comparison(linear_report, kind="full", **options):
    """Steady-state numbers of the master equation next to the linear ones.

    Parameters
    ----------
    linear_report : simulator.workflows.inspection.Inspection
        The linear engine's report (its steady state must exist); the master
        model is built from its system.
    kind : {"full", "linearised"}
    **options
        Passed to :func:`~simulator.master.steady.master_steady_state`.

    Returns
    -------
    dict
        ``rows``: (quantity, linear, master) triples; ``steady``: the master
        steady state as plain data (cutoffs, truncation, solver).
    """
    system = linear_report.system
    if (kind == "linearised" and system.point.several_tones
            and not system.scenario.detection.backaction_evading):
        return _tone_fields_comparison(system, **options)
    steady = master_steady_state(system, kind, **options)
    linear = linear_report.steady
    rows = [("cavity occupation (fluctuations)", linear.cavity_occupation,
             steady.cavity.occupation)]
    if kind == "full":
        rows.append(("intracavity photons ⟨a†a⟩", linear_report.point.photon_number,
                     steady.cavity.quanta))
        rows.append(("cavity g²(0)", gaussian_g2(linear_report.point.photon_number,
                                                linear.covariance), steady.cavity_g2))
    for ls, ms in zip(linear.modes, steady.modes, strict=True):
        rows.append((f"{ms.name}: occupation", ls.occupation, ms.occupation))
    return {"model": kind, "frame": steady.model.frame,
            "rows": [{"quantity": q, "linear": lin, "master": me,
                      "relative_difference": _relative(lin, me)} for q, lin, me in rows],
            "steady": steady.to_dict()}


def _tone_fields_comparison(system, **options):
    """:func:`master_comparison` with several tones: the linearised master equation with
    one factor per tone field (simulator.master.tone_fields), every factor's occupation."""
    from simulator.master.tone_fields import tone_field_occupations, tone_fields_steady_state
    from simulator.model.system import as_system

    system = as_system(system, several_tones=True)
    state = tone_fields_steady_state(system, **options)
    names, linear = tone_field_occupations(system)
    modes = {m.name for m in system.point.modes}
    rows = [(f"{name}: occupation" if name in modes else f"tone {name}: field occupation",
             lin, state.occupation(name)) for name, lin in zip(names, linear, strict=True)]
    return {"model": "linearised", "frame": "each tone's own",
            "rows": [{"quantity": q, "linear": lin, "master": me,
                      "relative_difference": _relative(lin, me)} for q, lin, me in rows],
            "steady": {"factors": [{"name": n, "cutoff": c, "tail_population": p}
                                   for n, c, p in zip(state.names, state.cutoffs,
                                                      state.tail_populations, strict=True)],
                       "hilbert_dimension": math.prod(state.cutoffs)}}


def comparison_text(data):
    """Terminal text of :func:`master_comparison`'s result."""
    s = data["steady"]
    if "factors" in s:  # several tones: one factor per tone field and mechanical mode
        return _factors_text(data)
    dims = " × ".join(f"{m['cutoff']} ({m['name']})" for m in [s["cavity"], *s["modes"]])
    lines = [f"master equation ({data['model']} model, {data['frame']} frame; Fock "
             f"cutoffs {dims} = {s['hilbert_dimension']} states)",
             *_row_lines(data["rows"])]
    tails = ", ".join(f"{m['name']} {m['tail_population']:.1e}"
                      for m in [s["cavity"], *s["modes"]])
    lines.append(f"  truncation: population in the top Fock levels {tails} "
                 f"(tolerance {s['truncation_tolerance']:g}, {s['rounds']} solve(s))")
    lines.append(f"  solver: {s['solver']}, {s['solver_steps']} steps, relative residual "
                 f"{s['solver_residual']:.1e}, {s['solver_seconds']:.3g} s")
    return "\n".join(lines)


def _row_lines(rows):
    """The table of linear against master numbers, one line per quantity."""
    lines = [f"  {'quantity':<36}{'linear':>14}{'master':>14}{'difference':>12}"]
    for row in rows:
        diff = row["relative_difference"]
        lines.append(f"  {row['quantity']:<36}{row['linear']:>14.6g}{row['master']:>14.6g}"
                     + (f"{diff:>12.2e}" if diff is not None else f"{'':>12}"))
    return lines


def _factors_text(data):
    """:func:`comparison_text` of the several-tone comparison."""
    s = data["steady"]
    dims = " × ".join(f"{f['cutoff']} ({f['name']})" for f in s["factors"])
    lines = [f"master equation (linearised model, one factor per tone field in its own "
             f"frame; Fock cutoffs {dims} = {s['hilbert_dimension']} states)",
             *_row_lines(data["rows"])]
    tails = ", ".join(f"{f['name']} {f['tail_population']:.1e}" for f in s["factors"])
    lines.append(f"  truncation: population in the top Fock levels {tails}")
    return "\n".join(lines)


def gaussian_g2(photon_number, covariance):
    """g²(0) of the linear engine's intracavity state: a displaced Gaussian.

    With real mean ᾱ = √n̄ and fluctuation moments N = ⟨δa†δa⟩ =
    (V_XX + V_YY − 1)/2, M = ⟨δa δa⟩ = (V_XX − V_YY + 2i V_XY)/2 (Wick's
    theorem): ⟨a†²a²⟩ = ᾱ⁴ + 4ᾱ²N + 2ᾱ² Re M + 2N² + |M|² and
    g²(0) = ⟨a†²a²⟩/(ᾱ² + N)².
    """
    v = covariance
    n = (v[0, 0] + v[1, 1] - 1.0) / 2.0
    m = complex(v[0, 0] - v[1, 1], 2.0 * v[0, 1]) / 2.0
    a2 = float(photon_number)
    total = a2 + n
    if total <= 0:
        return float("nan")
    moment = a2**2 + 4 * a2 * n + 2 * a2 * m.real + 2 * n**2 + abs(m) ** 2
    return float(moment / total**2)


def _relative(linear, master):
    if not (math.isfinite(linear) and math.isfinite(master)) or linear == 0:
        return None
    return (master - linear) / abs(linear)
