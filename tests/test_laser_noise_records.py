"""Records with laser noise agree with the analytic spectra of the same model.

The goodness-of-fit test of tests/test_records.py (its statistics are stated
there: Gamma-distributed Welch bins, every third bin independent for the Hann
window) re-run with every classical noise shape switched on.
"""

import numpy as np
import pytest
from test_records import FS, SAMPLES, SEGMENT, Z_LIMIT, expected_welch, gof_z, halves, make, welch

from simulator.records.generate import plan_record
from simulator.workflows.record import simulate_record

NOISE = {"phase_noise": {"linewidth_hz": 1.0, "floor_rad2_per_hz": 1e-12,
                         "floor_low_hz": 2e4, "floor_high_hz": 3e6,
                         "peak_rad2_per_hz": 1e-11, "peak_frequency_hz": 2e5,
                         "peak_width_hz": 2e4},
         "intensity_noise": {"relative_intensity_noise_per_hz": 1e-12}}

CHAINS = {
    "iq, delayed copy as local oscillator": dict(
        detection={"local_oscillator_delay_s": 5e-8}),
    "homodyne, phase-locked local oscillator, filtered": dict(
        detection={"scheme": "homodyne", "quadrature_angle_rad": 1.2,
                   "local_oscillator_source": "locked",
                   "local_oscillator_lock_bandwidth_hz": 5e4},
        electronics={"bandwidth_hz": 0.7e6}),
    "iq, independent local oscillator with its own noise": dict(
        detection={"local_oscillator_source": "independent",
                   "local_oscillator_phase_noise": {
                       "floor_rad2_per_hz": 2e-12, "floor_low_hz": 1e5,
                       "floor_high_hz": 1e6, "peak_rad2_per_hz": 3e-11,
                       "peak_frequency_hz": 4e5, "peak_width_hz": 3e4}}),
}


@pytest.mark.parametrize("name", list(CHAINS))
def test_welch_psd_matches_the_chain_spectrum_with_laser_noise(name):
    drive = NOISE
    if CHAINS[name]["detection"].get("local_oscillator_source") == "independent":
        # a separate LO cannot follow the drive's random walk (refused): floor and peak only
        drive = {**NOISE, "phase_noise": {k: v for k, v in NOISE["phase_noise"].items()
                                          if k != "linewidth_hz"}}
    scenario = make(drive=drive, **CHAINS[name])
    plan = plan_record(scenario)
    assert any(s.startswith("laser.") for s in plan.chain.model.states)
    record = simulate_record(scenario, seed=202)
    f, w = welch(record)
    expected = expected_welch(plan)
    quantisation = (2 if record.kind == "iq" else 1) * plan.shot_noise_per_count**2 / 12 / FS
    segments = SAMPLES // SEGMENT
    quiet = plan_record(make(**CHAINS[name])).chain.sampled_spectrum(f, FS, aliases=30)
    noisy = plan.chain.sampled_spectrum(f, FS, aliases=30)
    assert np.max(noisy / quiet) > 1.2  # the laser noise is visible in the record
    for idx in halves(f):
        if record.kind == "if" and f[idx[0]] < 0:
            continue
        assert abs(gof_z(w, expected, segments, idx)) < Z_LIMIT
        analytic = np.zeros_like(w)
        analytic[idx] = noisy[idx] + quantisation
        assert abs(gof_z(w, analytic, segments, idx)) < Z_LIMIT
