"""Sweeps say where their best point is, and whether it sits at an edge or beside trouble."""

import json
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

from simulator.scenario.loader import parse_scenario
from simulator.workflows.sweep import run_sweep
from simulator.workflows.sweep_optimum import caveats, compare_own, optima_lines, sweep_optima

BASE = (Path(__file__).parent / "data" / "sweep_base.toml").read_text()


def _dataset(occupation, stable, bistable):
    dims = ("power", "detuning")
    shape = occupation.shape
    return xr.Dataset(
        {"occupation": (dims + ("mode",), occupation[..., None], {"units": ""}),
         "stable": (dims, stable.astype(float)), "bistable": (dims, bistable.astype(float))},
        coords={"power": np.arange(shape[0]) * 1.0, "detuning": np.linspace(-1, 1, shape[1]),
                "mode": ["m0"]})


def test_optimum_beside_unstable_and_bistable_cells():
    occupation = np.full((5, 6), 10.0)
    occupation[2, 3] = 1.0  # the best stable point ...
    occupation[2, 4] = 0.1  # ... and a lower value at an unstable point, ignored
    stable = np.ones((5, 6), bool)
    stable[2, 4] = False
    bistable = np.zeros((5, 6), bool)
    bistable[1, 2] = True
    (best,) = sweep_optima(_dataset(occupation, stable, bistable))
    assert best["value"] == 1.0 and best["index"] == [2, 3]
    assert best["at"] == {"power": 2.0, "detuning": pytest.approx(0.2)}
    assert not best["on_edge"] and best["next_to_unstable"] and best["next_to_bistable"]
    assert len(caveats(best)) == 2
    assert "next to unstable points" in optima_lines([best])[0]


def test_optimum_on_the_edge_of_a_clean_grid():
    occupation = np.arange(30.0).reshape(5, 6) + 1
    (best,) = sweep_optima(_dataset(occupation, np.ones((5, 6), bool), np.zeros((5, 6), bool)))
    assert best["index"] == [0, 0]
    assert best["on_edge"] and not best["next_to_unstable"] and not best["next_to_bistable"]
    rows = compare_own([best], [{"name": "m0", "occupation": 4.0}], [])
    assert rows == [("lowest occupation", "m0", 4.0, 1.0, 4.0)]


def test_run_sweep_stores_the_optima(tmp_path):
    scenario = parse_scenario(BASE + """
[sweep]
[sweep.parameters]
"drive.detuning_hz" = { start = -1.6, stop = -0.4, num = 7, unit = "mechanics[0].frequency_hz" }
""")
    dataset = run_sweep(scenario, tmp_path / "s", workers=1, progress=False)
    stored = json.loads(xr.load_dataset(tmp_path / "s" / "sweep.nc").attrs["optima"])
    lowest = next(e for e in stored if e["quantity"] == "occupation")
    # sideband cooling is best on the red sideband, Δ ≈ −Ωm (resolved sidebands)
    assert lowest["at"]["drive_detuning_over_mechanics0_frequency"] == pytest.approx(-1.0)
    occupation = dataset["occupation"].values[:, 0]
    assert lowest["value"] == pytest.approx(np.nanmin(occupation))
    assert not lowest["on_edge"]


def test_the_printed_optimum_names_the_swept_parameters_in_words():
    """The terminal line reads 'drive detuning Δ / Ωm = …', not a dataset variable name."""
    from simulator.workflows.sweep_optimum import optima_lines

    entry = {"description": "lowest occupation", "mode": "drum", "value": 0.5, "units": "",
             "at": {"drive_detuning_over_mechanics0_frequency": -1.05},
             "labels": {"drive_detuning_over_mechanics0_frequency": "drive detuning Δ / Ωm"},
             "on_edge": False, "next_to_unstable": False, "bistable": False,
             "next_to_bistable": False}
    (line,) = optima_lines([entry])
    assert "drive detuning Δ / Ωm = -1.05" in line and "over_mechanics0" not in line


def test_a_best_time_beyond_a_day_says_why_and_where_to_look():
    """A sweep whose best asymmetry time is still beyond a day gives the same hint as
    ``inspect`` (a weak sideband sets it; the planner searches beyond the grid); a
    day or less, or a figure that is not a time, gets none."""
    entry = {"on_edge": False, "next_to_unstable": False, "bistable": False,
             "next_to_bistable": False, "units": "s", "value": 1.2e13}
    assert any("more than a day" in w and "noisechain plan" in w for w in caveats(entry))
    assert caveats(entry | {"value": 3600.0}) == []
    assert caveats(entry | {"units": "", "value": 1e6}) == []
