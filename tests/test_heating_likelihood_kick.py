"""Kicked segments in the heating-rate likelihood.

A kick (``excite_phonons``) adds a deterministic mean to the mode's complex
amplitude, which then decays and rotates with every later block's ρ; the
Kalman filter runs on the residual and the kick's complex size is profiled
out by generalised least squares (the exact likelihood of a state-space
model with a linear mean: Harvey, Forecasting, Structural Time Series Models
and the Kalman Filter (CUP, 1989), Sec. 3.4, from memory). Three checks: the
profiled likelihood equals the dense Gaussian likelihood at the
generalised-least-squares mean, blocks left out included; block means drawn
from the model give back (Γm, H) within their errors, Γm far better than
without the kick; and on records of the simulator H and Γm are unbiased with
pull widths in their χ² interval, Γm well inside the thermal-only
Cramér–Rao error of the same schedule (the kick's decay carries Γm).
"""

import dataclasses
from pathlib import Path

import numpy as np
import pytest

from simulator.analysis.heating_likelihood import (
    fit_heating,
    heating_likelihood,
    negative_log_likelihood,
    nominal_model,
    scan_phases,
)
from simulator.analysis.sideband_blocks import kick_settling, scheduled_blocks, switch_phases
from simulator.scenario.loader import load_scenario
from simulator.workflows.trial_verdicts import width_interval
from tests.test_heating_likelihood import (
    PHASE,
    block_moments,
    dense_covariance,
    draw_blocks,
    two_segment_blocks,
)

PROTOCOL = Path(__file__).resolve().parents[1] / "scenarios" / "nanostring_protocol.toml"
KICK = 3e3 * np.exp(0.7j)  # phonon amplitude of the synthetic kicks (|β|² ≈ 10⁷)
SAMPLE_RATE = 12.5e6  # samples/s of the synthetic blocks (the example's record rate)
RECORDS = 30


def small_protocol(kick_phonons=1e9):
    """The example's device: 2 ms ring-down from a kick, 0.5 ms cooling, 1 ms probe."""
    scenario = load_scenario(PROTOCOL)
    ring, on, off = scenario.schedule.segments
    segments = (dataclasses.replace(ring, duration_s=2e-3, excite_phonons=kick_phonons),
                dataclasses.replace(on, duration_s=5e-4),
                dataclasses.replace(off, duration_s=1e-3))
    return dataclasses.replace(scenario, schedule=dataclasses.replace(scenario.schedule,
                                                                      segments=segments))


def dense_profile_nll(blocks, params):
    """−ln L of the observed block means from their full covariance, at the mean
    m̂·(b_k Π ρ from the kick) of generalised least squares (one kick)."""
    rho, b, *_ = block_moments(blocks, params)
    (k0,) = blocks.kicks
    carried = np.concatenate([np.zeros(k0), np.cumprod(np.r_[1.0, rho[k0:-1]])])
    seen = np.setdiff1d(np.arange(len(rho)), blocks.unobserved)
    cov = dense_covariance(blocks, params)[np.ix_(seen, seen)]
    column, u = (b * carried)[seen], blocks.u[seen]
    solve_u, solve_c = np.linalg.solve(cov, u), np.linalg.solve(cov, column)
    m = (np.conj(column) @ solve_u) / (np.conj(column) @ solve_c)
    r = u - m * column
    _, logdet = np.linalg.slogdet(cov)
    return float(len(u) * np.log(np.pi) + logdet + np.real(np.conj(r) @ np.linalg.solve(cov, r)))


def test_kicked_likelihood_equals_the_dense_gaussian_with_its_mean():
    """A kick at the probe's start, its first two blocks unobserved: one number."""
    params = np.array([150.0, 1.7e7, PHASE, 1.0, 1.05])
    blocks = dataclasses.replace(two_segment_blocks(), kicks=(20,), unobserved=(20, 21))
    blocks = dataclasses.replace(blocks, u=draw_blocks(blocks, params,
                                                       np.random.default_rng(5), KICK))
    for trial in (params, params * [3.0, 0.8, 0.5, 1.2, 0.9]):
        assert negative_log_likelihood(blocks, trial) == pytest.approx(
            dense_profile_nll(blocks, trial), rel=1e-9, abs=1e-6)


def synthetic_fit(blocks, truth, kick, seed):
    """(params, errors) of a fit to block means drawn from the model."""
    blocks = dataclasses.replace(blocks, u=draw_blocks(blocks, truth,
                                                       np.random.default_rng(seed), kick))
    start = np.concatenate([truth[:2], switch_phases(blocks), np.ones(3)])
    _, _, _, scale0 = nominal_model(small_protocol(), SAMPLE_RATE)
    params, cov = fit_heating(blocks, start, [*scale0, 0.05, 0.05, 0.01, 0.01, 0.01])
    return params, np.sqrt(np.diag(cov))


def test_blocks_drawn_from_the_kicked_model_give_back_its_parameters():
    """Γm and H within 4 errors of the truth; with the kick, Γm's error a fifth of
    the error of the same blocks without it (the kick's decay carries Γm)."""
    scenario = small_protocol()
    models, shifts, theta0, _ = nominal_model(scenario, SAMPLE_RATE)
    n = int(round(sum(s.duration_s for s in scenario.schedule.segments) * SAMPLE_RATE))
    blocks = scheduled_blocks(np.zeros(n, complex), scenario, 25, models, shifts, SAMPLE_RATE,
                              theta0[1] / theta0[0], kick_settling(scenario))
    assert blocks.kicks == (0,) and blocks.unobserved == (0, 1, 2, 3)
    truth = np.array([*theta0, 1.2, 0.1, 1.0, 1.0, 1.0])
    params, errors = synthetic_fit(blocks, truth, 3e4 * np.exp(0.7j), seed=21)
    assert np.all(np.abs(params[:4] - truth[:4]) < 4 * errors[:4])
    _, plain = synthetic_fit(dataclasses.replace(blocks, kicks=(), unobserved=()), truth,
                             0j, seed=21)
    assert errors[0] < plain[0] / 5


@pytest.fixture(scope="module")
def kicked_records():
    """RECORDS simulated records of the small kicked protocol and their fits."""
    from simulator.workflows.estimator import public_view
    from simulator.workflows.record import simulate_record

    scenario = small_protocol()
    return scenario, [heating_likelihood(public_view(simulate_record(
        scenario, seed=900 + seed, workers=1))) for seed in range(RECORDS)]


@pytest.mark.parametrize("name, truth_name", [
    ("bath_heating_rate_phonons_per_s", "bath_heating_rate_phonons_per_s"),
    ("mechanical_linewidth_hz", "mechanical_linewidth_hz")])
def test_simulated_kicked_records_are_unbiased_with_honest_errors(kicked_records, name,
                                                                  truth_name):
    """Mean within 4 standard errors of the truth, the pull width's 99 % χ² interval
    holding 1."""
    from simulator.workflows.trial import truth_table

    scenario, results = kicked_records
    truth = truth_table(scenario)[truth_name]
    x = np.array([r[name] for r in results])
    assert abs(x[:, 0].mean() - truth) < 4 * x[:, 0].std(ddof=1) / np.sqrt(len(x))
    low, high = width_interval(((x[:, 0] - truth) / x[:, 1]).std(ddof=1), len(x), 0.01)
    assert low <= 1.0 <= high


def test_the_kick_determines_the_mechanical_linewidth(kicked_records):
    """Γm's scatter below a third of the Cramér–Rao error of the same schedule's
    thermal motion alone (the Whittle information, which knows no kick), and its
    reported error near the ring-down's thermal-force limit σ_Γ² = 2Γ n_th/∫|m|²dt
    (ringdown_likelihood.thermal_limit) within a factor 2."""
    from simulator.analysis.ringdown_likelihood import thermal_limit

    scenario, results = kicked_records
    _, _, theta0, scale0 = nominal_model(scenario, SAMPLE_RATE)
    gamma = np.array([r["mechanical_linewidth_hz"] for r in results]) * 2 * np.pi
    assert gamma[:, 0].std(ddof=1) < scale0[0] / 3
    ring = scenario.schedule.segments[0]
    limit = thermal_limit(theta0[0], theta0[1] / theta0[0], ring.excite_phonons,
                          ring.duration_s)
    assert limit / 2 < np.median(gamma[:, 1]) < 2 * limit


def test_the_record_keeps_the_files_own_values():
    """A first segment with changes (the resonant ring-down) leaves the record's
    scenario at the file's values, which every estimator changes per segment itself:
    the cooling segment keeps its red detuning and its optical damping."""
    from simulator.workflows.record import simulate_record

    scenario = small_protocol()
    record = simulate_record(scenario, seed=1, workers=1)
    assert record.scenario.drive.detuning_hz == scenario.drive.detuning_hz == -1.5e6
    models, *_ = nominal_model(record.scenario, record.sample_rate_hz)
    assert models[0].optical_damping == pytest.approx(0.0, abs=1e-6)
    assert models[1].optical_damping > 1e4  # Γopt ≈ 2π × 3.1 kHz at −Ωm


def test_a_phase_started_beyond_the_ridge_is_found_again():
    """The probe's phase started half a turn away: the scan of eight points puts it
    back within a sixteenth of a turn of the truth, where the fit converges."""
    scenario = small_protocol()
    models, shifts, theta0, _ = nominal_model(scenario, SAMPLE_RATE)
    n = int(round(sum(s.duration_s for s in scenario.schedule.segments) * SAMPLE_RATE))
    blocks = scheduled_blocks(np.zeros(n, complex), scenario, 25, models, shifts, SAMPLE_RATE,
                              theta0[1] / theta0[0], kick_settling(scenario))
    truth = np.array([*theta0, 1.2, 0.1, 1.0, 1.0, 1.0])
    blocks = dataclasses.replace(blocks, u=draw_blocks(blocks, truth, np.random.default_rng(4),
                                                       3e4 * np.exp(0.7j)))
    found = scan_phases(blocks, truth + [0, 0, 0, np.pi, 0, 0, 0])
    assert abs(np.angle(np.exp(1j * (found[3] - truth[3])))) < np.pi / 8
