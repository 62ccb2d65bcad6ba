"""The detected tone (``detection.tone``): spectra, sidebands, records, feasibility, inspect,
sweep and plan of a scenario with several drive tones, read through one tone's receiver."""

import glob

import numpy as np
import pytest
from tone_scenarios import OMEGA_HZ, scenario_text, second_mode, tone_table

from simulator.analysis.feasibility import asymmetry_time, default_paths
from simulator.analysis.psd import averaged_periodogram
from simulator.errors import InputError, ScenarioError
from simulator.linear.record_budget import digitiser_spectrum
from simulator.linear.sidebands import sideband_summary
from simulator.linear.spectra import heterodyne_spectrum
from simulator.linear.steady_state import steady_state
from simulator.linear.weak_coupling import scattering_rates
from simulator.model.system import System
from simulator.model.units import angular
from simulator.scenario.loader import load_scenario, parse_scenario
from simulator.workflows.inspection import inspect_scenario
from simulator.workflows.record import simulate_record

DELTA_HZ = 3e5  # probes at ±(Ωm + δ): their sidebands at ∓δ, 1.5 κ off resonance
PROBE_PHOTONS = 2e3


def probes(detected="drive", drive_photons=1e4):
    """Cooling drive at −Ωm and two equal probes at ±(Ωm + δ) (Weinstein et al. 2014)."""
    text = scenario_text(drive_photons=drive_photons, extra=(
        tone_table("red", PROBE_PHOTONS, -(OMEGA_HZ + DELTA_HZ))
        + tone_table("blue", PROBE_PHOTONS, OMEGA_HZ + DELTA_HZ)))
    return parse_scenario(text).replace("detection.tone", detected)


def weak_coupling_areas(system):
    """(anti-Stokes, Stokes) photon flux of the detected tone k's sidebands leaving the
    port: (κex/κ) A∓,k · (n, n + 1), n the occupation set by every tone. Marquardt,
    Chen, Clerk & Girvin, PRL 99, 093902 (2007), Eqs. (3)–(5) for A∓."""
    point = system.detected.point
    n = steady_state(system).modes[0].occupation
    kappa, kappa_ex, g, delta, om = angular([point.cavity_linewidth_hz,
                                             point.external_linewidth_hz,
                                             point.modes[0].coupling_rate_hz,
                                             point.detuning_effective_hz, OMEGA_HZ])
    down, up = scattering_rates(g=g, kappa=kappa, detuning=delta, frequency=om)
    return kappa_ex / kappa * down * n, kappa_ex / kappa * up * (n + 1)


# -- validation -------------------------------------------------------------------------

@pytest.mark.parametrize("tone", ["drive", "red", "blue"])
def test_detected_sidebands_match_the_weak_coupling_rates(tone):
    """Each tone's lines carry that tone's rates times the occupation all tones set."""
    system = System(probes(tone))
    summary = sideband_summary(system, at_digitiser=False)[0]
    anti_stokes, stokes = weak_coupling_areas(system)
    # beyond weak coupling: order (2g/κ)² = 2.5e-3 for the drive
    assert summary.anti_stokes.area_above_floor == pytest.approx(anti_stokes, rel=1e-2)
    assert summary.stokes.area_above_floor == pytest.approx(stokes, rel=1e-2)


def test_weak_coupling_line_is_the_spectrum_above_its_floor():
    """The blue probe's Stokes line at +δ from resonance, integrated over ±300 widths
    of the exact heterodyne spectrum (floor taken at the window's edges), against the
    closed form: an independent check of the residue behind the summary."""
    system = System(probes("blue"))
    width = steady_state(system).modes[0].effective_linewidth_hz
    centre = steady_state(system).modes[0].effective_frequency_hz
    f = -centre + np.linspace(-300 * width, 300 * width, 60001)
    s = heterodyne_spectrum(system, f).total
    floor = np.interp(f, f[[0, -1]], s[[0, -1]])
    area = np.trapezoid(s - floor, f)
    lorentz_tails = 2 / (np.pi * 600)  # the share of a Lorentzian beyond ±300 widths
    assert area == pytest.approx(weak_coupling_areas(system)[1] * (1 - lorentz_tails),
                                 rel=2e-2)


def test_two_probes_read_the_asymmetry_through_one_filter():
    """Weinstein et al., PRX 4, 041003 (2014): the red probe's anti-Stokes line and the
    blue probe's Stokes line both sit δ from resonance, so with equal probe photons the
    ratio of their areas is n/(n + 1) without correcting for the cavity filter."""
    red = sideband_summary(System(probes("red")), at_digitiser=False)[0]
    blue = sideband_summary(System(probes("blue")), at_digitiser=False)[0]
    n = red.steady_state_occupation
    ratio = red.anti_stokes.area_above_floor / blue.stokes.area_above_floor
    assert ratio == pytest.approx(n / (n + 1), rel=1e-2)


def test_record_welch_estimate_matches_the_detected_tone_digitiser_spectrum():
    """The blue probe's record: averaged periodogram against its digitiser spectrum
    (Nørrelykke & Flyvbjerg, Rev. Sci. Instrum. 81, 075103 (2010): each bin is the
    spectrum times a Gamma(K)/K variate). The record file states the detected tone."""
    fs, segment, samples = 12.5e6, 4096, 1 << 17
    scenario = (probes("blue", drive_photons=1.6e5).replace("digitizer.sample_rate_hz", fs)
                .replace("record.duration_s", samples / fs))
    record = simulate_record(scenario, seed=11, progress=False)
    assert record.truth.calibration["detected_tone"] == "blue"
    assert record.truth.calibration["detected_tone_frequency_hz"] == pytest.approx(
        6e9 + 2 * OMEGA_HZ + DELTA_HZ, rel=1e-9)  # the cavity sits Ωm above the drive
    psd = averaged_periodogram(record.shot_noise_units(), fs, segment_samples=segment)
    keep = (np.abs(psd.frequency_hz) > 0) & (np.abs(psd.frequency_hz) < 0.49 * fs)
    f = psd.frequency_hz[keep][::3]
    ratio = psd.density[keep][::3] / digitiser_spectrum(System(scenario), f).total
    k, m = psd.averages, ratio.size
    assert abs(ratio.mean() - 1.0) < 5.0 / np.sqrt(k * m)
    z = (k * np.sum((ratio - 1.0) ** 2) - m) / np.sqrt(m * (2.0 + 6.0 / k))
    assert abs(z) < 5.0


# -- the one-tone path ------------------------------------------------------------------

@pytest.mark.parametrize("path", sorted(glob.glob("scenarios/*.toml")))
def test_one_tone_scenarios_are_their_own_detected_view(path):
    """Without [[tones]] the receiver sees the very point and model it saw before."""
    system = System(load_scenario(path))
    if system.several_tones:
        assert system.detected is not system and system.detected.detected is system.detected
        return
    assert system.detected is system
    assert system.scenario.detection.tone == "drive"


def test_a_silent_tone_leaves_the_drive_spectra_unchanged():
    """A tone of zero power on another mode: the drive's spectra at the port and at the
    digitiser are the one-tone ones (the extra field is uncoupled vacuum)."""
    base = System(parse_scenario(scenario_text()))
    silent = System(parse_scenario(scenario_text(
        extra=second_mode() + tone_table("idle", 0.0, 0.0, cavity_mode="idler"))))
    f = np.linspace(-6e6, 6e6, 301)
    for spectrum in (heterodyne_spectrum, digitiser_spectrum):
        assert spectrum(silent, f).total == pytest.approx(spectrum(base, f).total, rel=1e-9)


# -- what the stages report -------------------------------------------------------------

def test_probe_on_a_second_mode_takes_its_coupling_and_frequency():
    text = scenario_text(drive_photons=1e4, extra=second_mode(g0_hz=30.0)
                         + tone_table("probe", 4e3, 0.0, cavity_mode="idler",
                                      frequency_hz=7e9))
    scenario = parse_scenario(text).replace("detection.tone", "probe")
    system = System(scenario)
    seen = system.detected.point
    assert seen.drive_frequency_hz == pytest.approx(7e9, rel=1e-12)
    assert seen.modes[0].coupling_rate_hz == pytest.approx(30.0 * np.sqrt(4e3), rel=1e-9)
    assert default_paths(scenario)[1] == "couplings[0].coupling_hz"
    summary = sideband_summary(system, at_digitiser=False)[0]
    anti_stokes, stokes = weak_coupling_areas(system)
    assert summary.anti_stokes.area_above_floor == pytest.approx(anti_stokes, rel=1e-2)
    assert summary.stokes.area_above_floor == pytest.approx(stokes, rel=1e-2)
    assert np.isfinite(asymmetry_time(system).duration_s)


def test_inspect_lists_every_tone():
    report = inspect_scenario(System(probes("blue")))
    data = report.to_dict()
    assert [t["name"] for t in data["tones"]] == ["drive", "red", "blue"]
    assert [t["detected"] for t in data["tones"]] == [False, False, True]
    damping = sum(t["modes"][0]["optical_damping_hz"] for t in data["tones"])
    assert data["modes"][0]["optical_damping_hz"] == pytest.approx(damping, rel=1e-12)
    assert "tone blue on cavity mode cavity   (detected)" in report.to_text()


def test_an_unknown_detected_tone_is_refused_with_its_key():
    with pytest.raises(ScenarioError, match="names no drive tone") as info:
        probes("green")
    assert info.value.key == "detection.tone"


def test_what_is_still_unsupported_is_refused():
    system = System(probes("blue"))
    from simulator.master.steady import master_steady_state

    with pytest.raises(InputError, match="does not yet support several drive tones"):
        master_steady_state(system)
    marked = parse_scenario(probes("blue").to_toml()
                            + "[drive.calibration_tone]\ndepth_rad = 0.01\nfrequency_hz = 3e5\n")
    with pytest.raises(InputError, match="calibration tone"):
        heterodyne_spectrum(marked)
    assert steady_state(marked).modes[0].occupation > 0  # the steady state keeps it


def test_tone_paths_are_sweepable_and_plannable():
    """Each tone's power and detuning are scenario paths; the sweep and the planner
    evaluate them (a probe's detuning moved changes its own lines only)."""
    from simulator.workflows.plan import coordinates_of, evaluate_plan_point
    from simulator.workflows.sweep import evaluate_point, sweep_points

    scenario = probes("blue")
    row = evaluate_point(scenario.to_toml(), [("tones[1].detuning_hz", OMEGA_HZ + 2 * DELTA_HZ),
                                              ("tones[1].power_w", 2 * scenario.tones[1].power_w)])
    assert row["error"] == "" and row["stable"] == 1.0
    plan_text = scenario.to_toml() + """
[plan]
objective = "asymmetry_time"
max_power_w = 1e-10
[plan.parameters]
"tones[1].power_w" = { start = 1e-12, stop = 1e-9, num = 4, log = true }
"""
    planned = parse_scenario(plan_text)
    assert [c.path for c in coordinates_of(planned)] == ["tones[1].power_w"]
    swept = parse_scenario(scenario.to_toml() + """
[sweep]
[sweep.parameters]
"tones[0].detuning_hz" = { start = -1.2, stop = -1.1, num = 3, unit = "mechanics[0].frequency_hz" }
""")
    values = [dict(a)["tones[0].detuning_hz"] for _, a in sweep_points(swept)]
    assert values == pytest.approx([-1.2 * OMEGA_HZ, -1.15 * OMEGA_HZ, -1.1 * OMEGA_HZ])
    outcome = evaluate_plan_point(planned, planned.plan, [("tones[1].power_w", 1e-11)])
    assert np.isfinite(outcome.objective) and outcome.violations["max_power_w"] < 0
    # the tones' powers add up: the blue probe below the limit, with the others above it
    louder = evaluate_plan_point(planned, planned.plan, [("tones[1].power_w", 5e-11)])
    assert louder.violations["max_power_w"] > 0


def test_the_tutorial_table_of_schemes_is_current():
    """docs/tutorial-feasibility.md §4b quotes each scheme's occupation and asymmetry time
    for the bundled examples; recomputed here to the digits it prints."""
    import dataclasses
    import re

    text = open("docs/tutorial-feasibility.md", encoding="utf-8").read()
    files = {"drum": "scenarios/drum_two_probes.toml", "ring": "scenarios/ring_two_modes.toml"}
    tones = {"cooling tone alone": None, "cooling tone, probes on (drive)": "drive",
             "red probe": "red_probe", "blue probe": "blue_probe",
             "resonant probe on the second mode": "probe"}
    rows = re.findall(r"^\| (drum|ring) \| ([^|]+) \| ([\d.]+) \| ([^|]+) s \|$", text, re.M)
    assert len(rows) == 6
    for device, scheme, occupation, time_text in rows:
        scenario = load_scenario(files[device])
        tone = tones[scheme.strip()]
        if tone is None:
            scenario = dataclasses.replace(scenario, tones=(), cavity_modes=(), couplings=())
            tone = "drive"
        system = System(scenario.replace("detection.tone", tone))
        mantissa, _, power = time_text.replace(" ", "").partition("×10")
        quoted = float(mantissa) * 10.0 ** int(power.translate(str.maketrans(
            "⁰¹²³⁴⁵⁶⁷⁸⁹", "0123456789"))) if power else float(mantissa)
        assert steady_state(system).modes[0].occupation == pytest.approx(
            float(occupation), abs=6e-4 * float(occupation) + 5e-4)
        assert asymmetry_time(system).duration_s == pytest.approx(quoted, rel=0.05)


def test_the_regime_verdict_checks_every_tone_cavity_mode():
    """A strong single-photon coupling on the cooling tone's mode makes the linear engine
    marginal there; reading the probe on the other mode does not hide it."""
    from simulator.master.regime import regime_verdict

    scenario = load_scenario("scenarios/ring_two_modes.toml").replace(
        "mechanics[0].coupling_hz", 4e5).replace("drive.power_w", 1e-9)
    system = System(scenario)
    own = regime_verdict(system.detected.point)
    assert own.level == "linear"  # the probe's mode alone
    assert inspect_scenario(system).regime.level != "linear"
