"""Scheduled (non-stationary) records against closed forms and the exact moments.

Checks:
- the schedule section's validation errors name the key, value and expectation;
- a one-segment schedule gives the stationary full-state record bit for bit;
- the exact covariance flow in closed form equals Van Loan's block exponential;
- the occupation transients follow n(t) = n_f + (n_i − n_f) e^{−Γ_eff t} in weak
  coupling: cooling switched on (Marquardt et al., PRL 99, 093902 (2007);
  Wilson-Rae et al., PRL 99, 093901 (2007)) and re-thermalisation with the drive
  off at the rate Γm, initial heating rate Γm (n_th − n_i) (Aspelmeyer, Kippenberg
  and Marquardt, Rev. Mod. Phys. 86, 1391 (2014); section recalled from memory);
- a ring-down's mean amplitude decays as e^{−Γ_eff t/2};
- a Monte Carlo of many short records: the ensemble mean and variance of the
  stored mechanical quadrature at several times against the exact moments,
  with tolerances from the number of records;
- the file stores the timeline; a change of state layout is refused.
"""

import dataclasses

import h5py
import numpy as np
import pytest
from conftest import mode, scenario_with_coupling

from simulator.errors import InputError, ScenarioError
from simulator.linear.steady_state import steady_state
from simulator.records.generate import FULL_SCALE_SIGMAS, MemorySink, generate_record
from simulator.records.protocol import (
    TRANSIENT_SAMPLES,
    covariance_flow,
    covariance_flow_van_loan,
    plan_protocol,
    state_moments,
)
from simulator.records.protocol_generate import generate_protocol_record, run_segments
from simulator.scenario.loader import scenario_from_dict

FS = 2e6
N_TH = 50.0
GAMMA_M_HZ = 1e3
Z_LIMIT = 5.0  # standard normal: a 5σ excursion has probability 6e-7
WEAK_COUPLING_RTOL = 0.03  # corrections of order Γ_eff/κ and (g/κ)² ≈ 1 % here


def make(segments, *, start="thermal", store=False, **schedule):
    """A 300 kHz mode (Γm/2π = 1 kHz, n_th = 50) cooled in a 600 kHz cavity, g = 24 kHz."""
    base = scenario_with_coupling(
        g_hz=24e3, linewidth_hz=600e3, detuning_hz=-300e3,
        modes=[mode(frequency_hz=300e3, linewidth_hz=GAMMA_M_HZ, coupling_hz=200.0,
                    bath_occupation=N_TH, effective_mass_kg=1e-13)])
    data = base.to_dict()
    data["digitizer"] = {"sample_rate_hz": FS}
    data["record"] = {"store_mechanics": store}  # the segments set the length
    data["schedule"] = dict(schedule, start=start, segments=segments)
    return scenario_from_dict(data, source="<test>")


OFF = {"drive.power_w": 0.0}


def test_schedule_errors_name_the_key_and_the_expectation():
    with pytest.raises(ScenarioError, match=r"schedule\.segments\[0\]\.changes.*drive\.powr_w"):
        make([{"duration_s": 1e-3, "changes": {"drive.powr_w": 0.0}}])
    with pytest.raises(ScenarioError, match=r"excite_mode.*names no mode"):
        make([{"duration_s": 1e-3, "excite_mode": 3}])
    with pytest.raises(ScenarioError, match=r"schedule\.segments.*one or more"):
        make([])
    with pytest.raises(ScenarioError, match=r"start_occupation.*only with"):
        make([{"duration_s": 1e-3}], start_occupation=3.0)
    with pytest.raises(ScenarioError, match=r"duration_s.*positive"):
        make([{"duration_s": -1.0}])
    with pytest.raises(ScenarioError, match=r"cannot change within a record"):
        make([{"duration_s": 1e-3, "changes": {"record.duration_s": 2.0}}])


def test_one_segment_schedule_is_the_stationary_record_bit_for_bit():
    scenario = make([{"duration_s": 1e-3}], start="steady")
    record, _ = generate_protocol_record(scenario, seed=11, chunk_samples=700)
    plain = generate_record(dataclasses.replace(scenario, schedule=None), seed=11,
                            form="full-state", duration_s=1e-3)
    assert np.array_equal(record.counts, plain.counts)


def test_closed_form_covariance_flow_equals_van_loan():
    plan = plan_protocol(make([{"duration_s": 1e-4}]))
    seg = plan.segments[0]
    a = seg.chain.model.A
    m = seg.chain.model
    diffusion = m.B @ m.N @ m.B.T
    for t in (3e-7, 2e-5, 4e-4):
        closed, _ = covariance_flow(a, seg.discrete.state_covariance, plan.start_covariance, t)
        general, _ = covariance_flow_van_loan(a, diffusion, plan.start_covariance, t)
        assert np.allclose(general, closed, rtol=1e-8, atol=1e-9 * np.abs(closed).max())


def law(tl, rows, n_i, n_f, gamma_hz):
    t = tl.times_s[rows] - tl.times_s[rows][0]
    return n_f + (n_i - n_f) * np.exp(-2 * np.pi * gamma_hz * t)


def test_cooling_and_heating_transients_follow_the_weak_coupling_law():
    plan = plan_protocol(make([{"duration_s": 3e-4}, {"duration_s": 2e-3, "changes": OFF}],
                              truth_points=100))
    tl = plan.timeline
    cooled = steady_state(plan.segments[0].system).modes[0]
    gamma_eff, n_f = cooled.effective_linewidth_hz, cooled.occupation
    assert gamma_eff > 3 * GAMMA_M_HZ  # optical damping dominates: a real cooling step
    cool = np.flatnonzero(tl.segment == 0)
    late = cool[tl.times_s[cool] > 20 / (2 * np.pi * 600e3)]  # after the cavity's transient
    expected = law(tl, cool, N_TH, n_f, gamma_eff)[-len(late):]
    assert np.allclose(tl.occupation[late, 0], expected,
                       atol=WEAK_COUPLING_RTOL * (N_TH - n_f))
    heat = np.flatnonzero(tl.segment == 1)
    n_c = tl.occupation[heat[0], 0]
    assert n_c == pytest.approx(tl.occupation[cool[-1], 0], rel=1e-12)  # carried over
    assert np.allclose(tl.occupation[heat, 0], law(tl, heat, n_c, N_TH, GAMMA_M_HZ),
                       atol=WEAK_COUPLING_RTOL * (N_TH - n_c))
    first = plan.segments[1].first  # initial heating rate Γm (n_th − n_c), over one sample
    _, cov = state_moments(plan, [first, first + 1])
    q, p = (plan.segments[1].chain.model.index(f"m0.{x}") for x in "qp")
    n = 0.5 * (cov[:, q, q] + cov[:, p, p] - 1.0)
    assert n[0] == pytest.approx(n_c, rel=1e-9)
    assert (n[1] - n[0]) * FS == pytest.approx(2 * np.pi * GAMMA_M_HZ * (N_TH - n_c),
                                               rel=2e-3)


def test_ring_down_amplitude_decays_at_half_the_effective_linewidth():
    phonons = 1e4
    plan = plan_protocol(make([{"duration_s": 1e-3, "changes": OFF, "excite_phonons": phonons},
                               {"duration_s": 2e-4, "excite_phonons": phonons}]))
    tl = plan.timeline
    for k, seg in enumerate(plan.segments):
        rows = np.flatnonzero(tl.segment == k)
        t = tl.times_s[rows] - tl.times_s[rows][0]
        gamma = steady_state(seg.system).modes[0].effective_linewidth_hz
        amplitude = np.hypot(tl.mean_q[rows, 0], tl.mean_p[rows, 0])
        start = amplitude[0]
        assert np.allclose(amplitude, start * np.exp(-np.pi * gamma * t),
                           rtol=1e-6 if k == 0 else WEAK_COUPLING_RTOL)
    # the second kick adds √(2n) along q to what is left of the first ring-down
    rows1 = np.flatnonzero(tl.segment == 1)
    assert tl.mean_q[rows1[0], 0] == pytest.approx(
        tl.mean_q[rows1[0] - 1, 0] + np.sqrt(2 * phonons), rel=1e-9)


def test_ensemble_of_records_has_the_exact_mean_and_variance():
    """Var of a sample variance of N Gaussian values: 2σ⁴/(N − 1); of a mean: σ²/N."""
    scenario = make([{"duration_s": 2e-5, "excite_phonons": 400.0},
                     {"duration_s": 2e-4, "changes": OFF}], store=True,
                    start="occupation", start_occupation=2.0)
    plan = plan_protocol(scenario)
    samples = np.array([0, 13, 39, 120, 300])
    n_records = 400
    q = np.empty((n_records, len(samples)))
    for i in range(n_records):
        sink = MemorySink(dataclasses.replace(plan, seed=1000 + i))
        run_segments(sink.plan, sink, chunk=1 << 12)
        q[i] = sink.mech[samples, 0]
    sigma2 = assert_ensemble_moments(q, plan, samples)
    assert sigma2[-1] > 5 * sigma2[0]  # the ensemble really heats over the record


def test_record_file_stores_the_timeline(tmp_path):
    from simulator.io.recordfile import RecordFileWriter, load_record
    from simulator.io.timelinefile import read_timeline

    scenario = make([{"duration_s": 1e-4}, {"duration_s": 1e-4, "changes": OFF}])
    path = tmp_path / "protocol.h5"
    record, timeline = generate_protocol_record(
        scenario, seed=3, sink=lambda plan, rows: RecordFileWriter(path, plan, rows))
    stored = read_timeline(path)
    assert stored.segment_names == timeline.segment_names
    assert np.array_equal(stored.occupation, timeline.occupation)
    back = load_record(path)
    assert back.scenario.schedule == scenario.schedule
    assert back.n_samples == 400
    with h5py.File(path) as f:
        assert "truth/timeline/mean_q" in f


def test_a_segment_that_changes_the_state_layout_is_refused():
    scenario = make([{"duration_s": 1e-4},
                     {"duration_s": 1e-4, "changes": {"electronics.bandwidth_hz": 1e5}}])
    with pytest.raises(InputError, match="state layout"):
        plan_protocol(scenario)


def test_example_protocol_scenario_rings_down_cools_and_rethermalises():
    from pathlib import Path

    from simulator.scenario.loader import load_scenario

    path = Path(__file__).resolve().parents[1] / "scenarios" / "nanostring_protocol.toml"
    record, tl = generate_protocol_record(load_scenario(path))
    assert record.clipped_samples == 0
    ring, cool, off = (np.flatnonzero(tl.segment == k) for k in range(3))
    amplitude = np.hypot(tl.mean_q[:, 0], tl.mean_p[:, 0])
    t = tl.times_s[ring]
    assert np.allclose(amplitude[ring], amplitude[0] * np.exp(-np.pi * 20.0 * t), rtol=1e-6)
    probed = plan_protocol(load_scenario(path)).segments[2].system
    n_probe = steady_state(probed).modes[0].occupation  # the bath plus the probe's heating
    assert tl.occupation[cool[-1], 0] < 0.01 * n_probe  # cooled
    n_c, dt = tl.occupation[off[0], 0], tl.times_s[off] - tl.times_s[off[0]]
    assert np.allclose(tl.occupation[off, 0],
                       n_probe + (n_c - n_probe) * np.exp(-2 * np.pi * 20.0 * dt), rtol=2e-3)


def test_a_kick_that_crowds_out_the_quiet_segments_is_warned_about():
    """Rounding variance Δ²/12 (Widrow and Kollár, Quantization Noise, 2008, Ch. 4)."""
    from simulator.records.generate import RecordWarning

    scenario = make([{"duration_s": 5e-5, "excite_phonons": 1e12},
                     {"duration_s": 5e-5, "changes": OFF}])
    scenario = scenario.replace("digitizer.bits", 10)
    with pytest.warns(RecordWarning, match="rounding noise"):
        generate_protocol_record(scenario, seed=1)
    generate_protocol_record(make([{"duration_s": 5e-5}]), seed=1)  # no warning at 16 bits


def assert_ensemble_moments(q, plan, samples):
    """The records' stored ``m0.q`` at ``samples`` (one row per record) against the exact
    mean and variance of the plan (within Z_LIMIT standard errors; the variance's
    standard error of a Gaussian sample, σ²√(2/(N − 1))). Returns the exact variances."""
    n_records = len(q)
    mean, cov = state_moments(plan, samples)
    index = plan.segments[0].chain.model.index("m0.q")
    sigma2 = cov[:, index, index]
    z_mean = (q.mean(axis=0) - mean[:, index]) / np.sqrt(sigma2 / n_records)
    z_var = (q.var(axis=0, ddof=1) - sigma2) / (sigma2 * np.sqrt(2 / (n_records - 1)))
    assert np.all(np.abs(z_mean) < Z_LIMIT), z_mean
    assert np.all(np.abs(z_var) < Z_LIMIT), z_var
    return sigma2


def test_the_automatic_full_scale_holds_a_start_hotter_than_every_segment():
    """A mode started at 20 000 phonons and cooled to a few: the steady states alone
    set a full scale the first samples exceed (they clipped). The full scale now
    follows each segment's loudest state, here just after the hot start, once the
    cavity follows the mode: none of the record clips, and the full scale is that of
    the start's exact sample variance, not of the steady state's."""
    hot = make([{"duration_s": 3e-4}], start="occupation", start_occupation=2e4)
    plan = plan_protocol(hot)
    record, _ = generate_protocol_record(hot, seed=3)
    assert record.clipped_samples == 0
    seg = plan.segments[0]
    steady = FULL_SCALE_SIGMAS * seg.chain.record_std(seg.discrete)
    assert plan.full_scale_v > 10 * steady  # the 2e4-phonon start, not the cooled state
    _, cov = state_moments(plan, [TRANSIENT_SAMPLES[4]])
    at_start = FULL_SCALE_SIGMAS * seg.chain.record_std(
        dataclasses.replace(seg.discrete, state_covariance=cov[0]))
    assert plan.full_scale_v >= at_start
