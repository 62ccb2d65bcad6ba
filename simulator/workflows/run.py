"""The end-to-end run: everything a scenario asks for, and a report.

``noisechain run SCENARIO --out DIR`` inspects the scenario, computes the
spectrum of its detection scheme with the noise budget and sideband summary
(when the operating point is stable), writes a record when the scenario has a
``[record]`` section, runs the ``[sweep]`` when there is one, draws the
figures and writes ``report.html``: one self-contained page with the
parameters, derived quantities, regime warnings, sideband summary, figures and
the list of files written.
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


def run_scenario(scenario, out, *, workers=None, dask=None, progress=True):
    """Run everything ``scenario`` asks for into folder ``out``; see the module notes.

    The folder belongs to the run: a rerun of the same scenario replaces the
    files it wrote (the same numbers and the same record bits, a fresh
    report) and resumes its sweep; a folder of another scenario, or one
    holding other files, is refused, and so is a second run into the same
    folder while the first is still going.
    """
    from simulator.workflows import tasks

    out = Path(out)
    text = scenario.to_toml()
    with tasks.claim_folder(out, "run.json", {"format": "noisechain-run", "format_version": 1,
                                              "sha256": tasks.digest(text)}, "run"):
        return _run(scenario, out, workers, dask, progress)


def _run(scenario, out, workers, dask, progress):
    from simulator.model.system import System
    from simulator.workflows.inspection import inspect_scenario

    files, sections, figures = [], [], []

    def wrote(path):
        files.append(Path(path))
        return Path(path)

    atomic_write_text(wrote(out / "scenario.toml"), scenario.to_toml())
    system = System(scenario)  # built once: every part below takes it
    inspection = inspect_scenario(system)
    data = jsontext.plain(inspection.to_dict())  # non-finite numbers as None (null)
    atomic_write_text(wrote(out / "inspect.json"), jsontext.dumps(data, indent=2))
    atomic_write_text(wrote(out / "inspect.txt"), inspection.to_text() + "\n")
    sections.append(("Scenario", html.preformatted(scenario.to_toml())))
    sections.append(("Derived quantities", _derived_table(data)))
    regime = data.get("regime")
    notes = list(data["warnings"])
    if regime is not None and regime.get("level") != "linear":
        notes.insert(0, f"regime verdict: {regime['level']} — {regime['reason']}")
    sections.append(("Regime warnings", html.warnings_block(notes)))
    if data.get("feasibility"):
        rows = [[f["mode"], f["occupation_error_1s"],
                 "—" if f["asymmetry_time_s"] is None else f["asymmetry_time_s"]]
                for f in data["feasibility"]]
        sections.append(("Feasibility (Cramér–Rao, Whittle)", html.table(
            rows, header=["mode", "occupation error after 1 s",
                          f"time to resolve the asymmetry at "
                          f"{data['feasibility'][0]['significance']:g}σ (s)"])))

    if inspection.stability.stable:
        sections.append(("Sideband summary", _spectrum_part(system, out, wrote, figures)))
    else:
        sections.append(("Spectrum", "<p>No spectrum: the operating point is unstable ("
                         + html.escape(inspection.stability.cause) + ").</p>"))

    record_part = _record_part(system, out, wrote, figures, progress)
    if record_part:
        sections.append(("Record", record_part))

    if scenario.sweep is not None:
        sections.append(("Sweep", _sweep_part(scenario, out, wrote, figures, workers, dask,
                                              progress) + _sweep_optima_part(out, data)))
    if scenario.plan is not None:
        from simulator.workflows.plan import plan_part

        sections.append(("Best operating point", plan_part(scenario, out, wrote, figures)))

    sections.append(("Figures", "\n".join(html.png_tag(p, p.name) for p in figures)
                     or "<p>No figures.</p>"))
    report_path = out / "report.html"
    listing = [[str(p.relative_to(out))] for p in files + [report_path]]
    sections.append(("Files written", html.table(listing, header=["file"])))
    from simulator import __version__

    html.write_report(report_path, f"noisechain run: {scenario.scenario.name}", sections,
                      meta=f"{scenario.scenario.description} · source {scenario.source} · "
                           f"noisechain {__version__}")
    files.append(report_path)
    return RunResult(out=out, files=tuple(files), report=report_path,
                     stable=inspection.stability.stable)


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
    from simulator.linear.referral import to_displacement
    from simulator.linear.sidebands import sideband_summary
    from simulator.linear.spectra import measured_spectrum
    from simulator.report.plots import plot_spectrum

    spectrum = measured_spectrum(system)
    summary = sideband_summary(system)
    spectrum.save(wrote(out / "spectrum.nc"), overwrite=True)
    png = wrote(out / "spectrum.png")
    plot_spectrum(spectrum, png, displacement=to_displacement(spectrum, system),
                  summary=summary,
                  title=f"{system.scenario.scenario.name}: {spectrum.quantity}",
                  overwrite=True)
    figures.append(png)
    rows = [[s.mode, s.anti_stokes.frequency_hz, s.anti_stokes.area_quanta,
             s.stokes.frequency_hz, s.stokes.area_quanta, s.ratio, s.occupation_from_ratio,
             s.steady_state_occupation] for s in summary]
    return (f"<p>{html.escape(spectrum.quantity)}: {spectrum.sided} density in "
            f"{html.escape(spectrum.units)}; axis: {html.escape(spectrum.axis)}.</p>"
            + html.table(rows, header=["mode", "anti-Stokes (Hz)", "area (quanta)",
                                       "Stokes (Hz)", "area (quanta)", "ratio",
                                       "n from ratio", "n exact"])
            + "".join(f"<p>Warning, mode {html.escape(s.mode)}: {html.escape(s.warning)}.</p>"
                      for s in summary if s.warning))


def _record_part(system, out, wrote, figures, progress):
    """Write the record the scenario asks for, and its spectrum beside the analytic one."""
    if not system.scenario.record.in_run:
        return ""
    import warnings

    from simulator.workflows.record import simulate_record

    path = wrote(out / "record.h5")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        record = simulate_record(system, out=path, progress=progress, overwrite=True)
    png = wrote(out / "record_spectrum.png")
    _plot_record_spectrum(system, record, png)
    figures.append(png)
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


def _plot_record_spectrum(system, record, path):
    """Periodogram of the record over the exact density of its samples."""
    import numpy as np

    from simulator.analysis.psd import averaged_periodogram
    from simulator.report.plots import save_figure, subplots

    fs = record.sample_rate_hz
    # bins of a quarter of the narrowest line, but at least 16 averages
    width = min(record.truth.effective_linewidth_hz, default=fs / 1e4)
    segment = int(2 ** np.ceil(np.log2(fs / max(width / 4, 1e-9))))
    segment = int(min(segment, 2 ** np.floor(np.log2(max(record.n_samples // 16, 16)))))
    psd = averaged_periodogram(record.shot_noise_units(), fs, segment_samples=segment,
                               window="boxcar")
    step = max(1, psd.frequency_hz.size // 1024)  # the exact curve is smooth: 1024 points
    f_exact = psd.frequency_hz[::step]
    exact = system.chain.sampled_spectrum(f_exact, fs, aliases=40)
    if psd.sided == "one-sided":
        exact = 2 * exact
    fig, ax = subplots(figsize=(9, 4.5))
    scale, unit = (1e6, "MHz") if fs > 2e6 else (1e3, "kHz")
    ax.semilogy(psd.frequency_hz / scale, psd.density, lw=0.6, color="tab:blue",
                label=f"record periodogram ({psd.averages} averages)")
    ax.semilogy(f_exact / scale, exact, lw=1.5, color="k",
                label="exact density of the samples (model)")
    axis = ("offset from the drive (> 0: anti-Stokes)" if record.kind == "iq"
            else "frequency")
    ax.set_xlabel(f"{axis} ({unit})")
    floor = "1" if psd.sided == "two-sided" else "2 (one-sided)"
    ax.set_ylabel(f"{psd.sided} density, record units²/Hz\n(vacuum floor {floor})")
    ax.set_title(f"{system.scenario.scenario.name}: synthetic record against the model")
    ax.legend(fontsize=8)
    ax.grid(alpha=0.3)
    fig.tight_layout()
    save_figure(fig, path, overwrite=True)  # the run's or sweep's own folder


def _sweep_part(scenario, out, wrote, figures, workers, dask, progress):
    from simulator.report.sweep_plots import plot_occupation, plot_stability
    from simulator.workflows.sweep import run_sweep

    folder = out / "sweep"
    dataset = run_sweep(scenario, folder, workers=workers, dask=dask, progress=progress)
    wrote(folder / "sweep.nc")
    for name, plot in (("occupation.png", plot_occupation), ("stability.png", plot_stability)):
        figures.append(wrote(plot(dataset, folder / name)))
    failed = int((dataset["error"] != "").sum())
    unstable = int((dataset["stable"] == 0).sum())
    dims = ", ".join(f"{d} ({n})" for d, n in dataset["stable"].sizes.items())
    return (f"<p>{dataset['stable'].size} points over {html.escape(dims)}; "
            f"{unstable} unstable, {failed} failed. Dataset: sweep/sweep.nc.</p>")


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
