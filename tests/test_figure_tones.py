"""Figures of several tones and plan maps read without ambiguity.

The budget of a scenario with several drive tones names every tone's copy of a
source the same way (the drive's too), in the figure and in the text; the
copies of one source keep its colour family and differ in lightness, so they
stay apart in greyscale. The plan map's log axes carry tick labels that never
run into each other, checked on the rendered label boxes.
"""

import colorsys
from pathlib import Path

import numpy as np
import pytest
from matplotlib.colors import to_rgb

from simulator.model.system import System
from simulator.report import colours, ticks
from simulator.report.plan_plots import plan_figure
from simulator.report.plots import FIGURE_DPI
from simulator.scenario.loader import load_scenario, scenario_from_dict
from simulator.workflows.spectrum import compute_spectrum, report_text

TWO_PROBES = Path(__file__).resolve().parents[1] / "scenarios" / "drum_two_probes.toml"
FLOOR = {"floor_rad2_per_hz": 2e-11, "floor_low_hz": 1e5, "floor_high_hz": 1e8}
# sources that belong to no tone: the vacuum floor, the modes' baths, the chain
UNOWNED = ("shot noise", "thermal bath", "detection efficiency", "sampling")
# least difference in greyscale lightness between two tones' copies of a source
MIN_GREY_STEP = 0.1


def luminance(colour):
    """Relative luminance of an sRGB colour (ITU-R BT.709 weights on the channels;
    gamma left out, which keeps the order of lightness: common practice)."""
    r, g, b = to_rgb(colour)
    return 0.2126 * r + 0.7152 * g + 0.0722 * b


@pytest.fixture(scope="module")
def noisy_probes():
    """The two-probe drum with phase and intensity noise on the drive's laser and a
    red probe with a laser of its own: every tone owns classical noise."""
    data = load_scenario(TWO_PROBES).to_dict()
    data["drive"]["phase_noise"] = dict(FLOOR)
    data["drive"]["intensity_noise"] = {"relative_intensity_noise_per_hz": 1e-13}
    data["tones"][0]["phase_noise"] = {**FLOOR, "floor_rad2_per_hz": 3e-11}
    return scenario_from_dict(data, source="<test>")


@pytest.mark.filterwarnings("ignore::simulator.model.tone_validity.ToneNoiseWarning")
def test_every_tone_names_its_sources_alike_in_budget_and_text(noisy_probes):
    result = compute_spectrum(System(noisy_probes))
    spectrum = result.spectrum
    sources = {colours.split_term(n)[0] for n in spectrum.contributions}
    owned = {s for s in sources if not any(word in s for word in UNOWNED)}
    assert owned and all(colours.split_tone(s)[1] is not None for s in owned), owned
    tones = {colours.split_tone(s)[1] for s in owned}
    assert tones == {"drive", "red_probe", "blue_probe"}
    # the drive's laser and ports read as the probes' do
    for kind in ("phase-noise floor", "external port vacuum", "internal loss bath"):
        assert f"{kind} of tone drive" in sources
        assert f"{kind} of tone red_probe" in sources
    assert not any(s.startswith("laser ") for s in sources)
    text = report_text(result, files={})
    assert "phase-noise floor of tone drive:" in text and "laser phase-noise" not in text
    # names only: the budget still sums to the total
    assert spectrum.budget_residual() < 1e-12


@pytest.mark.filterwarnings("ignore::simulator.model.tone_validity.ToneNoiseWarning")
def test_each_tones_copy_of_a_source_is_a_shade_of_its_colour(noisy_probes):
    names = list(compute_spectrum(System(noisy_probes), at="cavity").spectrum.contributions)
    styles = {n: colours.term_style(n, names=names) for n in names}
    by_source = {}
    for n in names:
        source, tone = colours.split_tone(colours.split_term(n)[0])
        if tone is not None:
            by_source.setdefault(source, {})[tone] = styles[n]["color"]
    several = {s: c for s, c in by_source.items() if len(c) > 1}
    assert "external port vacuum" in several and "phase-noise floor" in several
    for source, per_tone in several.items():
        family = colours.source_colour(source)
        hue = colorsys.rgb_to_hsv(*to_rgb(family))[0]
        grey = sorted(luminance(c) for c in per_tone.values())
        assert np.min(np.diff(grey)) >= MIN_GREY_STEP, (source, per_tone)
        for colour in per_tone.values():
            h = colorsys.rgb_to_hsv(*to_rgb(colour))[0]
            assert min(abs(h - hue), 1 - abs(h - hue)) < 0.02, (source, colour)
    # any source's first three copies, dark colours and light ones alike
    for family in [c for _, c in colours._NAMED] + list(colours._THERMAL):
        grey = sorted(luminance(colours.shade(family, k)) for k in range(3))
        assert np.min(np.diff(grey)) >= MIN_GREY_STEP, family
    # the first tone in the budget (the drive) keeps the source's own colour
    assert to_rgb(by_source["external port vacuum"]["drive"]) == \
        to_rgb(colours.source_colour("external port vacuum"))


def _plan(x_range, y_range=None, points=(9, 7)):
    """Plain data of a plan map (made-up objective, figures only) over log axes."""
    ranges = [x_range] + ([y_range] if y_range else [])
    paths = ("drive.power_w", "cavity.linewidth_hz")
    axes = [{"path": p, "numbers": list(np.geomspace(*r, n)), "log": True, "unit": ""}
            for p, r, n in zip(paths, ranges, points, strict=False)]
    grids = np.meshgrid(*[np.asarray(a["numbers"]) for a in axes], indexing="ij")
    objective = 1.0 + np.prod([g / g.flat[0] for g in grids], axis=0) ** 0.5

    def point(k):
        return {"objective": float(objective.flat[0]), "parameters": [
            {"path": a["path"], "number": a["numbers"][k], "unit": ""} for a in axes]}

    return {"scenario": "plan map test", "objective": "occupation",
            "objective_description": "occupation", "units": "quanta",
            "map": {"axes": axes, "objective": list(objective.ravel()), "violations": {}},
            "optimum": point(1), "own_point": point(2)}


@pytest.mark.parametrize("x_range, y_range", [
    ((1e-9, 1.3e-9), (1e5, 1.2e5)),   # a fraction of a decade: minor ticks would collide
    ((1e-11, 3e-11), (2e5, 5e5)),
    ((1e-14, 1e-2), (1e2, 1e9)),      # many decades
    ((1e-9, 1.3e-9), None),           # a line along one parameter
])
def test_plan_map_tick_labels_never_collide(x_range, y_range):
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    fig = plan_figure(_plan(x_range, y_range))
    fig.set_dpi(FIGURE_DPI)
    renderer = FigureCanvasAgg(fig).get_renderer()
    checked = 0
    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            if axis.get_scale() == "log":
                shown = [t.get_text() for t in axis.get_ticklabels() if t.get_text()]
                assert len(shown) >= 2, shown  # still a scale to read
                assert ticks.collisions(axis, renderer) == []
                checked += 1
    assert checked >= (2 if y_range is None else 3)  # the colour bar is log too


def test_tick_labels_say_each_tick_exactly():
    assert ticks.labels([1e-9, 1.25e-9]) == [r"$\mathdefault{10^{-9}}$",
                                             r"$\mathdefault{1.25\times10^{-9}}$"]
    assert ticks.labels([0.02, 5.0, 300.0]) == ["0.02", "5", "300"]
    for low, high in ((1e-9, 1.3e-9), (0.7, 1e4), (3e4, 3e6)):
        for set_ in ticks.candidates(low, high):
            assert np.all((set_ >= low * (1 - 1e-9)) & (set_ <= high * (1 + 1e-9)))


def test_titles_name_the_scenario_and_the_recorded_tone():
    from simulator.report.plots import titled
    from simulator.workflows.spectrum import TITLE_WIDTH, figure_title

    probes = load_scenario(TWO_PROBES)
    assert titled(probes) == ("drum-two-probes, tones drive, red_probe, blue_probe; "
                              "recorded: blue_probe")
    both = probes.replace("detection.tones", ["red_probe", "blue_probe"])
    assert titled(both).endswith("; recorded: red_probe, blue_probe")
    bae = load_scenario(TWO_PROBES.with_name("drum_bae_microwave.toml"))
    assert titled(bae) == "drum-bae-microwave, back-action-evading pair drive + upper"
    alone = load_scenario(TWO_PROBES.with_name("membrane_4k.toml"))
    assert titled(alone) == alone.scenario.name
    result = compute_spectrum(System(probes), at="cavity")
    title = figure_title(result, titled(probes))
    assert "blue_probe" in title and max(map(len, title.splitlines())) <= TITLE_WIDTH
    # a wrapped title never parts a number from its unit
    toroid = load_scenario(TWO_PROBES.with_name("microtoroid_room_temperature.toml"))
    lines = figure_title(compute_spectrum(System(toroid), at="cavity"),
                         titled(toroid)).splitlines()
    assert any("90\u00a0deg" in line for line in lines), lines
    assert not any(line.startswith("deg") for line in lines), lines


def _segment_figure(starts, names):
    """The protocol figure's two panels with segments ``names`` from ``starts`` (ms)."""
    from types import SimpleNamespace

    from simulator.report.plots import subplots
    from simulator.report.protocol_plots import _segments

    fig, (top, bottom) = subplots(2, 1, figsize=(9.0, 6.4), layout="constrained", sharex=True)
    timeline = SimpleNamespace(segment_starts_s=np.asarray(starts) * 1e-3,
                               segment_names=list(names))
    _segments(fig, top, bottom, timeline, (starts[-1] + starts[1] - starts[0]) * 1e-3, 1e3)
    return fig, top


@pytest.mark.parametrize("cycles", [1, 20])
def test_protocol_segments_are_named_once_legibly(cycles):
    """Few segments: their names above the panel, apart; a long cycle of repeated
    segments (a heating-rate protocol): each name once, in a key, one shade per name."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    names = ["cooling on", "cooling off"] * cycles
    starts = np.cumsum([0.0] + [0.8, 4.2] * cycles)[:-1]
    fig, top = _segment_figure(starts, names)
    renderer = FigureCanvasAgg(fig).get_renderer()
    above = [t for t in top.texts if t.get_text()]
    assert ticks.overlapping(above, renderer) == []
    shown = [t.get_text() for t in above] + [t.get_text() for lg in fig.legends
                                            for t in lg.get_texts()]
    assert sorted(set(shown)) == sorted(set(names))
    if cycles > 1:
        assert shown == ["cooling on", "cooling off"]  # the key: each name once
    shades = {}
    for patch, name in zip(top.patches, names, strict=True):
        shades.setdefault(name, set()).add(to_rgb(patch.get_facecolor()))
    assert all(len(s) == 1 for s in shades.values()) and len(
        set.union(*shades.values())) == len(shades)


def test_sources_drawn_together_in_the_pair_figure_are_far_apart_in_colour():
    """The back-action-evading budget draws the counter-rotating residual beside the
    internal-loss bath and the ports: each pair of its sources is told apart (RGB
    distance at least a quarter of the grey axis: common practice for line plots)."""
    names = list(compute_spectrum(System(load_scenario(
        TWO_PROBES.with_name("drum_bae_microwave.toml"))), at="cavity").spectrum.contributions)
    sources = sorted({colours.split_term(n)[0] for n in names} - {"shot noise (vacuum floor)"})
    assert "counter-rotating back-action" in sources
    rgb = {s: np.array(to_rgb(colours.source_colour(s, ("drum",)))) for s in sources}
    for i, a in enumerate(sources):
        for b in sources[i + 1:]:
            assert np.linalg.norm(rgb[a] - rgb[b]) >= 0.25 * np.sqrt(3), (a, b)


def test_pair_quadrature_figure_draws_the_budget_it_is_given():
    """Each source's X1 and X2 bars are its variances from the Lyapunov budget (their sum
    the total), in the source's colour; the key sits off the bars; the ticks are apart."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    from simulator.linear.quadratures import quadrature_budget
    from simulator.report.quadrature_plots import quadrature_figure

    budget = quadrature_budget(load_scenario(
        TWO_PROBES.with_name("drum_bae_microwave.toml"))).to_dict()
    fig = quadrature_figure(budget)
    left, right = fig.axes
    bars = [p for p in left.patches if p.get_width() > 0]
    widths = sorted(p.get_width() for p in bars)
    expected = sorted(list(budget["x1_by_source"].values())
                      + list(budget["x2_by_source"].values())
                      + [budget["x1_variance"], budget["x2_variance"]])
    assert widths == pytest.approx(expected, rel=1e-12)
    assert sum(budget["x1_by_source"].values()) == pytest.approx(budget["x1_variance"])
    labels = [t.get_text() for t in left.get_yticklabels()]
    assert labels[:-1] == list(budget["x1_by_source"]) and labels[-1] == "total"
    for source in budget["x1_by_source"]:
        colour = to_rgb(colours.source_colour(source, (budget["mode"],)))
        assert any(to_rgb(p.get_facecolor()) == colour for p in bars)
    assert sorted(p.get_width() for p in right.patches) == pytest.approx(sorted(
        [budget["imprecision_quanta"], budget["record_imprecision_quanta"], 0.5]))
    assert "(quanta" in left.get_xlabel() and "(quanta)" in right.get_xlabel()
    renderer = FigureCanvasAgg(fig).get_renderer()
    fig.draw_without_rendering()
    key = left.get_legend().get_window_extent(renderer)
    assert not key.overlaps(left.get_window_extent(renderer))
    for ax in (left, right):
        assert ticks.collisions(ax.xaxis, renderer) == []


def test_sideband_zoom_titles_stay_inside_a_two_column_figure():
    """The longest verdict ("not resolved bin by bin: needs ≈ … s of record") in the
    right-hand column of zooms stays inside the figure (it ran past the edge)."""
    from types import SimpleNamespace

    from matplotlib.backends.backend_agg import FigureCanvasAgg

    from simulator.report.plots import subplots
    from simulator.report.record_plots import FIGURE_WIDTH, _sideband, chi2_band

    f = np.linspace(5.9e6, 6.1e6, 401)
    expected = 1.0 + 1e-4 / (1.0 + ((f - 6e6) / 4e3) ** 2)  # a line far below the band
    psd = SimpleNamespace(frequency_hz=f, density=expected * 1.01, resolution_hz=f[1] - f[0])
    fig, axes = subplots(2, 2, figsize=(FIGURE_WIDTH, 7.4), layout="constrained")
    for ax in axes.ravel():
        _sideband(ax, psd, lambda x: 1.0 + 1e-4 / (1.0 + ((x - 6e6) / 4e3) ** 2),
                  ("channel blue_probe: drum: anti-Stokes sideband", 6e6, 4e3),
                  (1e6, 4096), chi2_band(29))
    renderer = FigureCanvasAgg(fig).get_renderer()
    fig.draw_without_rendering()
    for ax in axes.ravel():
        assert "not resolved" in ax.get_title()
        box = ax.title.get_window_extent(renderer)
        assert fig.bbox.x0 <= box.x0 and box.x1 <= fig.bbox.x1, ax.get_title()


def _spectrum_figure(name):
    from simulator.report.plots import spectrum_figure, titled
    from simulator.workflows.spectrum import figure_title

    scenario = load_scenario(TWO_PROBES.with_name(name))
    result = compute_spectrum(System(scenario))
    return spectrum_figure(result.spectrum, summary=result.summary,
                           title=figure_title(result, titled(scenario)))


@pytest.mark.parametrize("name", ["membrane_phase_noise.toml", "drum_two_probes.toml"])
def test_spectrum_panel_titles_keep_clear_of_the_legend(name):
    """The long budget of a noisy laser fills the legend down to the zooms' titles: those
    stay inside the figure and off every legend (the anti-Stokes title ran into it)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    fig = _spectrum_figure(name)
    renderer = FigureCanvasAgg(fig).get_renderer()
    fig.draw_without_rendering()
    keys = [lg.get_window_extent(renderer) for lg in fig.legends]
    assert keys
    texts = [ax.title for ax in fig.axes] + [fig._suptitle]
    for text in texts:
        box = text.get_window_extent(renderer)
        assert fig.bbox.x0 <= box.x0 and box.x1 <= fig.bbox.x1, text.get_text()
        assert not any(box.overlaps(k) for k in keys), text.get_text()


def test_laser_intensity_noise_is_apart_from_the_curves_beside_it():
    """The laser's intensity noise sits beside the digitiser's sampling terms and the
    other laser noises in one budget (it shared the sampling's yellow-brown): at least a
    quarter of the grey axis from each in RGB (common practice, as above)."""
    beside = ("sampling", "relaxation-oscillation peak", "phase-noise floor",
              "frequency noise", "added noise", "calibration tone")
    own = np.array(to_rgb(colours.source_colour("intensity noise")))
    for other in beside:
        distance = np.linalg.norm(own - to_rgb(colours.source_colour(other)))
        assert distance >= 0.25 * np.sqrt(3), other


def test_pair_run_report_carries_the_quadrature_figure(tmp_path):
    from simulator.cli.parser import main

    out = tmp_path / "bae"
    assert main(["run", str(TWO_PROBES.with_name("drum_bae_microwave.toml")), "--out",
                 str(out), "--workers", "1", "--quiet"]) == 0
    png = out / "quadratures.png"
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    page = (out / "report.html").read_text(encoding="utf-8")
    assert "the measured quadrature X1&#x27;s line zoomed" in page
    assert "conjugate X2 by noise source" in page
