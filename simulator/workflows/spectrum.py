"""The spectrum a user asks for: at the digitiser (default) or at the cavity port.

:func:`compute_spectrum` is what ``noisechain spectrum`` and ``noisechain run``
call: the spectrum with its noise budget, the sideband summary with each
line's place and contrast at the digitiser, and, for every mode, why the
occupation from the sideband ratio differs from the exact one
(:mod:`simulator.linear.occupation_gap`). :func:`report_data` and
:func:`report_text` turn the result into JSON-ready data and terminal text.
"""

import dataclasses
import math
import re
import textwrap

import numpy as np

from simulator.errors import InputError

PLACES = ("record", "cavity")
# A gap between the occupation from the sideband ratio and the exact one is noted when
# larger than this fraction of the occupation (with one tone it is always explained).
GAP_NOTED = 0.01


@dataclasses.dataclass(frozen=True, kw_only=True)
class SpectrumResult:
    """A spectrum, where it is taken, and the sideband summary beside it."""

    spectrum: object  # simulator.linear.spectrum.Spectrum
    at: str  # "record" (at the digitiser) or "cavity" (at the cavity port)
    engine: str
    summary: tuple  # SidebandSummary per mode, with record view and gap (linear engine)
    name: str = ""  # the scenario's name
    quadratures: object = None  # QuadratureBudget of a back-action-evading pair, else None
    tones: tuple = ()  # detection.tones when several are recorded: the first one's is shown


def compute_spectrum(system, *, at="record", engine="linear", master_model="full",
                     quadrature_angle=None):
    """The spectrum at ``at`` with its budget and the explained sideband summary.

    Parameters
    ----------
    system : simulator.model.system.System
    at : {"record", "cavity"}
        ``"record"``: what the digitiser sees (the detection chain and the
        sampling included, :func:`simulator.linear.record_budget.digitiser_spectrum`);
        ``"cavity"``: the field at the cavity port, before the chain.
    engine : {"linear", "master"}
        The master-equation engine gives the cavity-port spectrum only.
    master_model : str
        For ``engine="master"``.
    quadrature_angle : float, optional
        Homodyne angle (rad); default the scenario's.
    """
    if at not in PLACES:
        raise InputError(f"--at {at!r}; expected one of {', '.join(PLACES)}")
    if engine == "master":
        if at != "cavity":
            raise InputError("--engine master gives the spectrum at the cavity port only; "
                             "expected --at cavity with it")
        from simulator.master.spectra import master_heterodyne_spectrum

        spectrum = master_heterodyne_spectrum(system, kind=master_model)
        return SpectrumResult(spectrum=spectrum, at=at, engine=engine, summary=(),
                              name=system.scenario.scenario.name)
    from simulator.linear.occupation_gap import occupation_gaps
    from simulator.linear.record_budget import digitiser_spectrum
    from simulator.linear.sidebands import sideband_summary
    from simulator.linear.spectra import measured_spectrum

    system = system.require_stable()
    if at == "record":
        if quadrature_angle is not None:
            system = system.replace("detection.quadrature_angle_rad", float(quadrature_angle))
        spectrum = digitiser_spectrum(system)
    else:
        spectrum = measured_spectrum(system, quadrature_angle=quadrature_angle)
    if system.scenario.detection.backaction_evading:  # one quadrature, no sideband pair
        from simulator.linear.quadratures import quadrature_budget

        return SpectrumResult(spectrum=spectrum, at=at, engine=engine, summary=(),
                              name=system.scenario.scenario.name,
                              quadratures=quadrature_budget(system))
    summary = sideband_summary(system)
    if not system.several_tones:  # the gap's causes are split for one tone only
        gaps = occupation_gaps(system, summary)
        summary = tuple(dataclasses.replace(s, gap=g)
                        for s, g in zip(summary, gaps, strict=True))
    from simulator.scenario.tone_sections import detected_tone_names

    tones = detected_tone_names(system.scenario)
    return SpectrumResult(spectrum=spectrum, at=at, engine=engine, summary=summary,
                          name=system.scenario.scenario.name,
                          tones=tuple(tones) if len(tones) > 1 else ())


def reference_frequency(result):
    """Where the budget is quoted in the text: mode 0's anti-Stokes line, else the highest
    line of a master-equation spectrum (which has no sideband summary), else the middle."""
    spectrum = result.spectrum
    f = spectrum.frequency_hz
    for s in result.summary:
        side = s.anti_stokes
        where = side.record_frequency_hz if result.at == "record" else side.frequency_hz
        if not np.isfinite(where):  # a homodyne record: the line sits at |Ωm| in baseband
            where = side.frequency_hz
        if spectrum.sided == "one-sided":
            where = abs(where)
        if np.isfinite(where) and f.min() <= where <= f.max():
            return int(np.argmin(np.abs(f - where)))
    if result.engine == "master":  # no sideband summary: the highest line
        return int(np.argmax(spectrum.total))
    return f.size // 2


def report_data(result, files):
    """Plain data for ``--json``."""
    spectrum = result.spectrum
    k = reference_frequency(result)
    volts = spectrum.calibration.get("v2_per_hz_per_shot_noise_unit")
    out = {"scenario": result.name, "engine": result.engine,
           "at": result.at, "quantity": spectrum.quantity, "axis": spectrum.axis,
           "sided": spectrum.sided, "units": spectrum.units,
           "points": int(spectrum.frequency_hz.size),
           "frequency_range_hz": [float(spectrum.frequency_hz.min()),
                                  float(spectrum.frequency_hz.max())],
           "peak": float(spectrum.total.max()),
           "contributions": list(spectrum.contributions),
           "budget_residual": spectrum.budget_residual(),
           "budget_at": {"frequency_hz": float(spectrum.frequency_hz[k]),
                         "total": float(spectrum.total[k]),
                         "lines": {n: float(v[k]) for n, v in spectrum.contributions.items()}},
           "sidebands": [s.to_dict() for s in result.summary], "files": files}
    if result.quadratures is not None:
        out["backaction_evasion"] = result.quadratures.to_dict()
    if result.tones:
        out["tone"] = result.tones[0]
    if volts is not None:
        out["v2_per_hz_per_shot_noise_unit"] = volts
        out["sample_rate_hz"] = spectrum.calibration["sample_rate_hz"]
        out["receiver"] = spectrum.provenance.get("receiver")
    return out


def report_text(result, files):
    """Terminal text of the spectrum, its budget at one frequency and the sideband summary."""
    d = report_data(result, files)
    lines = [f"{d['scenario']}: {d['quantity']}, {d['sided']} density in {d['units']}, "
             f"{d['points']} points over {d['frequency_range_hz'][0]:.6g} .. "
             f"{d['frequency_range_hz'][1]:.6g} Hz",
             f"  peak {d['peak']:.6g}; budget of {len(d['contributions'])} terms sums to the "
             f"total within {d['budget_residual']:.1e}"]
    if result.tones:  # several recorded tones: one receiver's spectrum is shown
        lines.insert(1, f"  the receiver of {result.tones[0]}, the first of detection.tones = "
                        f"{list(result.tones)!r}; list another first for its spectrum "
                        "(`noisechain record` writes every tone's)")
    volts = d.get("v2_per_hz_per_shot_noise_unit")
    at = d["budget_at"]
    unit = f" = {at['total'] * volts:.4g} V²/Hz" if volts else ""
    lines.append(f"  budget at {at['frequency_hz']:.9g} Hz: total {at['total']:.6g}{unit}")
    for name, value in at["lines"].items():
        lines.append(f"    {value:+12.5g}  {name}")
    for s in result.summary:
        lines.append(
            f"  mode {s.mode}: anti-Stokes {s.anti_stokes.frequency_hz:.9g} Hz (width "
            f"{s.anti_stokes.linewidth_hz:.4g} Hz, {s.anti_stokes.area_quanta:.5g} quanta), "
            f"Stokes {s.stokes.frequency_hz:.9g} Hz ({s.stokes.area_quanta:.5g} quanta); "
            f"ratio {s.ratio:.5g} -> n = {s.occupation_from_ratio:.5g} (steady state "
            f"{s.steady_state_occupation:.5g})")
        if s.gap is not None:
            lines.append(f"    {s.gap.text()}")
        elif result.engine == "linear":  # several tones: the causes are split for one only
            d = s.occupation_from_ratio - s.steady_state_occupation
            if math.isfinite(d) and abs(d) > GAP_NOTED * s.steady_state_occupation:
                lines.append(f"    n from the ratio is {abs(d):.4g} "
                             f"{'below' if d < 0 else 'above'} the steady state; with several "
                             "tones its causes are not split (they are for one tone: the "
                             "file without its [[tones]])")
        if result.at == "record" and math.isfinite(s.anti_stokes.record_peak_to_background):
            lines.append(f"    at the digitiser: anti-Stokes line at "
                         f"{s.anti_stokes.record_frequency_hz:.9g} Hz, peak "
                         f"{s.anti_stokes.record_peak_to_background:.3g} × the rest of the "
                         f"record there; Stokes peak {s.stokes.record_peak_to_background:.3g}"
                         " ×")
        if s.warning:
            lines.append(f"    warning: {s.warning}")
        fano = (s.anti_stokes.dispersive_quanta, s.stokes.dispersive_quanta)
        if max(abs(fano[0]), abs(fano[1])) > 0.01 * abs(s.stokes.area_quanta):
            lines.append(f"    Fano-shaped: dispersive weights {fano[0]:.4g} (anti-Stokes), "
                         f"{fano[1]:.4g} (Stokes) quanta: correlated noise interferes with "
                         "the motion")
    if result.quadratures is not None:
        lines += [f"  {line}" for line in result.quadratures.text()]
    lines += [f"  {kind} written to {path}" for kind, path in files.items()]
    return "\n".join(lines)


TITLE_WIDTH = 90  # characters per line of the figure title (it shares the row with the legend)


def figure_title(result, name):
    """Title of the spectrum figure: what and where, and mode 0's occupation gap."""
    # a number keeps its unit on its line ("90 deg", "6e+07 samples/s")
    what = re.sub(r"(\d) (?=(?:deg|rad|[kMG]?Hz|samples/s)\b)", "\\1\u00a0",
                  f"{name}: {result.spectrum.quantity}")
    title = "\n".join(textwrap.wrap(what, TITLE_WIDTH))
    if result.summary and result.summary[0].gap is not None:
        gap = result.summary[0].gap
        terms = ", ".join(f"{cause} {value:+.3g}" for cause, value in gap.terms.items())
        title += "\n" + "\n".join(textwrap.wrap(
            f"mode {gap.mode}: n from the ratio − steady state = {gap.difference:+.4g} "
            f"({terms}; remainder {gap.remainder:+.2g})", TITLE_WIDTH))
    return title
