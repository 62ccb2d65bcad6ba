"""Figures read at a glance: labels, colours, cell edges, limits, the record against its band."""

import numpy as np
import pytest
import xarray as xr

from simulator.report import colours
from simulator.report.plots import data_limits
from simulator.report.record_plots import chi2_band
from simulator.report.summary import best_sweep_points, coord_label
from simulator.report.sweep_plots import cell_edges, plot_occupation, plot_stability
from simulator.scenario import labels
from simulator.workflows.sweep_optimum import sweep_optima


def test_scenario_paths_read_as_quantities_with_units():
    assert labels.axis_label("drive.detuning_hz", "mechanics[0].frequency_hz") \
        == "drive detuning Δ / Ωm"
    assert labels.axis_label("drive.power_w") == "drive power P (W)"
    assert labels.axis_label("cavity.linewidth_hz") == "cavity linewidth κ/2π (Hz)"
    assert labels.axis_label("mechanics[1].coupling_hz", mode_names=("a", "b")) \
        == "single-photon coupling of b g0,1/2π (Hz)"
    # a key nobody put in the table still reads as words with its unit
    assert labels.axis_label("electronics.transimpedance_ohm") \
        == "electronics transimpedance (V/A)"
    assert labels.axis_label("digitizer.full_scale_v") == "digitizer full scale (V)"


def test_a_noise_source_keeps_its_colour_whatever_the_scenario():
    demo = ["shot noise (vacuum floor)", "external port vacuum: back-action motion",
            "internal loss bath: back-action motion", "trampoline thermal bath: thermal motion"]
    other = ["shot noise (vacuum floor)", "laser frequency noise: back-action motion",
             "added noise (heterodyne split or amplifier): imprecision",
             "internal loss bath: imprecision × back-action", "drum thermal bath: thermal motion",
             "drum2 thermal bath: thermal motion"]
    a = {n: colours.term_style(n, names=demo) for n in demo}
    b = {n: colours.term_style(n, names=other) for n in other}
    assert a[demo[2]]["color"] == b[other[3]]["color"]  # the internal-loss bath
    assert a[demo[3]]["color"] == b[other[4]]["color"]  # the first mode's bath
    assert b[other[4]]["color"] != b[other[5]]["color"]  # two modes, two colours
    assert (a[demo[2]]["ls"], b[other[3]]["ls"]) == ("-", "--")  # the term sets the style
    unknown = colours.source_colour("a source added next year")
    assert unknown == colours.source_colour("a source added next year")
    assert unknown not in {c for _, c in colours._NAMED} | set(colours._THERMAL)


def test_log_cells_are_bounded_at_geometric_mid_points():
    powers = np.array([1e-8, 1e-7, 1e-6])
    edges = cell_edges(powers, log=True)
    assert edges == pytest.approx([10**-8.5, 10**-7.5, 10**-6.5, 10**-5.5])
    assert cell_edges(np.array([0.0, 1.0, 3.0])) == pytest.approx([-0.5, 0.5, 2.0, 4.0])


def test_limits_come_from_the_data_without_empty_decades():
    low, high = data_limits(np.array([1e-36, 3e-35, 1e-32, np.nan, -1.0]), log=True)
    assert 10**-36.3 < low < 1e-36 and 1e-32 < high < 10**-31.7
    low, high = data_limits(np.array([1.0, 1.0]), log=True)  # flat: a readable span
    assert 2.0 < high / low < 2.5


def test_chi2_band_of_one_periodogram_is_the_exponential_quantiles():
    """One segment: each bin is exponential, P/E[P] ~ χ²(2)/2, quantiles −ln(1 − p)."""
    low, high = chi2_band(1)
    assert (low, high) == pytest.approx((-np.log(0.975), -np.log(0.025)))
    low, high = chi2_band(10_000)  # many averages: normal, ±1.96/√K
    assert (high - low) / 2 == pytest.approx(1.96 / 100, rel=0.01)


def _sweep_dataset(log_power=True):
    """A small two-parameter sweep of made-up numbers (figures only)."""
    detuning, power = np.linspace(-1.5, -0.5, 3), np.array([1e-8, 1e-7, 1e-6, 1e-5])
    occ = np.outer(1.0 + (detuning + 1.0) ** 2, 1e-6 / power)[..., None]
    stable = np.ones((3, 4))
    stable[-1, -1] = 0
    dims = ("detuning", "power")
    return xr.Dataset(
        {"occupation": (dims + ("mode",), occ), "weak_coupling_occupation":
         (dims + ("mode",), occ), "sideband_ratio": (dims + ("mode",), occ / (occ + 1)),
         "stable": (dims, stable), "bistable": (dims, np.zeros((3, 4))),
         "growth_rate_hz": (dims, -np.ones((3, 4)))},
        coords={"detuning": ("detuning", detuning, {
                    "path": "drive.detuning_hz", "spacing": "linear",
                    "units": "in units of mechanics[0].frequency_hz"}),
                "detuning_hz": ("detuning", detuning * 1e6, {"path": "drive.detuning_hz",
                                                             "units": "Hz"}),
                "power": ("power", power, {"path": "drive.power_w", "units": "W",
                                           "spacing": "log" if log_power else "linear"}),
                "mode": ["drum"]},
        attrs={"scenario_name": "made-up"})


def test_sweep_figures_and_best_point_name_parameters_in_words(tmp_path):
    ds = _sweep_dataset()
    assert coord_label(ds["detuning"]) == "drive detuning Δ / Ωm"
    best = best_sweep_points(ds, sweep_optima(ds))
    # lowest occupation among stable points: the middle detuning at the highest power
    assert best[0][1] == ("drive detuning Δ / Ωm = -1; drive detuning Δ/2π (Hz) = -1e+06; "
                          "drive power P (W) = 1e-05")
    for plot in (plot_occupation, plot_stability):
        png = plot(ds, tmp_path / f"{plot.__name__}.png")
        assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    line = ds.isel(power=0)
    assert plot_occupation(line, tmp_path / "line.png").stat().st_size > 0


def test_record_periodogram_falls_in_its_band_as_often_as_stated():
    """About 5 % of the bins of a record of the model lie outside its 95 % band.

    The demo's record (fixed seed), 1024 bins around the anti-Stokes line where
    the model is far from flat: the fraction outside is binomial,
    0.05 ± 0.007, if the band (χ² of 2K degrees of freedom) and the expected
    periodogram (the model through the Fejér kernel) are both right.
    """
    from simulator.model.system import System
    from simulator.report.record_plots import record_against_model
    from simulator.workflows.demo import demo_scenario
    from simulator.workflows.record import simulate_record

    system = System(demo_scenario())
    record = simulate_record(system, duration_s=0.01, progress=False)
    psd, _, expectation, (low, high) = record_against_model(system, record)
    line = record.truth.effective_frequency_hz[0]
    nearest = np.argsort(np.abs(psd.frequency_hz - line))[:1024]
    f = np.sort(psd.frequency_hz[nearest])
    inside = np.isin(psd.frequency_hz, f)
    expected = expectation(f)
    outside = (psd.density[inside] < low * expected) | (psd.density[inside] > high * expected)
    assert 0.05 - 0.021 < outside.mean() < 0.05 + 0.021
    assert expected.max() > 2.0  # the line is in the window


def test_line_plots_span_the_stable_range_and_name_what_they_leave_out():
    from simulator.report.sweep_plots import _stable_window

    x = np.linspace(-2.0, 2.0, 9)
    stable = x < 0.2  # the demo's pattern: unstable on the blue side
    (low, high), note = _stable_window(x, stable, False, "drive detuning Δ / Ωm")
    assert (low, high) == pytest.approx((-2.25, 0.25))
    assert note == "unstable for drive detuning Δ / Ωm above 0 (not shown)"
    (low, high), note = _stable_window(x, np.ones(9, bool), False, "Δ")
    assert (low, high, note) == pytest.approx((-2.25, 2.25, ""))


def test_a_zoom_leaves_out_a_flat_floor_but_keeps_the_lines():
    """Under a 20-quanta amplifier the lines would be slivers on a floor of ~12: the zoom
    subtracts budget terms flat across its window and keeps every term with a line."""
    from types import SimpleNamespace

    from simulator.report.plots import FLAT_RTOL, _flat_terms

    f = np.linspace(-1.0, 1.0, 201)
    line = 0.3 / (1 + (f / 0.05) ** 2)
    spectrum = SimpleNamespace(contributions={"total": 1 + 11.5 + line,
                                              "amplifier": np.full_like(f, 11.5),
                                              "thermal motion": line,
                                              "nearly flat": 2.0 + 0.5 * FLAT_RTOL * f})
    flat = _flat_terms(spectrum, np.ones_like(f, dtype=bool))
    assert flat == {"amplifier": pytest.approx(11.5), "nearly flat": pytest.approx(2.0)}
