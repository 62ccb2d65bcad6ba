"""``noisechain spectrum``: files, figure, JSON and exit statuses (DEVELOPERS.md).

The numbers the verb writes are compared with the Python API, whose physics
the other spectra tests check; here the verb is tested for faithful output.
"""

import json

import numpy as np
import pytest
from conftest import DEMO, mode, run_cli, scenario_with_coupling

from simulator.cli.parser import main
from simulator.linear.sidebands import sideband_summary
from simulator.linear.spectra import heterodyne_spectrum
from simulator.workflows.demo import demo_scenario


def _strict(text):
    def refuse(name):
        raise AssertionError(f"non-standard JSON constant {name}")
    return json.loads(text, parse_constant=refuse)


def test_spectrum_writes_netcdf_csv_and_a_png(tmp_path, capsys):
    import xarray as xr

    nc, csv, png = tmp_path / "s.nc", tmp_path / "s.csv", tmp_path / "s.png"
    assert main(["spectrum", str(DEMO), "--at", "cavity", "--out", str(nc), "--plot",
                 str(png)]) == 0
    text = capsys.readouterr().out
    assert "anti-Stokes" in text and "steady state" in text
    api = heterodyne_spectrum(demo_scenario())
    with xr.open_dataset(nc, engine="h5netcdf") as ds:
        np.testing.assert_allclose(ds["frequency"].values, api.frequency_hz)
        np.testing.assert_allclose(ds["total"].values, api.total, rtol=1e-12)
        budget = sum(ds[v].values for v in ds.data_vars if v.startswith("budget_"))
        np.testing.assert_allclose(budget, ds["total"].values, atol=1e-12)
        assert ds.attrs["sided"] == "two-sided" and "anti-Stokes" in ds["frequency"].long_name
        assert "[[mechanics]]" in ds.attrs["provenance_scenario_toml"]
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and png.stat().st_size > 20_000
    assert main(["spectrum", str(DEMO), "--at", "cavity", "--out", str(csv)]) == 0
    lines = csv.read_text(encoding="utf-8").splitlines()
    meta = [ln for ln in lines if ln.startswith("#")]
    assert any("sided: two-sided" in ln for ln in meta)
    header = lines[len(meta)].split(",")
    assert header[:2] == ["frequency_hz", "total"]
    table = np.loadtxt(csv, delimiter=",", comments="#", skiprows=len(meta) + 1)
    np.testing.assert_allclose(table[:, 1], api.total, rtol=1e-15)
    np.testing.assert_allclose(table[:, 2:].sum(axis=1), table[:, 1], atol=1e-12)


def test_spectrum_json_reports_the_sideband_summary(capsys):
    assert main(["spectrum", str(DEMO), "--json", "--at", "cavity"]) == 0
    report = _strict(capsys.readouterr().out)
    expected = sideband_summary(demo_scenario())[0]
    side = report["sidebands"][0]
    assert side["mode"] == "trampoline"
    assert side["occupation_from_ratio"] == pytest.approx(expected.occupation_from_ratio)
    assert side["steady_state_occupation"] == pytest.approx(expected.steady_state_occupation)
    assert report["sided"] == "two-sided" and report["budget_residual"] < 1e-12
    assert "external port vacuum: imprecision × back-action" in report["contributions"]


def test_homodyne_scenario_gives_a_one_sided_spectrum(tmp_path, capsys):
    path = tmp_path / "hom.toml"
    path.write_text(demo_scenario().replace("detection.scheme", "homodyne").to_toml(),
                    encoding="utf-8")
    assert main(["spectrum", str(path), "--json", "--at", "cavity", "--angle-deg", "45"]) == 0
    report = _strict(capsys.readouterr().out)
    assert report["sided"] == "one-sided" and report["frequency_range_hz"][0] == 0.0
    assert "45 deg" in report["quantity"]


def test_unstable_scenario_exits_3_and_bad_extension_exits_2(tmp_path, capsys):
    blue = scenario_with_coupling(g_hz=3e5, detuning_hz=+20e6,
                                  modes=[mode(frequency_hz=20e6, linewidth_hz=10.0)])
    path = tmp_path / "blue.toml"
    path.write_text(blue.to_toml(), encoding="utf-8")
    assert main(["spectrum", str(path)]) == 3
    assert "unstable" in capsys.readouterr().err
    assert main(["spectrum", str(DEMO), "--out", str(tmp_path / "s.txt")]) == 2
    err = capsys.readouterr().err
    assert "--out" in err and ".txt" in err and ".nc" in err
    assert not (tmp_path / "s.txt").exists()
    assert main(["spectrum", str(DEMO), "--plot", str(tmp_path / "s.gif")]) == 2


def test_bad_extension_from_a_fresh_process_has_no_traceback(tmp_path):
    done = run_cli("spectrum", DEMO, "--out", tmp_path / "s.hdf")
    assert done.returncode == 2
    assert "Traceback" not in done.stderr and "expected one of .nc, .csv" in done.stderr


def test_spectrum_save_refuses_other_extensions(tmp_path):
    from simulator.errors import InputError

    spec = heterodyne_spectrum(demo_scenario(), np.linspace(-2e6, 2e6, 11))
    with pytest.raises(InputError, match="expected .nc"):
        spec.save(tmp_path / "s.h5")
    assert not list(tmp_path.iterdir())
