"""One battery run over every example scenario and the bundled demo.

Every ``scenarios/*.toml`` (found by glob, so a new file is covered without
touching this test) and ``simulator/data/demo.toml`` must load, survive a TOML
round trip, and give the stability verdict the file itself declares in a
comment line ``# expect: stable`` or ``# expect: unstable``. Stable ones must
have non-negative occupations and a covariance that obeys the uncertainty
relation and stays stationary under the exact sampled dynamics (a check
independent of the Lyapunov solver); unstable ones must be refused by the
steady state and the sideband summary with the growth rate and the cause;
the command line must print strict JSON and exit with 0 (stable) or 3
(unstable).
"""

import json
import re
from importlib import resources
from pathlib import Path

import numpy as np
import pytest

from simulator.cli import parser as cli
from simulator.errors import OperatingPointError
from simulator.linear.sidebands import sideband_summary
from simulator.linear.spectra import adaptive_grid, photon_flux_density
from simulator.linear.steady_state import steady_state
from simulator.records.discretize import discretize
from simulator.scenario.loader import load_scenario, parse_scenario
from simulator.workflows.inspection import inspect_scenario
from simulator.workflows.sweep import sweep_points

SCENARIO_DIR = Path(__file__).resolve().parents[1] / "scenarios"
DEMO = Path(str(resources.files("simulator.data").joinpath("demo.toml")))
FILES = sorted(SCENARIO_DIR.glob("*.toml")) + [DEMO]
EXPECT = re.compile(r"^#\s*expect:\s*(\S+)\s*$", re.MULTILINE)


def declared_expectation(path):
    """The verdict a scenario file declares: ``"stable"`` or ``"unstable"``."""
    found = EXPECT.findall(path.read_text(encoding="utf-8"))
    assert len(found) == 1, (f"{path}: expected exactly one comment line "
                             f"'# expect: stable' or '# expect: unstable', found {found}")
    assert found[0] in ("stable", "unstable"), (
        f"{path}: '# expect: {found[0]}'; expected 'stable' or 'unstable'")
    return found[0]


def symplectic_form(n_pairs):
    """Ω for quadrature pairs (X, Y): [X, Y] = i gives Ω = [[0, 1], [-1, 0]] per pair."""
    return np.kron(np.eye(n_pairs), np.array([[0.0, 1.0], [-1.0, 0.0]]))


def uncertainty_margin(v):
    """Smallest eigenvalue of V + iΩ/2, relative to the size of V.

    A symmetrised covariance of a physical (quantum) state obeys V + iΩ/2 ≥ 0,
    the Robertson–Schrödinger uncertainty relation in the form of Simon,
    Mukunda, Dutta, Phys. Rev. A 49, 1567 (1994) (citation from memory).
    Round-off is relative to ‖V‖, hence the scaling.
    """
    m = v + 0.5j * symplectic_form(len(v) // 2)
    return float(np.linalg.eigvalsh(m).min()) / max(1.0, float(np.linalg.norm(v, 2)))


def assert_refused_as_unstable(compute, path, scenario, report):
    """``compute(scenario)`` of a file declared ``# expect: unstable`` is refused.

    There is no steady state to check and no sideband to summarise, so the
    function must raise :class:`OperatingPointError`, whose message gives the
    person at the keyboard the positive growth rate (Hz, as ``inspect``
    prints it) and the cause in words (DEVELOPERS.md, "Error messages";
    docs/physics.md §8), and the file's header must say so too.
    """
    assert declared_expectation(path) == "unstable"
    verdict = report.stability
    assert not verdict.stable and verdict.growth_rate_hz > 0 and verdict.cause, path.name
    with pytest.raises(OperatingPointError) as refused:
        compute(scenario)
    message = str(refused.value)
    assert f"growth rate {verdict.growth_rate_hz:.6g} Hz" in message, message
    assert verdict.cause in message, message


def stationary_under_exact_sampling(model, v):
    """Largest violation of V = Φ V Φᵀ + Q, relative to √(V_ii V_jj).

    A stationary state sampled at any interval T stays stationary: with
    Φ = e^{AT} and Q = ∫₀ᵀ e^{As} B N Bᵀ e^{Aᵀs} ds the covariance of the
    noise added over one interval, V = Φ V Φᵀ + Q (common practice;
    Anderson and Moore, Optimal Filtering (1979), Ch. 4, citation from
    memory). Φ and Q come from Van Loan's block matrix exponential
    (Van Loan, IEEE Trans. Autom. Control 23, 395 (1978)) in
    :func:`simulator.records.discretize.discretize`, a computation independent of
    the Lyapunov solver that gave V (it only reads V's diagonal to pick
    power-of-two scales, an exact similarity). Two intervals: the fastest
    time of the drift (Φ near 1, Q a small increment) and the slowest decay
    time (Φ small, Q close to the whole of V).
    """
    rates = np.linalg.eigvals(model.A)
    sd = np.sqrt(np.diag(v))
    worst = 0.0
    for interval in (1 / np.abs(rates).max(), 1 / np.abs(rates.real).min()):
        sampled = discretize(model, interval)
        phi, q = sampled.transition, sampled.process_noise
        worst = max(worst, float(np.abs((phi @ v @ phi.T + q - v) / np.outer(sd, sd)).max()))
    return worst


def strict_json(text):
    """Parse JSON, refusing the NaN/Infinity extensions Python would accept."""
    def refuse(name):
        raise ValueError(f"non-standard JSON constant {name}")
    return json.loads(text, parse_constant=refuse)


def test_battery_covers_the_required_kinds_of_scenario():
    examples = sorted(SCENARIO_DIR.glob("*.toml"))
    assert len(examples) >= 4, f"expected at least four example scenarios, found {examples}"
    loaded = [load_scenario(p) for p in examples]
    assert any(len(s.mechanics) >= 2 for s in loaded), "no multi-mode example scenario"
    assert any(declared_expectation(p) == "unstable" for p in examples), (
        "no example scenario is declared unstable")


def test_uncertainty_check_can_fail():
    # The check must reject a state squeezed below vacuum in both quadratures.
    assert uncertainty_margin(0.5 * np.eye(4)) > -1e-12
    assert uncertainty_margin(0.4 * np.eye(4)) < -0.05


@pytest.fixture(scope="module", params=FILES, ids=lambda p: p.name)
def case(request):
    path = request.param
    scenario = load_scenario(path)
    return path, scenario, inspect_scenario(scenario)


def test_round_trip_through_toml(case):
    path, scenario, _ = case
    again = parse_scenario(scenario.to_toml(), source=f"{path} (round trip)")
    assert again == scenario
    assert again.to_dict() == scenario.to_dict()


def test_declared_verdict(case):
    path, _, report = case
    expected = declared_expectation(path)
    assert report.stability.stable == (expected == "stable"), (
        f"{path.name} declares '{expected}' but inspect says "
        f"{'stable' if report.stability.stable else 'unstable'}: {report.stability.cause}")
    if expected == "unstable":
        assert report.steady is None
        assert report.stability.growth_rate_hz > 0
        assert report.stability.cause


def test_steady_state_is_physical(case):
    path, scenario, report = case
    if declared_expectation(path) == "unstable":
        assert_refused_as_unstable(steady_state, path, scenario, report)
        return
    st = report.steady
    assert st.cavity_occupation >= -1e-12
    for mode in st.modes:
        assert mode.occupation >= 0, (mode.name, mode.occupation)
        assert mode.effective_linewidth_hz > 0
    # the quantum modes (cavity and mechanics) come first; classical laser-noise
    # states after them carry no commutator and are left out of the relation
    quantum = 2 + 2 * len(scenario.mechanics)
    assert uncertainty_margin(st.covariance[:quantum, :quantum]) > -1e-10
    model = report.system.model
    assert stationary_under_exact_sampling(model, st.covariance) < 1e-9, path.name
    # the check can fail: a covariance 1 ppm too large is not stationary
    assert stationary_under_exact_sampling(model, st.covariance * (1 + 1e-6)) > 1e-8


def test_sideband_lines_are_found(case):
    """Every driven mode of a stable scenario has finite sideband weights, and
    the summary's line frequencies (from the drift's eigenvalues) are where a
    peak search over the spectrum itself finds the lines, within a linewidth:
    laser-noise filter poles must neither be taken for the mode nor make its
    eigenvectors look defective."""
    path, scenario, report = case
    if declared_expectation(path) == "unstable":
        assert_refused_as_unstable(sideband_summary, path, scenario, report)
        return
    model = report.system.model
    grid = adaptive_grid(model)
    above = photon_flux_density(model, grid) - photon_flux_density(model, grid, floor=True)
    if scenario.detection.backaction_evading:  # one quadrature: X1's line at zero offset
        from simulator.linear.quadratures import quadrature_budget

        width = report.steady.modes[0].effective_linewidth_hz
        assert abs(grid[np.argmax(np.abs(above))]) < width, path.name
        budget = quadrature_budget(report.system)
        assert abs(budget.x1_backaction) < 1e-3 * budget.x2_heating, path.name
        return
    for s, mode in zip(sideband_summary(scenario), report.point.modes, strict=True):
        assert np.isfinite([s.anti_stokes.area_quanta, s.stokes.area_quanta]).all(), path.name
        assert not s.warning, (path.name, s.warning)
        for line, sign in ((s.anti_stokes, +1), (s.stokes, -1)):
            near = np.abs(grid - sign * mode.frequency_hz) < 0.05 * mode.frequency_hz
            peak = grid[near][np.argmax(np.abs(above[near]))]
            assert abs(peak - line.frequency_hz) < line.linewidth_hz, (path.name, sign)


def test_command_line(case, capsys):
    path, _, report = case
    status = cli.main(["inspect", str(path), "--json"])
    out = capsys.readouterr().out
    data = strict_json(out)
    expected = declared_expectation(path)
    assert status == (cli.EXIT_OK if expected == "stable" else cli.EXIT_UNSTABLE)
    assert data["stable"] is (expected == "stable")
    assert [m["name"] for m in data["modes"]] == [m.name for m in report.point.modes]
    if report.steady is not None:
        for entry, mode in zip(data["modes"], report.steady.modes, strict=True):
            assert entry["occupation"] == mode.occupation
    status = cli.main(["inspect", str(path)])
    text = capsys.readouterr().out
    assert status == (cli.EXIT_OK if expected == "stable" else cli.EXIT_UNSTABLE)
    assert ("UNSTABLE" in text) == (expected == "unstable")


SWEEP_FILES = [p for p in FILES
               if re.search(r"^\[sweep\]", p.read_text(encoding="utf-8"), re.MULTILINE)]


@pytest.mark.parametrize("path", SWEEP_FILES, ids=lambda p: p.name)
def test_sweep_table_is_valid(path):
    scenario = load_scenario(path)
    assert scenario.sweep is not None
    points = sweep_points(scenario)
    assert points, f"{path.name}: the [sweep] table expands to no points"
    for _, assignments in points:
        for key, value in assignments:
            scenario.replace(key, value)


TONE_FILES = [p for p in FILES if "[[tones]]" in p.read_text(encoding="utf-8")]


@pytest.mark.parametrize("path", TONE_FILES, ids=lambda p: p.name)
def test_several_tone_examples_give_spectrum_and_record(path, tmp_path, capsys):
    """The examples with several tones run through the stages of their detected tone:
    the spectrum at the digitiser and a short record that names its tone."""
    scenario = load_scenario(path)
    assert cli.main(["spectrum", str(path), "--json"]) == cli.EXIT_OK
    assert strict_json(capsys.readouterr().out)["scenario"] == scenario.scenario.name
    out = tmp_path / "record.h5"
    short = [] if scenario.schedule is not None else ["--duration", "2e-5"]  # its own length
    assert cli.main(["record", str(path), "--out", str(out), *short]) == 0
    capsys.readouterr()
    from simulator.io.recordfile import load_record

    record = load_record(out)
    named = ("back-action-evading pair (mean frequency)"
             if scenario.detection.backaction_evading else scenario.detection.tone)
    assert record.truth.calibration["detected_tone"] == named
