"""Unstable schedule segments: a blue-detuned pulse beyond the parametric instability.

Checks:
- the occupation grows during the pulse as the weak-coupling rate equation
  says, dn/dt = −Γ_eff n + Γm n_th + A₊ with Γ_eff = Γm + A₋ − A₊ < 0 and
  A∓ = g²κ/(κ²/4 + (Δ ± Ωm)²) (Marquardt, Chen, Clerk and Girvin, PRL 99,
  093902 (2007); Aspelmeyer, Kippenberg and Marquardt, Rev. Mod. Phys. 86,
  1391 (2014), Sec. VII, the rate equation, recalled from memory): n(t) =
  n∞ + (n₀ − n∞) e^{−Γ_eff t}, growing as e^{|Γ_eff| t};
- the exact moments against a Monte Carlo of records (ensemble mean and
  variance of the stored mechanical quadrature), and the expected sideband
  power (:mod:`simulator.analysis.spectrogram`) against the records' mean;
- refusals: an unstable first segment with start = "steady" (no steady
  state), a pulse that would grow the variance beyond the stated limit, a
  schedule of unstable segments only.
"""

import dataclasses

import numpy as np
import pytest
from test_protocol_records import (
    FS,
    GAMMA_M_HZ,
    N_TH,
    WEAK_COUPLING_RTOL,
    Z_LIMIT,
    assert_ensemble_moments,
    make,
)

from simulator.analysis.ringdown import demodulated_power
from simulator.analysis.spectrogram import expected_sideband_power
from simulator.errors import InputError, OperatingPointError
from simulator.records.generate import MemorySink
from simulator.records.protocol import plan_protocol
from simulator.records.protocol_generate import generate_protocol_record, run_segments
from simulator.records.unstable import MAX_VARIANCE_GROWTH

BLUE = {"drive.detuning_hz": 3e5}  # one mechanical frequency to the blue: anti-damping
G_HZ, KAPPA_HZ, OMEGA_HZ = 24e3, 600e3, 300e3  # the test scenario's g, κ and Ωm


def rates():
    """(Γ_eff, A₊) in 1/s at Δ = +Ωm from the weak-coupling scattering rates."""
    g, k, d, w = (2 * np.pi * x for x in (G_HZ, KAPPA_HZ, BLUE["drive.detuning_hz"], OMEGA_HZ))
    heating = g**2 * k / (k**2 / 4 + (d - w) ** 2)  # Stokes: phonon created
    cooling = g**2 * k / (k**2 / 4 + (d + w) ** 2)  # anti-Stokes: phonon removed
    return 2 * np.pi * GAMMA_M_HZ + cooling - heating, heating


def test_occupation_grows_as_the_rate_equation_says():
    plan = plan_protocol(make([{"duration_s": 1e-4}, {"duration_s": 2e-4, "changes": BLUE},
                               {"duration_s": 2e-4}], truth_points=50))
    tl = plan.timeline
    gamma, heating = rates()
    assert gamma < 0  # beyond the threshold: no steady state
    assert not plan.segments[1].system.stable
    rows = np.flatnonzero(tl.segment == 1)
    t = tl.times_s[rows] - tl.times_s[rows][0]
    n0, n_inf = tl.occupation[rows[0], 0], (2 * np.pi * GAMMA_M_HZ * N_TH + heating) / gamma
    law = n_inf + (n0 - n_inf) * np.exp(-gamma * t)
    assert law[-1] > 10 * n0  # a real growth, e^{|Γ_eff| T} ≈ 13
    assert np.allclose(tl.occupation[rows, 0], law, rtol=4e-2)
    # the growth rate itself, from the exact flow, against the rate equation's |Γ_eff|
    slope = np.polyfit(t[5:], np.log(tl.occupation[rows[5:], 0] - n_inf), 1)[0]
    assert slope == pytest.approx(-gamma, rel=WEAK_COUPLING_RTOL)
    assert tl.effective_linewidth_hz[rows[0], 0] == pytest.approx(
        gamma / (2 * np.pi), rel=WEAK_COUPLING_RTOL)  # negative: from the drift's poles
    after = np.flatnonzero(tl.segment == 2)  # cooled again afterwards
    assert tl.occupation[after[-1], 0] < 0.5 * tl.occupation[after[0], 0]


def test_monte_carlo_of_records_through_a_blue_pulse():
    """Var of a sample variance of N Gaussian values: 2σ⁴/(N − 1); of a mean: σ²/N."""
    scenario = make([{"duration_s": 5e-5, "excite_phonons": 100.0},
                     {"duration_s": 2e-4, "changes": BLUE}], store=True,
                    start="occupation", start_occupation=2.0)
    plan = plan_protocol(scenario)
    samples = np.array([0, 99, 150, 260, 420, 499])
    n_records, block = 300, 50
    q = np.empty((n_records, len(samples)))
    side = np.empty((n_records, plan.n_samples // block))
    for i in range(n_records):
        sink = MemorySink(dataclasses.replace(plan, seed=2000 + i))
        run_segments(sink.plan, sink, chunk=1 << 12)
        q[i] = sink.mech[samples, 0]
        z = (sink.counts[:, 0] + 1j * sink.counts[:, 1]) * plan.shot_noise_per_count
        side[i] = demodulated_power(z, FS, OMEGA_HZ, block)[1]
    sigma2 = assert_ensemble_moments(q, plan, samples)
    assert sigma2[-1] > 8 * sigma2[1]  # the pulse really amplifies
    _, power, coherent = expected_sideband_power(plan, OMEGA_HZ, block)
    sigma2 = power - coherent  # Var |Z|² of a circular Gaussian of mean μ: σ⁴ + 2σ²|μ|²
    z_side = (side.mean(axis=0) - power) / np.sqrt((sigma2**2 + 2 * sigma2 * coherent)
                                                    / n_records)
    assert np.all(np.abs(z_side) < Z_LIMIT), z_side
    assert power[-1] > 5 * power[2]


def test_the_record_holds_the_grown_state_without_clipping():
    scenario = make([{"duration_s": 1e-4}, {"duration_s": 2e-4, "changes": BLUE}])
    record, timeline = generate_protocol_record(scenario, seed=8)
    assert record.clipped_samples == 0
    assert timeline.occupation[-1, 0] > 5 * timeline.occupation[0, 0]


def test_unstable_segments_that_cannot_run_are_refused_with_the_reason():
    with pytest.raises(InputError, match=r"segment 0 .*unstable.*no steady state to start "
                                         r'from; expected start = "thermal"'):
        plan_protocol(make([{"duration_s": 1e-4, "changes": BLUE}], start="steady"))
    limit = f"{MAX_VARIANCE_GROWTH:.0e}".replace("+", r"\+")
    with pytest.raises(OperatingPointError, match=r"segment 1 .*amplify the state's variance"
                                                  rf".*duration_s = 0.003.*at most {limit}"):
        plan_protocol(make([{"duration_s": 1e-4}, {"duration_s": 3e-3, "changes": BLUE}]))
    with pytest.raises(OperatingPointError, match="every schedule segment is unstable"):
        plan_protocol(make([{"duration_s": 1e-4, "changes": BLUE}]))
    # an unstable first segment from a thermal start runs
    plan = plan_protocol(make([{"duration_s": 1e-4, "changes": BLUE}, {"duration_s": 1e-4}]))
    assert plan.timeline.occupation[0, 0] == pytest.approx(N_TH)
    cavity = plan.timeline.cavity_occupation[0]
    assert 0 <= cavity < 1  # the cavity's own steady state: a few thermal photons at most


def test_trial_truth_of_an_unstable_segment_is_its_poles():
    from simulator.workflows.trial import segment_truths

    table = segment_truths(make([{"duration_s": 1e-4, "name": "cool"},
                                 {"duration_s": 1e-4, "name": "blue", "changes": BLUE}]))
    assert table["effective_linewidth_hz@blue"] == pytest.approx(rates()[0] / (2 * np.pi),
                                                                 rel=WEAK_COUPLING_RTOL)
    assert "occupation@blue" not in table and table["occupation@cool"] > 0
