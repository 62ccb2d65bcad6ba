"""The phase-modulation calibration tone: lines in spectra, a sinusoid in records, g0.

Sources: Gorodetsky, Schliesser, Anetsberger, Deléglise, Kippenberg, Opt.
Express 18, 23236 (2010) (the method); input-output theory for the tone's
reflection (Gardiner and Collett, Phys. Rev. A 31, 3761 (1985)).
"""

import numpy as np
import pytest
from conftest import make_scenario, mode, scenario_with_coupling

from simulator.analysis.calibration import (
    Device,
    bin_correlation,
    calibrate_coupling,
    tone_power,
)
from simulator.analysis.psd import PSDEstimate, averaged_periodogram
from simulator.errors import InputError
from simulator.linear.spectra import heterodyne_spectrum, homodyne_spectrum
from simulator.linear.steady_state import steady_state
from simulator.model.operating_point import operating_point
from simulator.records.generate import plan_record
from simulator.scenario.loader import scenario_from_dict
from simulator.workflows.record import simulate_record

FS, SEGMENT = 2e6, 1 << 16
BIN = FS / SEGMENT
TONE_HZ = round(325e3 / BIN) * BIN  # a bin centre near the 300 kHz mode
IF_HZ = round(0.45e6 / BIN) * BIN
G0_HZ = 200.0


def calibration_scenario(*, depth=1e-2, samples=1 << 22, coupling_hz=G0_HZ, **sections):
    """300 kHz mode, over-coupled 600 kHz cavity at Δ = −Ωm, 2 MHz samples."""
    base = scenario_with_coupling(
        g_hz=3e3 * coupling_hz / G0_HZ if coupling_hz else 3e3, linewidth_hz=600e3,
        external_linewidth_hz=480e3, detuning_hz=-300e3,
        modes=[mode(frequency_hz=300e3, linewidth_hz=100.0, coupling_hz=coupling_hz or G0_HZ,
                    bath_occupation=200.0, effective_mass_kg=1e-13)])
    data = base.to_dict()
    data["mechanics"][0]["coupling_hz"] = coupling_hz
    data["digitizer"] = {"sample_rate_hz": FS}
    data["record"] = {"duration_s": samples / FS}
    data["drive"]["calibration_tone"] = {"depth_rad": depth, "frequency_hz": TONE_HZ}
    for name, values in sections.items():
        data.setdefault(name, {}).update(values)
    return scenario_from_dict(data, source="<test>")


def reflected_tone(scenario, nu_hz):
    """Output quadratures (X, Y) per unit φ of the tone at offset ν, by hand.

    The modulator makes δa_in = −iā_in φ; the port reflects it with
    r(ω) = 1 − κ_ex/(κ/2 − i(Δ + ω)); δa_out†(ω) = [δa_out(−ω)]†, so
    X = (δa_out + δa_out†)/√2 and Y = (δa_out − δa_out†)/(i√2).
    """
    p = operating_point(scenario)
    k, kex, d, w = 2 * np.pi * np.array([p.cavity_linewidth_hz, p.external_linewidth_hz,
                                         p.detuning_effective_hz, nu_hz])
    a_in = np.sqrt(p.photon_number) * (k / 2 - 1j * d) / np.sqrt(kex)

    def r(x):
        return 1 - kex / (k / 2 - 1j * (d + x))

    out, out_dag = r(w) * (-1j * a_in), np.conj(r(-w) * (-1j * a_in))
    return np.array([out + out_dag, (out - out_dag) / 1j]) / np.sqrt(2)


def test_lines_are_the_reflected_modulation_sidebands():
    """Without optomechanical coupling the lines are η(φ0²/4)Φ|r(±Ω)|² (heterodyne)
    and η φ0² |X_θ|²/2 (homodyne), the first-order sidebands J1(φ0) ≈ φ0/2."""
    scenario = calibration_scenario(coupling_hz=0.0)
    p = operating_point(scenario)
    eta, phi0 = scenario.detection.efficiency, 1e-2
    het = heterodyne_spectrum(scenario, np.array([0.0]))
    u = np.array([1.0, 1.0j]) / np.sqrt(2)
    for line, sign in zip(het.lines, (+1, -1), strict=True):
        assert line.frequency_hz == sign * TONE_HZ
        c = 0.5 * phi0 * u @ reflected_tone(scenario, sign * TONE_HZ)
        assert line.power == pytest.approx(eta * abs(c) ** 2, rel=1e-9)
    k, kex, d, w = 2 * np.pi * np.array([p.cavity_linewidth_hz, p.external_linewidth_hz,
                                         p.detuning_effective_hz, TONE_HZ])
    r = 1 - kex / (k / 2 - 1j * (d + w))
    assert het.lines[0].power == pytest.approx(eta * phi0**2 / 4 * p.input_photon_flux
                                               * abs(r) ** 2, rel=1e-9)
    theta = 1.1
    hom = homodyne_spectrum(scenario, np.array([1e3]), quadrature_angle=theta)
    x_theta = np.array([np.cos(theta), np.sin(theta)]) @ reflected_tone(scenario, TONE_HZ)
    (line,) = hom.lines
    assert line.power == pytest.approx(eta * phi0**2 * abs(x_theta) ** 2 / 2, rel=1e-9)
    from simulator.io.spectrumfile import csv_text

    text = csv_text(het)
    assert "# line: calibration tone, upper (anti-Stokes side)" in text


@pytest.mark.parametrize("kind", ["iq", "if"])
def test_the_record_carries_the_line_power(kind):
    """The record's tone bin holds (line power × sinc²(f/fs)) / ENBW above the
    exact background (integrate-and-dump samples: the sinc² of docs/records.md, "Digitiser");
    a real if record's one-sided spectrum holds twice the two-sided line."""
    sections = {} if kind == "iq" else dict(
        detection={"intermediate_frequency_hz": IF_HZ}, record={"kind": "if"})
    scenario = calibration_scenario(samples=1 << 20, **sections)
    record = simulate_record(scenario, seed=11)
    plan = plan_record(scenario)
    psd = averaged_periodogram(record.shot_noise_units(), FS, segment_samples=SEGMENT)
    (upper, lower) = heterodyne_spectrum(scenario, np.array([0.0])).lines
    quant = plan.shot_noise_per_count**2 / 12 / FS
    for line in (upper, lower):
        if kind == "iq":
            at, fold, quant_total = line.frequency_hz, 1.0, 2 * quant
        else:  # local oscillator below: ν → −(f_IF + ν) on the FFT axis, folded to f > 0
            at, fold, quant_total = IF_HZ + line.frequency_hz, 2.0, quant
        background = fold * (plan.chain.sampled_spectrum(np.array([at]), FS, aliases=30)[0]
                             + quant_total)
        power, error = tone_power(psd, at, background)
        expected = fold * line.power * np.sinc(at / FS) ** 2  # sinc² at the record frequency
        assert abs(power - expected) < 5 * error
        assert error < 0.05 * expected


def exact_psd(scenario, window_bins=1.5):
    """The analytic spectrum on the periodogram's bins, lines at height power/ENBW."""
    f = np.fft.fftshift(np.fft.fftfreq(SEGMENT, 1 / FS))
    f = f[np.abs(np.abs(f) - 300e3) < 40e3]
    spectrum = heterodyne_spectrum(scenario, f)
    density = spectrum.total.copy()
    enbw = window_bins * BIN
    for line in spectrum.lines:
        density[np.argmin(np.abs(f - line.frequency_hz))] += line.power / enbw
    return PSDEstimate(frequency_hz=f, density=density, averages=10**6, sided="two-sided",
                       resolution_hz=BIN, noise_bandwidth_hz=enbw, window="hann")


def test_g0_from_the_exact_spectrum():
    """No noise in the estimate: g0 comes back within 0.2 % (the neglected
    optomechanical response to the tone and the weak-coupling lineshape),
    with the occupation given or inferred from the fitted linewidth; the
    tone-in-local-oscillator form (Gorodetsky's |χ_c|² response) would miss."""
    scenario = calibration_scenario()
    psd = exact_psd(scenario)
    device = Device.from_scenario(scenario)
    n = steady_state(scenario).modes[0].occupation
    for occupation in (n, None):
        cal = calibrate_coupling(psd, device, depth_rad=1e-2, tone_frequency_hz=TONE_HZ,
                                 occupation=occupation)
        assert cal.coupling_anti_stokes_hz == pytest.approx(G0_HZ, rel=2e-3)
        assert cal.coupling_stokes_hz == pytest.approx(G0_HZ, rel=2e-3)
        assert cal.occupation == pytest.approx(n, rel=2e-3)
    wrong = calibrate_coupling(psd, device, depth_rad=1e-2, tone_frequency_hz=TONE_HZ,
                               occupation=n, tone_in_local_oscillator=True)
    assert abs(wrong.coupling_anti_stokes_hz / G0_HZ - 1) > 0.05


def test_g0_recovered_from_a_record():
    """g0 from a 2.1 s synthetic record within 3 standard errors, occupation
    given (the record's truth, dynamical back-action included) or from the
    fitted linewidth; the Whittle errors are scaled for the Hann window's
    correlated bins (Σ|ρ|² = 35/18)."""
    scenario = calibration_scenario()
    record = simulate_record(scenario, seed=4)
    psd = averaged_periodogram(record.shot_noise_units(), FS, segment_samples=SEGMENT)
    device = Device.from_scenario(scenario)
    assert bin_correlation("hann") == pytest.approx(35 / 18)
    for occupation in (record.truth.occupation[0], None):
        cal = calibrate_coupling(psd, device, depth_rad=1e-2, tone_frequency_hz=TONE_HZ,
                                 occupation=occupation, sample_rate_hz=FS)
        assert abs(cal.coupling_hz - G0_HZ) < 3 * cal.coupling_error_hz
        assert cal.coupling_error_hz < 0.05 * G0_HZ


def test_calibration_refuses_what_it_cannot_use():
    scenario = calibration_scenario()
    psd = exact_psd(scenario)
    device = Device.from_scenario(scenario)
    with pytest.raises(InputError, match="not on a frequency bin"):
        calibrate_coupling(psd, device, depth_rad=1e-2, tone_frequency_hz=TONE_HZ + BIN / 3)
    real = averaged_periodogram(np.random.default_rng(0).standard_normal(4096), FS,
                                segment_samples=512)
    with pytest.raises(InputError, match="two-sided"):
        calibrate_coupling(real, device, depth_rad=1e-2, tone_frequency_hz=TONE_HZ)
    assert make_scenario().drive.calibration_tone.depth_rad == 0.0


@pytest.mark.parametrize("kind", ["iq", "if"])
def test_the_automatic_full_scale_makes_room_for_the_tone(kind):
    """A strong tone on a weak noise floor (the example scenario's, about 7σ
    of the noise) must not clip: the automatic range is the noise's 8σ plus
    the tone's amplitude, which bounds every sample of the tone's exact
    response."""
    from pathlib import Path

    from simulator.model.tone import tone_amplitude, tone_signal
    from simulator.scenario.loader import load_scenario

    path = Path(__file__).parents[1] / "scenarios" / "membrane_phase_noise.toml"
    scenario = load_scenario(path)
    if kind == "if":
        scenario = scenario.replace("detection.intermediate_frequency_hz", 4e6)
    scenario = scenario.replace("record.kind", kind)
    plan = plan_record(scenario, duration_s=0.004)
    peak = tone_amplitude(plan.chain, scenario)
    tone = tone_signal(plan.chain, scenario, plan.sample_rate_hz)(0, plan.n_samples)
    assert np.max(np.abs(tone)) <= peak
    assert peak > 2 * plan.chain.record_std(plan.discrete) / plan.chain.volts_per_unit
    assert simulate_record(scenario, seed=5, duration_s=0.004).clipped_samples == 0
