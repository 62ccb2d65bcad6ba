"""Heating rate by the exact likelihood of the demodulated sideband.

Three independent checks of simulator.analysis.heating_likelihood: the Kalman
prediction-error likelihood equals the dense Gaussian likelihood of the same
block means (Schweppe, IEEE Trans. Inf. Theory 11, 61 (1965): the two are the
same number; from memory); block means drawn from the model itself give back
(Γm, H) within their errors; and on records of the simulator the scatter of H
approaches the Cramér–Rao error of
:func:`simulator.analysis.protocol_bound.heating_rate_bound` for the same
protocol, with honest error bars, far below that of the mean-power slope
(:func:`simulator.analysis.ringdown.transient_rates`).
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
)
from simulator.analysis.protocol_bound import SegmentModel, heating_rate_bound
from simulator.analysis.ringdown_likelihood import block_noise
from simulator.analysis.sideband_blocks import ScheduledBlocks, scheduled_blocks, switch_phases
from simulator.errors import InputError
from simulator.scenario.loader import load_scenario
from simulator.workflows.trial_verdicts import width_interval

EXAMPLE = Path(__file__).resolve().parents[1] / "scenarios" / "nanostring_heating.toml"
PHASE = -1.2  # rad: the second segment's line phase in the synthetic blocks
RECORDS = 30


def short_protocol(cycles=3):
    """The example's device, ``cycles`` of 0.5 ms cooling and 1 ms re-thermalisation."""
    scenario = load_scenario(EXAMPLE)
    on, off = scenario.schedule.segments[:2]
    segments = (dataclasses.replace(on, duration_s=5e-4),
                dataclasses.replace(off, duration_s=1e-3)) * cycles
    return dataclasses.replace(scenario, schedule=dataclasses.replace(scenario.schedule,
                                                                      segments=segments))


def block_moments(blocks, params):
    """Per block: ρ, the line's coefficient, E|e|², E|f|² + floor, E[e f*] (the model)."""
    gamma_m, heating = params[:2]
    phase = dict(zip(blocks.names, [0.0, *params[2:len(blocks.names) + 1]], strict=True))
    floor = dict(zip(blocks.names, params[len(blocks.names) + 1:], strict=True))
    out = []
    for index, spacing, count in blocks.runs:
        m = blocks.models[index]
        diffusion = heating + m.optical_heating
        r, b, e2, f2, ef = block_noise(0.5 * (gamma_m + m.optical_damping)
                                       - 1j * blocks.shifts[index], spacing, diffusion)
        g = np.sqrt(m.gain) * np.exp(1j * phase[m.name])
        out += [(r, g * b, e2, m.gain * f2 + floor[m.name] * m.floor / spacing,
                 np.conj(g) * ef)] * count
    return [np.array(x) for x in zip(*out, strict=True)]


def draw_blocks(blocks, params, rng, kick=0j):
    """Block means drawn from the model: a_{k+1} = ρ a_k + e_k, u_k = b a_k + f_k,
    ``kick`` added to a at the blocks ``blocks.kicks``."""
    rho, b, q, obs, ef = block_moments(blocks, params)
    n = len(rho)
    z = (rng.standard_normal((3, n)) + 1j * rng.standard_normal((3, n))) / np.sqrt(2)
    a = np.sqrt(blocks.start_phonons(params[:2])) * z[0, 0]
    u = np.empty(n, complex)
    for k in range(n):
        if k in blocks.kicks:
            a += kick
        e = np.sqrt(q[k]) * z[1, k]
        corr = np.conj(ef[k]) / q[k]  # f = corr·e + independent rest, E[e f*] = ef
        u[k] = b[k] * a + corr * e + np.sqrt(obs[k] - abs(corr) ** 2 * q[k]) * z[2, k]
        a = rho[k] * a + e
    return u


def dense_nll(blocks, params):
    """−ln L from the full covariance of the block means."""
    cov = dense_covariance(blocks, params)
    _, logdet = np.linalg.slogdet(cov)
    u, n = blocks.u, len(blocks.u)
    return float(n * np.log(np.pi) + logdet + np.real(np.conj(u) @ np.linalg.solve(cov, u)))


def dense_covariance(blocks, params):
    """Covariance of the block means, built term by term:
    E[u_j u_i*] = b_j (Π ρ) (ρ_i v_i b_i* + E[e_i f_i*]) for j > i."""
    rho, b, q, obs, ef = block_moments(blocks, params)
    n = len(rho)
    v = np.empty(n)
    v[0] = blocks.start_phonons(params[:2])
    for k in range(n - 1):
        v[k + 1] = abs(rho[k]) ** 2 * v[k] + q[k]
    cov = np.diag(np.abs(b) ** 2 * v + obs).astype(complex)
    for i in range(n):
        carry = rho[i] * v[i] * np.conj(b[i]) + ef[i]  # E[a_{i+1} u_i*]
        for j in range(i + 1, n):
            cov[j, i] = b[j] * carry
            cov[i, j] = np.conj(cov[j, i])
            carry = rho[j] * carry
    return cov


def two_segment_blocks(u=None):
    models = (SegmentModel(name="cool", duration_s=4e-5, gain=3000.0, floor=1.0,
                           optical_damping=2e4, optical_heating=1e5, occupation=900.0),
              SegmentModel(name="probe", duration_s=6e-5, gain=2900.0, floor=1.1,
                           optical_damping=0.0, optical_heating=2e4, occupation=1.4e5))
    runs = ((0, 2e-6, 20), (1, 2e-6, 29), (1, 1e-6, 1), (2, 2e-6, 20))
    return ScheduledBlocks(u=np.zeros(70, complex) if u is None else u, runs=runs,
                           models=models + models[:1], names=("cool", "probe"),
                           shifts=(-1600.0, 0.0, -1600.0), start="occupation",
                           start_occupation=5e4, sample_rate_hz=4e6)


def test_kalman_likelihood_equals_the_dense_gaussian():
    """Switching segments, a shorter last block, phases and floors: one number."""
    params = np.array([150.0, 1.7e7, PHASE, 1.0, 1.05])
    blocks = two_segment_blocks()
    blocks = dataclasses.replace(blocks, u=draw_blocks(blocks, params,
                                                       np.random.default_rng(3)))
    for trial in (params, params * [3.0, 0.8, 0.5, 1.2, 0.9]):
        assert negative_log_likelihood(blocks, trial) == pytest.approx(
            dense_nll(blocks, trial), rel=1e-9, abs=1e-6)


def test_blocks_drawn_from_the_model_give_back_its_parameters():
    """Synthetic block means of the short protocol: H within 4 errors, its error
    within 25 % of the Cramér–Rao bound of the same schedule."""
    scenario = short_protocol(cycles=4)
    fs = scenario.digitizer.sample_rate_hz
    models, shifts, theta0, scale0 = nominal_model(scenario, fs)
    n = int(round(sum(s.duration_s for s in scenario.schedule.segments) * fs))
    blocks = scheduled_blocks(np.zeros(n, complex), scenario, 8, models, shifts, fs,
                              theta0[1] / theta0[0])
    truth = np.array([*theta0, PHASE, 1.0, 1.0])
    blocks = dataclasses.replace(blocks, u=draw_blocks(blocks, truth,
                                                       np.random.default_rng(11)))
    assert switch_phases(blocks)[0] == pytest.approx(PHASE, abs=0.2)
    start = np.array([*theta0, switch_phases(blocks)[0], 1.0, 1.0])
    params, cov = fit_heating(blocks, start, [*scale0, 0.05, 0.01, 0.01])
    errors = np.sqrt(np.diag(cov))
    assert abs(params[1] - theta0[1]) < 4 * errors[1]
    assert abs(params[2] - PHASE) < 4 * errors[2]
    bound = heating_rate_bound(scenario).heating_rate_error
    assert errors[1] == pytest.approx(bound, rel=0.25)


@pytest.fixture(scope="module")
def short_records():
    """RECORDS records of the short protocol, each with both estimators' results."""
    from simulator.analysis.ringdown import transient_rates
    from simulator.workflows.estimator import public_view
    from simulator.workflows.record import simulate_record

    scenario = short_protocol()
    out = []
    for seed in range(RECORDS):
        view = public_view(simulate_record(scenario, seed=700 + seed, workers=1))
        out.append((heating_likelihood(view), transient_rates(view)))
    return scenario, out


def test_scatter_approaches_the_bound_with_honest_errors(short_records):
    """Over records of the simulator: H within 4 standard errors of the truth, its
    scatter within 1.5 × the Cramér–Rao error of the protocol, the pull width's χ²
    interval (99 %) holding 1, and the mean-power slope three times as scattered."""
    from simulator.workflows.trial import truth_table

    scenario, results = short_records
    truth = truth_table(scenario)
    h = np.array([r["bath_heating_rate_phonons_per_s"] for r, _ in results])
    spread = h[:, 0].std(ddof=1)
    assert abs(h[:, 0].mean() - truth["bath_heating_rate_phonons_per_s"]) < (
        4 * spread / np.sqrt(len(h)))
    assert spread < 1.5 * heating_rate_bound(scenario).heating_rate_error
    pulls = (h[:, 0] - truth["bath_heating_rate_phonons_per_s"]) / h[:, 1]
    low, high = width_interval(pulls.std(ddof=1), len(pulls), 0.01)
    assert low <= 1.0 <= high
    name = "heating_rate_phonons_per_s@cooling off"
    slope = np.array([r[name][0] for r, _ in results])
    simple = np.array([s[name][0] for _, s in results])
    assert abs(slope.mean() - truth[name]) < 4 * slope.std(ddof=1) / np.sqrt(len(slope))
    assert simple.std(ddof=1) > 3 * slope.std(ddof=1)


def test_every_output_has_a_truth_in_the_trial_harness(short_records):
    """The names match the harness's truths (initial slopes, steady linewidths, the
    bath's heating rate and Γm), so `noisechain trial` scores them all."""
    from simulator.workflows.trial import truth_of, truth_table

    scenario, results = short_records
    table = truth_table(scenario)
    names = set(results[0][0])
    assert {"heating_rate_phonons_per_s@cooling off", "heating_rate_phonons_per_s@cooling on",
            "effective_linewidth_hz@cooling on", "bath_heating_rate_phonons_per_s",
            "mechanical_linewidth_hz"} <= names
    assert all(truth_of(name, table) is not None for name in names)
    assert table["bath_heating_rate_phonons_per_s"] == pytest.approx(
        2 * np.pi * 20.0 * table["occupation@cooling off"], rel=2e-3)  # probe heating: 0.1 %


def test_records_it_cannot_model_are_refused():
    from simulator.workflows.estimator import PublicRecord

    scenario = short_protocol()
    kicked = dataclasses.replace(scenario, schedule=dataclasses.replace(
        scenario.schedule, segments=(dataclasses.replace(
            scenario.schedule.segments[0], excite_phonons=1e4, excite_mode=1),)
        + scenario.schedule.segments[1:]))
    view = dict(samples=np.zeros(100, complex), kind="iq", scheme="heterodyne",
                sample_rate_hz=4e6, intermediate_frequency_hz=0.0,
                local_oscillator_side="above", volts_per_count=1.0,
                shot_noise_per_count=1.0)
    with pytest.raises(InputError, match="kicks mechanical mode"):
        heating_likelihood(PublicRecord(scenario=kicked, **view))
    with pytest.raises(InputError, match=r"\[schedule\]"):
        heating_likelihood(PublicRecord(scenario=dataclasses.replace(scenario, schedule=None),
                                        **view))
    with pytest.raises(InputError, match="samples"):
        heating_likelihood(PublicRecord(scenario=scenario, **view))
