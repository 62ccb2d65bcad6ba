"""Regime verdict (pure formulas) and the master-equation command line.

The verdict's ratios are the standard measures of optomechanical
nonlinearity: g0/κ and the polaron shift g0²/Ωm against the linewidth (Rabl,
PRL 107, 063601 (2011); Nunnenkamp, Børkje, Girvin, PRL 107, 063602 (2011)),
and the thermal cavity-frequency jitter g0√(2n+1) against κ/2 (common
practice: the transduction is linear while the motion moves the cavity by
much less than its half-linewidth). The thresholds 0.01 and 0.1 are the
project's choice (common practice), not published values.
"""

import json
import subprocess
import sys

import numpy as np
import pytest
import scipy.constants
from conftest import DEMO, REPO, make_scenario, mode, run_cli

from simulator.master.regime import MARGINAL, NONLINEAR, regime_checks, regime_verdict
from simulator.model.operating_point import operating_point


def test_demo_scenario_is_linear():
    verdict = regime_verdict(operating_point(make_scenario()))
    assert verdict.level == "linear" and verdict.trustworthy
    assert "trustworthy" in verdict.reason


def test_ratios_follow_their_formulas():
    scenario = make_scenario(mechanics={"coupling_hz": 3e4, "frequency_hz": 2e6,
                                        "linewidth_hz": 100.0, "bath_occupation": 4.0})
    point = operating_point(scenario)
    checks = {c.name: c.value for c in regime_checks(point)}
    kappa = scenario.cavity.linewidth_hz
    assert checks["g0/κ"] == pytest.approx(3e4 / kappa)
    assert checks["(g0²/Ωm)/max(κ, Γm)"] == pytest.approx((3e4) ** 2 / 2e6 / kappa)
    assert checks["g0·√(2n+1)/(κ/2)"] == pytest.approx(3e4 * 3 / (kappa / 2))
    occupied = {c.name: c.value for c in regime_checks(point, occupations=[0.0])}
    assert occupied["g0·√(2n+1)/(κ/2)"] == pytest.approx(3e4 / (kappa / 2))


@pytest.mark.parametrize("g0_hz, level", [(1e3, "linear"), (2e4, "marginal"),
                                          (5e5, "nonlinear")])
def test_levels_and_reasons(g0_hz, level):
    scenario = make_scenario(mechanics={"coupling_hz": g0_hz, "bath_occupation": 0.0},
                             drive={"power_w": 1e-12})
    verdict = regime_verdict(operating_point(scenario))
    assert verdict.level == level
    assert verdict.trustworthy == (level != "nonlinear")
    if level == "nonlinear":
        assert "g0/κ" in verdict.reason and "NOT trustworthy" in verdict.reason
    values = [c.value for c in verdict.checks]
    assert (max(values) >= NONLINEAR) == (level == "nonlinear")
    assert (max(values) < MARGINAL) == (level == "linear")


def test_single_photon_scenario_is_flagged_by_the_polaron_shift():
    """g0 = 2κ, Ωm = 4κ: g0²/Ωm = κ (the regime of the blockade test)."""
    scenario = make_scenario(cavity={"linewidth_hz": 1e6, "external_linewidth_hz": 0.5e6},
                             mechanics=[mode(frequency_hz=4e6, linewidth_hz=2e4,
                                             coupling_hz=2e6, bath_occupation=0.0)],
                             drive={"power_w": 1e-15, "detuning_hz": -1e6})
    verdict = regime_verdict(operating_point(scenario))
    assert verdict.level == "nonlinear"
    assert "polaron shift" in verdict.reason


def test_plain_inspect_and_help_do_not_import_qutip():
    code = ("import sys\nfrom simulator.cli.parser import main\n"
            f"main(['inspect', {str(DEMO)!r}])\n"
            "assert 'qutip' not in sys.modules, 'inspect imported qutip'\n"
            "try:\n    main(['--help'])\nexcept SystemExit:\n    pass\n"
            "assert 'qutip' not in sys.modules\nprint('clean')")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         cwd=REPO, timeout=120)
    assert out.returncode == 0, out.stderr
    assert "clean" in out.stdout and "regime (linear engine validity)" in out.stdout


def _small_scenario(tmp_path, power_w=2e-12):
    text = f"""
[scenario]
name = "small-master-check"
[drive]
frequency_hz = 2.8e14
power_w = {power_w!r}
detuning_hz = -2e6
[cavity]
linewidth_hz = 1e6
external_linewidth_hz = 0.5e6
[[mechanics]]
name = "m0"
frequency_hz = 2e6
linewidth_hz = 2e4
effective_mass_kg = 1e-15
coupling_hz = 2e4
bath_occupation = 0.5
[detection]
efficiency = 0.8
"""
    path = tmp_path / "small.toml"
    path.write_text(text)
    return path


def test_inspect_master_json_sets_master_beside_linear(tmp_path):
    out = run_cli("inspect", _small_scenario(tmp_path), "--master", "--json")
    assert out.returncode == 0, out.stderr
    data = json.loads(out.stdout)
    assert data["regime"]["level"] in ("linear", "marginal", "nonlinear")
    master = data["master"]
    rows = {r["quantity"]: r for r in master["rows"]}
    occupation = rows["m0: occupation"]
    assert occupation["master"] == pytest.approx(occupation["linear"], rel=1e-2)
    assert occupation["linear"] == pytest.approx(data["modes"][0]["occupation"])
    photons = rows["intracavity photons ⟨a†a⟩"]
    assert photons["linear"] == pytest.approx(data["photon_number"])
    assert photons["master"] == pytest.approx(photons["linear"], rel=1e-2)
    # g²(0) of the linear engine's displaced Gaussian state (Wick's theorem) vs master
    g2 = rows["cavity g²(0)"]
    assert g2["master"] == pytest.approx(g2["linear"], rel=1e-4) and g2["linear"] > 1.0
    assert master["steady"]["modes"][0]["tail_population"] <= 1e-4
    text = run_cli("inspect", _small_scenario(tmp_path), "--master",
                   "--master-model", "linearised")
    assert text.returncode == 0 and "master equation (linearised model" in text.stdout


def test_master_too_large_is_a_clear_input_error(tmp_path):
    """The demo device barely driven keeps thousands of thermal phonons."""
    from simulator.scenario.loader import load_scenario

    path = tmp_path / "warm.toml"
    path.write_text(load_scenario(DEMO).replace("drive.power_w", 1e-12).to_toml())
    out = run_cli("inspect", path, "--master")
    assert out.returncode == 2
    assert "trampoline is expected to hold" in out.stderr and "Traceback" not in out.stderr


def test_spectrum_engine_master(tmp_path):
    flux = 1e-3 * (2 * np.pi * 1e6) ** 2 / 4 / (2 * np.pi * 0.5e6)  # n̄ ≈ 1e-3 on resonance
    path = _small_scenario(tmp_path, power_w=flux * scipy.constants.h * 2.8e14)
    out = run_cli("spectrum", path, "--engine", "master", "--at", "cavity", "--json", "--out",
                  tmp_path / "s.csv")
    assert out.returncode == 0, out.stderr
    data = json.loads(out.stdout)
    assert data["engine"] == "master" and data["sided"] == "two-sided"
    assert data["points"] == 200 and data["budget_residual"] < 1e-12
    assert (tmp_path / "s.csv").exists()
