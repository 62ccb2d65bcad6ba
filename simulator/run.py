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
import json
from pathlib import Path

from simulator import report as html
from simulator.files import atomic_write_text


@dataclasses.dataclass(frozen=True)
class RunResult:
    """What a run wrote; ``report`` is the HTML page."""

    out: Path
    files: tuple
    report: Path
    stable: bool


def run_scenario(scenario, out, *, workers=None, dask=None, progress=True):
    """Run everything ``scenario`` asks for into folder ``out``; see the module notes."""
    from simulator.cli import _clean
    from simulator.inspection import inspect_scenario

    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    files, sections, figures = [], [], []

    def wrote(path):
        files.append(Path(path))
        return Path(path)

    wrote(out / "scenario.toml")
    atomic_write_text(out / "scenario.toml", scenario.to_toml())
    inspection = inspect_scenario(scenario)
    data = _clean(inspection.to_dict())
    atomic_write_text(wrote(out / "inspect.json"), json.dumps(data, indent=2))
    atomic_write_text(wrote(out / "inspect.txt"), inspection.to_text() + "\n")
    sections.append(("Scenario", html.preformatted(scenario.to_toml())))
    sections.append(("Derived quantities", _derived_table(data)))
    sections.append(("Regime warnings", html.warnings_block(data["warnings"])))

    if inspection.stability.stable:
        sections.append(("Sideband summary", _spectrum_part(scenario, out, wrote, figures)))
    else:
        sections.append(("Spectrum", "<p>No spectrum: the operating point is unstable ("
                         + html.escape(inspection.stability.cause) + ").</p>"))

    record_part = _record_part(scenario, out, wrote, progress)
    if record_part:
        sections.append(("Record", record_part))

    if scenario.sweep is not None:
        sections.append(("Sweep", _sweep_part(scenario, out, wrote, figures, workers, dask,
                                              progress)))

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


def _spectrum_part(scenario, out, wrote, figures):
    from simulator.plots import plot_spectrum
    from simulator.sidebands import sideband_summary
    from simulator.spectra import measured_spectrum
    from simulator.transduction import to_displacement

    spectrum = measured_spectrum(scenario)
    summary = sideband_summary(scenario)
    spectrum.save(wrote(out / "spectrum.nc"))
    png = wrote(out / "spectrum.png")
    plot_spectrum(spectrum, png, displacement=to_displacement(spectrum, scenario),
                  summary=summary, title=f"{scenario.scenario.name}: {spectrum.quantity}")
    figures.append(png)
    rows = [[s.mode, s.anti_stokes.frequency_hz, s.anti_stokes.area_quanta,
             s.stokes.frequency_hz, s.stokes.area_quanta, s.ratio, s.occupation_from_ratio,
             s.steady_state_occupation] for s in summary]
    return (f"<p>{html.escape(spectrum.quantity)}: {spectrum.sided} density in "
            f"{html.escape(spectrum.units)}; axis: {html.escape(spectrum.axis)}.</p>"
            + html.table(rows, header=["mode", "anti-Stokes (Hz)", "area (quanta)",
                                       "Stokes (Hz)", "area (quanta)", "ratio",
                                       "n from ratio", "n exact"]))


def _record_part(scenario, out, wrote, progress):
    """Write the record the scenario asks for (if the records stage is available)."""
    if not getattr(scenario.record, "in_run", False):
        return ""
    from simulator.records import write_record_for_run

    return write_record_for_run(scenario, out, wrote, progress)


def _sweep_part(scenario, out, wrote, figures, workers, dask, progress):
    from simulator.sweep import run_sweep
    from simulator.sweep_plots import plot_occupation, plot_stability

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
