"""The expected spectrogram of scheduled records against independent computations.

Checks:
- one stationary segment: every window equals the exact windowed expected
  periodogram of the stationary model (the averaged-spectrum law,
  :func:`simulator.analysis.synthetic_spectrum.bin_law`, computed from the
  recursion's autocovariance by another route);
- two segments with the same parameters: the windows across the boundary
  (cut into stretches with cross terms) equal one segment's windows;
- a Monte Carlo of 200 scheduled records (a kick, cooling, then a resonant
  probe): the mean of their spectrograms and of their demodulated sideband
  powers against the expectation, within the sampling error;
- the anti-Stokes sideband power integrated from the expectation follows the
  occupation transient n(t) = n_f + (n_i − n_f) e^{−Γ_eff t} in weak coupling
  (Marquardt et al., PRL 99, 093902 (2007); Wilson-Rae et al., PRL 99, 093901
  (2007)), as the sideband area is proportional to n (heterodyne sideband
  thermometry; Aspelmeyer, Kippenberg and Marquardt, Rev. Mod. Phys. 86, 1391
  (2014), Sec. on sideband asymmetry, recalled from memory).
"""

import dataclasses

import numpy as np
import pytest
from test_protocol_records import FS, GAMMA_M_HZ, WEAK_COUPLING_RTOL, make

from simulator.analysis.psd import taper
from simulator.analysis.ringdown import demodulated_power
from simulator.analysis.spectrogram import expected_sideband_power, expected_spectrogram
from simulator.analysis.synthetic_spectrum import bin_law
from simulator.errors import InputError
from simulator.linear.steady_state import steady_state
from simulator.records.generate import MemorySink
from simulator.records.protocol import plan_protocol
from simulator.records.protocol_generate import run_segments

PROBE = {"drive.detuning_hz": 0.0}  # the tone on resonance: no optical damping
F_M = 300e3  # the test mode's frequency (anti-Stokes line at +f_m in I + iQ)
TONE_HZ = 125e3  # the calibration tone's offset (a bin of 128-sample windows at 2 MHz)
Z_LIMIT = 5.0  # standard normal: a 5σ excursion has probability 6e-7 per cell


@pytest.mark.parametrize("scheme", ["heterodyne", "homodyne"])
def test_one_stationary_segment_is_the_windowed_expected_periodogram(scheme):
    scenario = make([{"duration_s": 1e-3}], start="steady").replace("detection.scheme", scheme)
    plan = plan_protocol(scenario)
    for window in ("hann", "boxcar"):
        spec = expected_spectrogram(plan, window_samples=256, hop_samples=100, window=window)
        expectation, stationary, _ = bin_law(plan, 256, window)
        axis = expectation.frequency_hz
        if scheme == "homodyne":  # one-sided on 0 < f < fs/2, as averaged_periodogram
            half = (axis > 0) & (axis < FS / 2)
            stationary, axis = 2 * stationary[half], axis[half]
            assert spec.sided == "one-sided"
        assert np.array_equal(spec.frequency_hz, axis)
        assert spec.density.shape == (18, len(stationary))
        assert np.allclose(spec.density, stationary[None], rtol=1e-10, atol=0)
        assert np.all(spec.coherent == 0)


def test_windows_across_a_boundary_of_identical_segments_equal_one_segment():
    kicked = {"excite_phonons": 300.0}
    two = plan_protocol(make([dict(kicked, duration_s=3e-4), {"duration_s": 7e-4}]))
    one = plan_protocol(make([dict(kicked, duration_s=1e-3)]))
    a = expected_spectrogram(two, window_samples=256, hop_samples=37)
    b = expected_spectrogram(one, window_samples=256, hop_samples=37)
    assert np.allclose(a.density, b.density, rtol=1e-9, atol=0)
    assert np.allclose(a.coherent, b.coherent, rtol=1e-9, atol=1e-12 * b.coherent.max())
    assert b.coherent.max() > 10 * b.density.min()  # the ring-down is really there


def protocol_scenario():
    """Kick (300 phonons) while cooled, then a resonant probe with a calibration tone."""
    from simulator.scenario.loader import scenario_from_dict

    data = make([{"duration_s": 2e-4, "excite_phonons": 300.0},
                 {"duration_s": 4e-4, "changes": dict(PROBE)}], start="occupation",
                start_occupation=5.0).to_dict()
    data["drive"]["calibration_tone"] = {"depth_rad": 0.0, "frequency_hz": TONE_HZ}
    data["schedule"]["segments"][1]["changes"]["drive.calibration_tone.depth_rad"] = 1e-2
    return scenario_from_dict(data, source="<test>")


def test_monte_carlo_of_scheduled_records_matches_the_expected_spectrogram():
    plan = plan_protocol(protocol_scenario())
    size, hop, n_records = 128, 96, 200
    spec = expected_spectrogram(plan, window_samples=size, hop_samples=hop)
    block = 60
    t, power, coh = expected_sideband_power(plan, F_M, block)
    w = taper("hann", size)
    w = w / np.sqrt(np.mean(w**2))
    order = np.argsort(np.fft.fftfreq(size))
    grams = np.empty((n_records,) + spec.density.shape)
    side = np.empty((n_records, len(t)))
    for i in range(n_records):
        sink = MemorySink(dataclasses.replace(plan, seed=500 + i))
        run_segments(sink.plan, sink, chunk=1 << 12)
        z = (sink.counts[:, 0] + 1j * sink.counts[:, 1]) * plan.shot_noise_per_count
        frames = np.stack([z[s:s + size] * w for s in spec.starts])
        grams[i] = np.abs(np.fft.fft(frames, axis=1)[:, order]) ** 2 / (FS * size)
        side[i] = demodulated_power(z, FS, F_M, block)[1]
    interior = np.abs(spec.frequency_hz) < 0.45 * FS  # circular there (not near 0, fs/2)
    interior[np.abs(spec.frequency_hz) < 2 * FS / size] = False
    for sample, expected, coherent in ((grams[:, :, interior], spec.density[:, interior],
                                        spec.coherent[:, interior]), (side, power, coh)):
        # a circular complex Gaussian Z of mean μ, σ² = E|Z|² − |μ|²: Var|Z|² = σ⁴ + 2σ²|μ|²
        sigma2 = expected - coherent
        spread = np.sqrt((sigma2**2 + 2 * sigma2 * coherent) / n_records)
        z_score = (sample.mean(axis=0) - expected) / spread
        assert np.all(np.abs(z_score) < Z_LIMIT), np.abs(z_score).max()
        assert np.mean(z_score**2) == pytest.approx(1.0, abs=0.2)  # the χ² per cell ≈ 1
    line = np.argmin(np.abs(spec.frequency_hz - F_M))
    assert spec.density[0, line] > 20 * spec.density[0, 0]  # the kicked line stands out
    tone = np.argmin(np.abs(spec.frequency_hz - TONE_HZ))
    assert spec.coherent[-1, tone] > 3 * (spec.density - spec.coherent)[-1, tone]
    assert spec.coherent[0, tone] < 1e-6 * spec.coherent[-1, tone]  # the probe's own tone


def sideband_area(spec):
    """Per window: the density summed over ±3 bins of the anti-Stokes line, floor removed."""
    f, size = spec.frequency_hz, spec.window_samples
    band = np.abs(f - F_M) <= 3 * FS / size
    floor = np.median(spec.density[:, np.abs(f) > 0.6 * FS / 2], axis=1)
    return (spec.density[:, band] - floor[:, None]).sum(axis=1)


def test_integrated_sideband_power_follows_the_occupation_transient():
    """Area of the anti-Stokes line ∝ n(t), calibrated on each segment's steady state."""
    cool_s, probe_s, size = 2e-4, 1e-3, 64  # windows of 32 µs: short against 1/Γ_eff
    changes = ({}, PROBE)
    plan = plan_protocol(make([{"duration_s": cool_s}, {"duration_s": probe_s,
                                                        "changes": PROBE}]))
    spec = expected_spectrogram(plan, window_samples=size, hop_samples=16)
    area = sideband_area(spec)
    modes = [steady_state(seg.system).modes[0] for seg in plan.segments]
    per_phonon = []
    for change, mode in zip(changes, modes, strict=True):
        alone = plan_protocol(make([{"duration_s": 1e-4, "changes": change}], start="steady"))
        per_phonon.append(sideband_area(expected_spectrogram(
            alone, window_samples=size))[0] / mode.occupation)
    w2 = taper("hann", size) ** 2
    w2 /= w2.sum()
    b = plan.segments[1].first
    n_switch = plan.timeline.occupation[plan.timeline.segment == 1][0, 0]
    settled = 20 / (2 * np.pi * 600e3) * FS  # the cavity's transient at the start, samples
    checked = 0
    for k, s in enumerate(spec.starts):
        times = (s + np.arange(size)) / FS
        if s >= b:  # re-heating at Γm from the cooled occupation
            k_seg, n_i, t = 1, n_switch, times - b / FS
        elif s + size <= b and s > settled:  # cooling from the bath at Γ_eff
            k_seg, n_i, t = 0, 50.0, times
        else:
            continue
        n_f, gamma = modes[k_seg].occupation, modes[k_seg].effective_linewidth_hz
        n = n_f + (n_i - n_f) * np.exp(-2 * np.pi * gamma * t)
        assert area[k] / per_phonon[k_seg] == pytest.approx(np.dot(w2, n),
                                                            rel=WEAK_COUPLING_RTOL), (k, s)
        checked += 1
    assert checked > 40
    assert modes[0].effective_linewidth_hz > 3 * GAMMA_M_HZ  # a real cooling step


def test_bad_inputs_are_refused_with_the_name_and_the_expectation():
    plan = plan_protocol(make([{"duration_s": 1e-4}]))
    with pytest.raises(InputError, match="window_samples = 1; expected an integer from 2"):
        expected_spectrogram(plan, window_samples=1)
    with pytest.raises(InputError, match="hop_samples = 0"):
        expected_spectrogram(plan, window_samples=8, hop_samples=0)
    with pytest.raises(InputError, match="block_samples"):
        expected_sideband_power(plan, F_M, 10**9)
    with pytest.raises(InputError, match="frequency_hz"):
        expected_sideband_power(plan, float("nan"), 10)


def test_protocol_figure_draws_the_expected_sideband_power(tmp_path):
    from simulator.records.protocol_generate import generate_protocol_record
    from simulator.report.protocol_plots import plot_protocol

    scenario = make([{"duration_s": 2e-4, "excite_phonons": 3e4},
                     {"duration_s": 4e-4, "changes": PROBE}])
    record, timeline = generate_protocol_record(scenario, seed=4)
    path = plot_protocol(record, timeline, tmp_path / "protocol.png", scenario=scenario)
    assert path.stat().st_size > 10_000
    # where the ring-down dominates, the measured blocks sit on the expectation
    block = 40
    _, measured = demodulated_power(record.shot_noise_units(), FS, F_M, block)
    _, expected, coherent = expected_sideband_power(plan_protocol(scenario, seed=4), F_M,
                                                    block)
    loud = coherent > 100 * (expected - coherent)
    assert loud.sum() >= 5
    assert np.allclose(measured[loud] / expected[loud], 1.0, atol=0.3)
