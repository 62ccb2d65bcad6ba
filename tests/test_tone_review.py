"""What `inspect` reports for the bundled several-tone scenarios, read as an experimenter.

Each test pins one number the report shows against the scenario or against
another report of the same device: the tones recorded together bound the
occupation whatever tone a single receiver would sit at; the operating
point's power is that of the tone (or pair) whose photons it shows.
"""

import pathlib

import pytest

from simulator.model.units import photon_energy_j
from simulator.scenario.loader import load_scenario, parse_scenario
from simulator.workflows.inspection import inspect_scenario

SCENARIOS = pathlib.Path(__file__).resolve().parent.parent / "scenarios"
PROBES = SCENARIOS / "drum_two_probes.toml"
PAIR = SCENARIOS / "drum_bae_microwave.toml"
ONE_TONE = 'tone = "blue_probe"            # the receiver\'s reference sits at this tone'


def _both_probes_recorded():
    """drum_two_probes.toml with both probes demodulated (detection.tones)."""
    text = PROBES.read_text()
    assert ONE_TONE in text
    return parse_scenario(text.replace(ONE_TONE, 'tones = ["red_probe", "blue_probe"]'),
                          source=str(PROBES))


def test_joint_bound_does_not_depend_on_which_tone_a_single_receiver_names():
    # The sets compared (each probe alone, both together) are fixed by the
    # tones, not by the receiver: listing both probes must give the bounds the
    # one-receiver file gives (the loader used to refuse the per-tone views).
    single = inspect_scenario(load_scenario(PROBES)).tone_sets
    listed = inspect_scenario(_both_probes_recorded()).tone_sets
    assert [b.tones for b in listed] == [b.tones for b in single]
    for a, b in zip(listed, single, strict=True):
        assert a.error_one_second == pytest.approx(b.error_one_second, rel=1e-9)
    # both probes together resolve n far better than either alone (correlated lines)
    assert listed[-1].error_one_second < 0.5 * min(b.error_one_second for b in listed[:-1])


def test_setting_one_detected_tone_by_path_clears_the_list():
    listed = _both_probes_recorded()
    one = listed.replace("detection.tone", "red_probe")
    assert (one.detection.tone, one.detection.tones) == ("red_probe", None)
    back = one.replace("detection.tones", ["red_probe", "blue_probe"])
    assert (back.detection.tone, back.detection.tones) == ("drive", ("red_probe", "blue_probe"))


def test_operating_point_power_is_that_of_the_detected_tone():
    # drum_two_probes.toml shows the blue probe's photons (about 2,000); the
    # power beside them must be the blue probe's 13.7 pW, not the cooling tone's 120 pW.
    report = inspect_scenario(load_scenario(PROBES))
    d = report.to_dict()
    blue = next(t for t in report.scenario.tones if t.name == "blue_probe")
    assert d["drive_power_w"] == pytest.approx(blue.power_w, rel=1e-12)
    assert "drive power            1.37e-11 W" in report.to_text()
    # the photons and the power belong together: n = κex Φ/(κ²/4 + Δ²)
    p = report.point
    flux = d["drive_power_w"] / photon_energy_j(p.drive_frequency_hz)
    lorentz = (p.cavity_linewidth_hz**2 / 4 + p.detuning_effective_hz**2)
    assert d["photon_number"] == pytest.approx(
        p.external_linewidth_hz * flux / (2 * 3.141592653589793) / lorentz, rel=1e-9)


def test_pair_power_is_both_tones_and_an_unstable_pair_is_named_as_the_pair():
    scenario = load_scenario(PAIR)
    d = inspect_scenario(scenario).to_dict()
    both = scenario.drive.power_w + scenario.tones[0].power_w
    assert d["drive_power_w"] == pytest.approx(both, rel=1e-6)  # Ωm/ω̄ ~ 1e-3, balanced
    # an upper tone stronger than the lower anti-damps the drum: still the pair's point
    unstable = inspect_scenario(scenario.replace("tones[0].power_w", 1.8e-10))
    assert not unstable.stability.stable
    header = unstable.to_text().splitlines()[2]
    assert header.startswith("operating point (the pair at its mean frequency")
    assert "None" not in header


def test_spectrum_axes_name_the_tone_the_receiver_sits_at():
    from simulator.linear.record_budget import digitiser_spectrum
    from simulator.linear.spectra import heterodyne_spectrum

    # one tone: the words are unchanged
    one = load_scenario(SCENARIOS / "membrane_4k.toml")
    assert "offset from the drive" in digitiser_spectrum(one).axis
    # drum_two_probes records the blue probe: its lines are about that tone
    probes = load_scenario(PROBES)
    for spectrum in (digitiser_spectrum(probes), heterodyne_spectrum(probes)):
        assert "offset from tone blue_probe" in spectrum.axis
        assert "the drive" not in spectrum.axis
    # a pair's record holds X1's line at zero offset, no sideband pair
    pair = load_scenario(PAIR)
    for spectrum in (digitiser_spectrum(pair), heterodyne_spectrum(pair)):
        assert spectrum.axis.endswith("offset from the pair's mean frequency (X1's line at 0)")


def _probes_sharing_a_noisy_laser():
    """drum_two_probes.toml with both probes made by the drive's laser, whose broad
    phase-noise floor reaches the other tones' sidebands (an invented laser)."""
    text = PROBES.read_text().replace(
        'detuning_reference = "effective"\n',
        'detuning_reference = "effective"\n\n[drive.phase_noise]\nfloor_rad2_per_hz = 1e-14\n'
        'floor_low_hz = 1e5\nfloor_high_hz = 2e7\n', 1)
    for detuning in ("detuning_hz = -6.4e6", "detuning_hz = 6.4e6 "):
        assert detuning in text
        text = text.replace(detuning, f'noise_source = "drive"\n{detuning}', 1)
    return parse_scenario(text, source=str(PROBES))


def test_tone_validity_warnings_are_in_the_report_once(recwarn):
    from simulator.model.tone_validity import ToneNoiseWarning

    scenario = _probes_sharing_a_noisy_laser()
    assert [t.noise_source for t in scenario.tones] == ["drive", "drive"]
    d = inspect_scenario(scenario).to_dict()
    crossed = [w for w in d["warnings"] if "phase noise of tones on one cavity mode" in w]
    assert len(crossed) == 1  # in the JSON a script reads, once
    assert not [w for w in recwarn if issubclass(w.category, ToneNoiseWarning)]
    # the shared laser heats the drum above the quiet file's occupation
    quiet = inspect_scenario(load_scenario(PROBES)).to_dict()
    assert d["modes"][0]["occupation"] > quiet["modes"][0]["occupation"] + 0.05


def test_inspect_master_linearised_takes_every_tone_field():
    # `inspect --master --master-model linearised` with several tones: the
    # Lindblad equation with one factor per tone field is the linear model's
    # Langevin equations, so each occupation is the Lyapunov one up to truncation
    # (docs/physics.md §13); it used to be refused as "not yet supported".
    pytest.importorskip("qutip")
    from simulator.master.report import comparison_text, master_comparison
    from tests.tone_scenarios import OMEGA_HZ, scenario_text, second_mode, tone_table

    scenario = parse_scenario(scenario_text(
        drive_photons=2e4, bath_occupation=10.0, extra=second_mode(bath_occupation=0.1)
        + tone_table("pump", 2e4, -OMEGA_HZ, "idler", frequency_hz=7e9)))
    report = inspect_scenario(scenario, feasibility=False)
    data = master_comparison(report, kind="linearised")
    rows = {r["quantity"]: r for r in data["rows"]}
    assert set(rows) == {"tone drive: field occupation", "tone pump: field occupation",
                         "drum: occupation"}
    drum = rows["drum: occupation"]
    assert drum["linear"] == pytest.approx(report.steady.modes[0].occupation, rel=1e-9)
    assert drum["master"] == pytest.approx(drum["linear"], rel=1e-3)
    # the idler's thermal input (n_c = 0.05 through κ0) shows in the pump's field
    assert rows["tone pump: field occupation"]["master"] > 10 * rows[
        "tone drive: field occupation"]["master"]
    assert "one factor per tone field" in comparison_text(data)


def test_plan_of_the_recorded_tones_time_reports_in_seconds(tmp_path):
    # `noisechain plan` with objective "recorded_tones_time" stopped with a
    # KeyError after the search; its result is the joint T of the probes, in s.
    from simulator.analysis.joint_feasibility import joint_bound
    from simulator.report.plan_plots import plot_plan
    from simulator.workflows.plan import plan_scenario

    planned = parse_scenario(PROBES.read_text() + """
[plan]
objective = "recorded_tones_time"
max_power_w = 2e-10
[plan.parameters]
"tones.red_probe.power_w" = { start = 1e-11, stop = 3e-11, num = 2 }
""", source=str(PROBES))
    result = plan_scenario(planned, refine=False)
    data = result.to_dict()
    assert data["units"] == "s"
    assert "recorded together" in data["objective_description"]
    text = result.to_text()
    assert "red_probe and blue_probe" in text
    # the best power is the range's top: no constraint binds, but it is no interior optimum
    assert "interior" not in text and "edge of the searched range" in text
    # the optimum is the joint bound's T at the power found (more red-probe power: shorter)
    best = result.found.best[0]
    assert best == pytest.approx(3e-11)
    moved = planned.replace("tones.red_probe.power_w", best)
    expected = joint_bound(moved, ("red_probe", "blue_probe")).duration_s
    assert result.found.best_outcome.objective == pytest.approx(expected, rel=1e-6)
    plot_plan(data, tmp_path / "plan.png")


def test_master_equation_refuses_a_pair_with_its_reason():
    # the pair's model has one cavity field at the mean frequency: the per-tone
    # master equation would look for a field per tone (a KeyError before)
    from simulator.errors import InputError
    from simulator.master.steady import master_steady_state
    from simulator.master.tone_fields import tone_fields_steady_state

    pair = load_scenario(PAIR)
    for solve in (tone_fields_steady_state, lambda s: master_steady_state(s, "linearised")):
        with pytest.raises(InputError, match="back-action-evading pair is a model of its own"):
            solve(pair)


def test_each_tone_shows_its_own_field_occupation():
    # ring_two_modes.toml: the operating point is the resonant probe's, but the
    # "cavity occupation" is the cooling tone's field; each tone block now gives
    # its own. A resonant probe's field holds the photons it scatters off the
    # motion, in weak coupling with both lines narrow against κ:
    # ⟨δa†δa⟩ = g² [n + (n + 1)] / (κ²/4 + Ωm²), the two motional sidebands at ±Ωm
    # seen through one Lorentzian (our derivation from the linearised Langevin
    # equation a(ω) = i g x(ω)/(κ/2 − i(Δ + ω)); Aspelmeyer, Kippenberg &
    # Marquardt, Rev. Mod. Phys. 86, 1391 (2014), Sec. VII, for the equation).
    report = inspect_scenario(load_scenario(SCENARIOS / "ring_two_modes.toml"))
    d = report.to_dict()
    rows = {r["name"]: r for r in d["tones"]}
    probe, drive = rows["probe"], rows["drive"]
    assert drive["field_occupation"] == pytest.approx(d["cavity_occupation"], rel=1e-12)
    n = d["modes"][0]["occupation"]
    g = probe["modes"][0]["g_hz"]
    kappa = report.point.cavity_linewidth_hz  # the detected tone's (readout) mode
    omega = d["modes"][0]["frequency_hz"]
    closed = g**2 * (2 * n + 1) / (kappa**2 / 4 + omega**2)
    assert probe["field_occupation"] == pytest.approx(closed, rel=0.01)
    assert probe["field_occupation"] < 0.01 * d["cavity_occupation"]
    assert ("cavity occupation      0.837136 (fluctuations about the mean field; the drive's "
            "field)") in report.to_text()
    # a pair has one field: no per-tone field occupation
    pair = inspect_scenario(load_scenario(PAIR)).to_dict()
    assert all("field_occupation" not in r for r in pair["tones"])


def test_record_summary_names_whose_cavity_occupation_it_prints(tmp_path, capsys):
    # the record of ring_two_modes.toml is the resonant probe's; the cavity
    # occupation its summary prints is the cooling tone's field (0.84, the probe's
    # own field holds about 0.0014)
    from simulator.cli.parser import main

    ring = SCENARIOS / "ring_two_modes.toml"
    assert main(["record", str(ring), "--out", str(tmp_path / "r.h5"), "--duration", "2e-6",
                 "--quiet"]) == 0
    line = next(x for x in capsys.readouterr().out.splitlines() if "cavity occupation" in x)
    drive = inspect_scenario(load_scenario(ring), feasibility=False).steady.cavity_occupation
    assert line.strip() == f"cavity occupation: {drive:.4g} (the drive's field)"


def test_asymmetry_time_is_smooth_in_the_probe_detuning():
    # The blue probe's anti-Stokes line is 2.4e-6 above the floor, its Stokes line
    # 5000 times stronger: the lineshape's floor was read partly at −Ω − 30γ, on
    # the Stokes line's tail (about as high as the anti-Stokes peak), so the
    # area per quantum came from two nearly cancelling differences and the time
    # jumped by half at δ = 400 kHz against 10 kHz either side. The device
    # changes by about 1 % there: the bound must too.
    from simulator.analysis.feasibility import asymmetry_time

    scenario = load_scenario(PROBES)
    times = [asymmetry_time(scenario.replace("tones.blue_probe.detuning_hz", d)).duration_s
             for d in (6.39e6, 6.40e6, 6.41e6)]
    assert times[0] < times[1] < times[2]  # further from resonance: weaker Stokes line
    assert times[2] / times[0] == pytest.approx(1.0, abs=0.05)
    # the lineshape's floor is the record's floor under the anti-Stokes line
    at = asymmetry_time(scenario)
    assert at.lineshape["floor"] == pytest.approx(1.0, abs=1e-5)


def test_report_answer_gives_the_joint_bound_of_the_recorded_tones():
    # a file recording both probes: the answer's table holds the first tone's record
    # alone (σ_n 7.8); the pair's joint bound (σ_n 1.07) must be in the answer too
    from simulator.report.summary import at_a_glance

    report = inspect_scenario(_both_probes_recorded())
    data = report.to_dict()
    joint = report.tone_sets[-1]
    assert joint.tones == ("red_probe", "blue_probe")
    page = at_a_glance(data)
    assert f"error on n after 1 s {joint.error_one_second:.4g}" in page
    assert f"after {joint.duration_s:.4g} s" in page
    assert joint.error_one_second < data["feasibility"][0]["occupation_error_1s"] / 5
