"""The end-to-end run: everything a scenario asks for, and a report.

``noisechain run SCENARIO --out DIR`` inspects the scenario, computes the
spectrum of its detection scheme with the noise budget and sideband summary
(when the operating point is stable), writes a record when the scenario has a
``[record]`` section, runs the ``[sweep]`` when there is one, draws the
figures and writes ``report.html``: one self-contained page that leads with
the answer (verdict, occupations, feasibility, best operating points), then
the figures, the tables behind them, the files written and, folded at the
end, the scenario as run.
"""

import dataclasses
from pathlib import Path

from simulator.io import jsontext
from simulator.io.files import atomic_write_text
from simulator.report import html


@dataclasses.dataclass(frozen=True)
class RunResult:
    """What a run wrote; ``report`` is the HTML page."""

    out: Path
    files: tuple
    report: Path
    stable: bool


def run_scenario(scenario, out, *, workers=None, dask=None, progress=True, best_points=()):
    """Run everything ``scenario`` asks for into folder ``out``; see the module notes.

    The folder belongs to the run: a rerun of the same scenario replaces the
    files it wrote (the same numbers and the same record bits, a fresh
    report) and resumes its sweep; a folder of another scenario, or one
    holding other files, is refused, and so is a second run into the same
    folder while the first is still going.

    ``best_points`` are (criterion, where, value) rows of best operating
    points found elsewhere (a planner); the report leads with them beside
    those of the scenario's own sweep (:func:`simulator.report.summary.at_a_glance`).
    """
    from simulator.workflows import tasks

    out = Path(out)
    text = scenario.to_toml()
    with tasks.claim_folder(out, "run.json", {"format": "noisechain-run", "format_version": 1,
                                              "sha256": tasks.digest(text)}, "run"):
        return _run(scenario, out, workers, dask, progress, list(best_points))


def _run(scenario, out, workers, dask, progress, best):
    from simulator.model.system import System
    from simulator.report.summary import at_a_glance
    from simulator.workflows.inspection import inspect_scenario

    files, details, figures = [], [], []

    def wrote(path):
        files.append(Path(path))
        return Path(path)

    atomic_write_text(wrote(out / "scenario.toml"), scenario.to_toml())
    system = System(scenario)  # built once: every part below takes it
    inspection = inspect_scenario(system)
    data = jsontext.plain(inspection.to_dict())  # non-finite numbers as None (null)
    atomic_write_text(wrote(out / "inspect.json"), jsontext.dumps(data, indent=2))
    atomic_write_text(wrote(out / "inspect.txt"), inspection.to_text() + "\n")
    summary = ()
    if inspection.stability.stable:
        part, summary = _spectrum_part(system, out, wrote, figures)
        details.append(("Quadrature budget" if scenario.detection.backaction_evading
                        else "Sideband summary", part))
    else:
        details.append(("Spectrum", "<p>No spectrum: the operating point is unstable ("
                        + html.escape(inspection.stability.cause) + ").</p>"))
    details.append(("Derived quantities", _derived_table(data)))
    if data.get("feasibility"):
        rows = [[f["mode"], f["occupation_error_1s"],
                 "—" if f["asymmetry_time_s"] is None else f["asymmetry_time_s"]]
                for f in data["feasibility"]]
        details.append(("Feasibility (Cramér–Rao, Whittle)", html.table(
            rows, header=["mode", "occupation error after 1 s",
                          f"time to resolve the asymmetry at "
                          f"{data['feasibility'][0]['significance']:g}σ (s)"])))

    if data.get("tone_sets"):
        rows = [[b["mode"], " and ".join(b["tones"]), b["error_one_second"], b["duration_s"]]
                for b in data["tone_sets"]]
        details.append(("Feasibility of the tones recorded together (joint Whittle)",
                        html.table(rows, header=[
                            "mode", "recorded tones", "occupation error after 1 s",
                            f"time T for n/(n+1) ≠ 1 at "
                            f"{data['tone_sets'][0]['significance']:g}σ (s)"])))

    record_part = _record_part(system, out, wrote, figures, progress)
    if record_part:
        details.append(("Record", record_part))

    if scenario.sweep is not None:
        part, sweep_best = _sweep_part(scenario, out, wrote, figures, workers, dask, progress)
        details.append(("Sweep", part + _sweep_optima_part(out, data)))
        best += sweep_best
    if scenario.plan is not None:
        from simulator.workflows.plan import plan_part

        details.insert(0, ("Best operating point (plan)",
                           plan_part(scenario, out, wrote, figures)))
        if out / "plan.json" in files:  # written by this run: its optimum leads the answer
            best += _plan_best(jsontext.loads((out / "plan.json").read_text()))

    report_path = out / "report.html"
    listing = [[str(p.relative_to(out))] for p in files + [report_path]]
    sections = [("Answer", at_a_glance(data, summary, best)),
                ("Figures", "\n".join(html.figure(p, caption) for p, caption in figures)
                 or "<p>No figures.</p>"),
                *details,
                ("Files written", html.table(listing, header=["file"])),
                ("Scenario", html.folded(f"scenario file ({scenario.source}), as run",
                                         html.preformatted(scenario.to_toml())))]
    from simulator import __version__

    html.write_report(report_path, f"noisechain run: {scenario.scenario.name}", sections,
                      meta=f"{scenario.scenario.description} · source {scenario.source} · "
                           f"noisechain {__version__}")
    files.append(report_path)
    return RunResult(out=out, files=tuple(files), report=report_path,
                     stable=inspection.stability.stable)


def _plan_best(data):
    """The plan's optimum as a (criterion, where, value) row of the answer; none if infeasible."""
    from simulator.scenario.labels import axis_label

    if not data.get("feasible"):
        return []
    where = []
    for p in data["optimum"]["parameters"]:
        where.append(f"{axis_label(p['path'], p['unit'])} = {p['number']:.4g}")
        if p["unit"]:  # a scaled parameter also in its own unit, as the sweep's rows
            where.append(f"{axis_label(p['path'])} = {p['value']:.4g}")
    unit = f" {data['units']}" if data["units"] else ""
    return [(f"plan: {data['objective_description']}", "; ".join(where),
             f"{data['optimum']['objective']:.4g}{unit}")]


def _derived_table(data):
    rows = [["intracavity photon number", data["photon_number"]],
            ["detuning, bare (Hz)", data["detuning_bare_hz"]],
            ["detuning, effective (Hz)", data["detuning_effective_hz"]],
            ["stable", "yes" if data["stable"] else "no: " + data["instability_cause"]],
            ["cavity occupation", data["cavity_occupation"]
             if data["cavity_occupation"] is not None else "—"]]
    table = html.table(rows, header=["quantity", "value"])
    keys = [("g (Hz)", "g_hz"), ("bath occupation", "bath_occupation"),
            ("cooperativity", "cooperativity"), ("quantum cooperativity",
                                                 "quantum_cooperativity"),
            ("Ωm/κ", "sideband_resolution"), ("optical damping (Hz)", "optical_damping_hz"),
            ("optical spring (Hz)", "optical_spring_hz"),
            ("effective frequency (Hz)", "effective_frequency_hz"),
            ("effective linewidth (Hz)", "effective_linewidth_hz"),
            ("occupation (exact)", "occupation"),
            ("occupation (weak coupling)", "weak_coupling_occupation")]
    modes = data["modes"]
    rows = [[label] + [m.get(key, "—") if m.get(key) is not None else "—" for m in modes]
            for label, key in keys]
    return table + html.table(rows, header=["per mode"] + [m["name"] for m in modes])


def _spectrum_part(system, out, wrote, figures):
    from simulator.report.plots import plot_spectrum, titled
    from simulator.workflows.spectrum import compute_spectrum, figure_title

    result = compute_spectrum(system)  # at the digitiser, with the explained summary
    spectrum, summary = result.spectrum, result.summary
    spectrum.save(wrote(out / "spectrum.nc"), overwrite=True)
    png = wrote(out / "spectrum.png")
    plot_spectrum(spectrum, png, summary=summary, zooms=_quadrature_zoom(system, result),
                  title=figure_title(result, titled(system.scenario)), overwrite=True)
    zoomed = "each sideband" if result.quadratures is None else "the measured quadrature X1's line"
    figures.append((png, "Spectrum of the record at the digitiser and its noise budget: the "
                         f"whole band and {zoomed} zoomed."))
    if result.quadratures is not None:  # one quadrature measured, no sideband pair
        from simulator.report.quadrature_plots import plot_quadratures
        from simulator.report.summary import quadrature_table

        budget = result.quadratures.to_dict()
        png = wrote(out / "quadratures.png")
        plot_quadratures(budget, png, overwrite=True, title=f"{titled(system.scenario)}: "
                         f"quadratures of mode {budget['mode']}")
        figures.append((png, "Back-action-evading pair: the variance of the measured "
                             "quadrature X1 and of its conjugate X2 by noise source, and the "
                             "imprecision referred to X1 beside one tone's least."))

        return (f"<p>{html.escape(spectrum.quantity)}: {spectrum.sided} density in "
                f"{html.escape(spectrum.units)}; axis: {html.escape(spectrum.axis)}.</p>"
                + quadrature_table(budget)), summary
    rows = [[s.mode, s.anti_stokes.frequency_hz, s.anti_stokes.area_quanta,
             s.stokes.frequency_hz, s.stokes.area_quanta, s.ratio, s.occupation_from_ratio,
             s.steady_state_occupation] for s in summary]
    return (f"<p>{html.escape(spectrum.quantity)}: {spectrum.sided} density in "
            f"{html.escape(spectrum.units)}; axis: {html.escape(spectrum.axis)}.</p>"
            + html.table(rows, header=["mode", "anti-Stokes (Hz)", "area (quanta)",
                                       "Stokes (Hz)", "area (quanta)", "ratio",
                                       "n from ratio", "n exact"])
            + "".join(f"<p>Mode {html.escape(s.mode)}: {html.escape(s.gap.text())}.</p>"
                      for s in summary if s.gap is not None)
            + "".join(f"<p>Warning, mode {html.escape(s.mode)}: {html.escape(s.warning)}.</p>"
                      for s in summary if s.warning)), summary


def _quadrature_zoom(system, result):
    """A back-action-evading pair's zoom on X1's line at zero offset (None otherwise)."""
    if result.quadratures is None:
        return None
    from simulator.linear.steady_state import steady_state

    q = result.quadratures
    width = steady_state(system).modes[0].effective_linewidth_hz
    return [(f"{q.mode} X1 (measured quadrature)\nvariance {q.x1_variance:.4g}, "
             f"counter-rotating residual {q.x1_counter_rotating:.3g}", 0.0, width)]


def _record_part(system, out, wrote, figures, progress):
    """Write the record the scenario asks for, and its spectrum beside the analytic one."""
    if not system.scenario.record.in_run:
        return ""
    import warnings

    from simulator.report.record_plots import plot_record_sidebands
    from simulator.workflows.record import simulate_record

    path = wrote(out / "record.h5")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        record = simulate_record(system, out=path, progress=progress, overwrite=True)
    # the protocol figure and its expected power hold one channel (not several tones)
    if system.scenario.schedule is not None and record.kind == "iq" and not record.tones:
        _protocol_figure(system.scenario, path, wrote(out / "record_protocol.png"),
                         figures)
    elif system.scenario.schedule is None:  # a stationary record against its spectrum
        png = wrote(out / "record_spectrum.png")
        plot_record_sidebands(system, record, png)
        where = ("one row per detected tone, that channel's Stokes and anti-Stokes "
                 "sidebands zoomed about its own tone" if record.tones else
                 "the whole band and each motional sideband zoomed")
        figures.append((png, "Synthetic record against the model: its averaged periodogram "
                             f"over the expected one with the 95 % χ² band, {where}. "
                             "A line 'resolved bin by "
                             "bin' stands out of the band in single bins; resolving the "
                             "sideband asymmetry (the feasibility numbers above) is a "
                             "different, stricter test."))
    truth = record.truth
    rows = [[name, n, f, w] for name, n, f, w in zip(
        truth.mode_names, truth.occupation, truth.effective_frequency_hz,
        truth.effective_linewidth_hz, strict=True)]
    notes = "".join(f'<p class="warn">{html.escape(w.message)}</p>' for w in caught)
    return (f"<p>{record.n_samples} samples ({record.kind}) at {record.sample_rate_hz:.6g} "
            f"samples/s, seed {record.seed}, {record.clipped_samples} clipped; file "
            "record.h5 with the ground truth below.</p>" + notes
            + html.table(rows, header=["mode", "true occupation", "frequency (Hz)",
                                       "linewidth (Hz)"]))


def _protocol_figure(scenario, path, png, figures):
    """The figure of a scheduled record in time (docs/records.md, "Schedules")."""
    from simulator.io.recordfile import load_record
    from simulator.io.timelinefile import read_timeline
    from simulator.report.protocol_plots import plot_protocol

    plot_protocol(load_record(path), read_timeline(path), png, overwrite=True,
                  scenario=scenario)
    figures.append((png, "Scheduled record: the true thermal occupation and coherent phonon "
                         "number of the first mode in time, above the record's anti-Stokes "
                         "sideband power and its exact expectation; the segments shaded "
                         "and named."))


def _sweep_part(scenario, out, wrote, figures, workers, dask, progress):
    from simulator.report.summary import best_sweep_points
    from simulator.report.sweep_plots import SWEEP_FIGURES
    from simulator.workflows.sweep import run_sweep
    from simulator.workflows.sweep_optimum import caveats, sweep_optima

    folder = out / "sweep"
    dataset = run_sweep(scenario, folder, workers=workers, dask=dask, progress=progress)
    wrote(folder / "sweep.nc")
    for name, plot, caption in SWEEP_FIGURES:
        figures.append((wrote(plot(dataset, folder / name)), caption))
    failed = int((dataset["error"] != "").sum())
    unstable = int((dataset["stable"] == 0).sum())
    dims = ", ".join(f"{d} ({n})" for d, n in dataset["stable"].sizes.items())
    return (f"<p>{dataset['stable'].size} points over {html.escape(dims)}; "
            f"{unstable} unstable, {failed} failed. Dataset: sweep/sweep.nc.</p>",
            best_sweep_points(dataset, [dict(e, notes=caveats(e)) for e in sweep_optima(dataset)]))


def _sweep_optima_part(out, data):
    """The sweep's best points beside the scenario's own (its inspection's numbers)."""
    import xarray as xr

    from simulator.workflows.sweep_optimum import caveats, compare_own

    with xr.open_dataset(out / "sweep" / "sweep.nc") as dataset:
        optima = jsontext.loads(dataset.attrs.get("optima", "[]"))
    rows = [[words, mode, "—" if mine is None else mine, best,
             "—" if ratio is None else ratio, "; ".join(caveats(e)) or "—"]
            for (words, mode, mine, best, ratio), e in zip(
                compare_own(optima, data["modes"], data.get("feasibility", [])), optima,
                strict=True)]
    if not rows:
        return ""
    return html.table(rows, header=["figure of merit", "mode", "scenario's own point",
                                    "best on the sweep", "own / best", "where the best is"])
