"""The calibration tone beside further drive tones, recorded by the drive's receiver.

The tone modulates the drive's phase, so its lines sit at ±Ω in the drive's
own output field: the drive's receiver sees them as with one tone, while the
mechanics it also drives carries the damping and spring of every tone. A
second tone on a second cavity mode cools the same mechanical mode here.
Checks: without optomechanical coupling the lines are the reflected
modulation sidebands η(φ0²/4)Φ|r(±Ω)|², whatever else drives the device
(input-output theory: Gardiner and Collett, Phys. Rev. A 31, 3761 (1985));
with it, g0 comes back from the drive's sideband areas against the lines
with the occupation set by both tones (the frequency-modulation calibration
of Gorodetsky, Schliesser, Anetsberger, Deléglise, Kippenberg, Opt. Express
18, 23236 (2010)); the record carries the line power; another tone's
receiver is refused.
"""

import warnings

import numpy as np
import pytest
from test_calibration_tone import FS, G0_HZ, SEGMENT, TONE_HZ, calibration_scenario, exact_psd

from simulator.analysis.calibration import Device, calibrate_coupling, tone_power
from simulator.analysis.psd import averaged_periodogram
from simulator.errors import InputError
from simulator.linear.spectra import heterodyne_spectrum
from simulator.linear.steady_state import steady_state
from simulator.model.system import System
from simulator.scenario.loader import scenario_from_dict


def with_cooling_tone(scenario, *, detected="drive", g0_hz=150.0):
    """``scenario`` with a second cavity mode (1 % higher in frequency, same linewidths)
    holding a red-sideband tone of the drive's power, coupled to the mechanical mode."""
    data = scenario.to_dict()
    frequency = System(scenario).point.drive_frequency_hz * 1.01
    data["cavity_modes"] = [{"name": "idler", "frequency_hz": frequency,
                             "linewidth_hz": 600e3, "external_linewidth_hz": 480e3}]
    data["couplings"] = [{"cavity_mode": "idler", "mechanics": data["mechanics"][0]["name"],
                          "coupling_hz": g0_hz}]
    data["tones"] = [{"name": "cool", "cavity_mode": "idler",
                      "power_w": data["drive"]["power_w"], "detuning_hz": -300e3}]
    data["detection"]["tone"] = detected
    return scenario_from_dict(data, source="<test>")


def quiet(function, *args, **kwargs):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # tone-spacing advisories of the two modes
        return function(*args, **kwargs)


def test_lines_are_the_reflected_sidebands_beside_another_tone():
    """No coupling: the lines are η(φ0²/4)Φ|r(±Ω)|², r(ω) = 1 − κex/(κ/2 − i(Δ + ω)),
    to 10⁻⁹, the second tone changing nothing of the drive's field."""
    scenario = with_cooling_tone(calibration_scenario(coupling_hz=0.0), g0_hz=0.0)
    point = System(scenario).detected.point
    k, kex, d = 2 * np.pi * np.array([point.cavity_linewidth_hz, point.external_linewidth_hz,
                                      point.detuning_effective_hz])
    eta = scenario.detection.efficiency
    lines = quiet(heterodyne_spectrum, scenario, np.array([0.0])).lines
    for line, sign in zip(lines, (+1, -1), strict=True):
        r = 1 - kex / (k / 2 - 1j * (d + sign * 2 * np.pi * TONE_HZ))
        assert line.frequency_hz == sign * TONE_HZ
        assert line.power == pytest.approx(eta * 1e-4 / 4 * point.input_photon_flux
                                           * abs(r) ** 2, rel=1e-9)


def test_g0_from_the_drive_record_with_a_cooling_tone():
    """The cooling tone lowers the occupation (135 → 115) and widens the line; the
    drive's sideband areas against the calibration lines still give g0 within 0.2 %
    (as with one tone: the neglected response to the tone and the weak-coupling
    lineshape), with the occupation of both tones given."""
    scenario = with_cooling_tone(calibration_scenario())
    alone = steady_state(calibration_scenario()).modes[0].occupation
    n = quiet(steady_state, scenario).modes[0].occupation
    assert n < 0.9 * alone
    device = Device.from_scenario(scenario)
    assert device == Device.from_scenario(calibration_scenario())  # the drive's own view
    cal = calibrate_coupling(quiet(exact_psd, scenario), device, depth_rad=1e-2,
                             tone_frequency_hz=TONE_HZ, occupation=n)
    assert cal.coupling_anti_stokes_hz == pytest.approx(G0_HZ, rel=2e-3)
    assert cal.coupling_stokes_hz == pytest.approx(G0_HZ, rel=2e-3)


def test_the_record_carries_the_lines():
    """A record of the drive's receiver holds each line's power × sinc²(f/fs) in its bin
    above the exact background, within 5 standard errors."""
    from simulator.records.generate import plan_record
    from simulator.workflows.record import simulate_record

    scenario = with_cooling_tone(calibration_scenario(samples=1 << 19))
    record = quiet(simulate_record, scenario, seed=5)
    plan = quiet(plan_record, scenario)
    psd = averaged_periodogram(record.shot_noise_units(), FS, segment_samples=SEGMENT)
    quantisation = 2 * plan.shot_noise_per_count**2 / 12 / FS
    for line in quiet(heterodyne_spectrum, scenario, np.array([0.0])).lines:
        background = plan.chain.sampled_spectrum(np.array([line.frequency_hz]), FS,
                                                 aliases=30)[0] + quantisation
        power, error = tone_power(psd, line.frequency_hz, background)
        expected = line.power * np.sinc(line.frequency_hz / FS) ** 2
        assert abs(power - expected) < 5 * error
        assert error < 0.1 * expected


def test_another_tones_receiver_is_refused_with_the_reason():
    scenario = with_cooling_tone(calibration_scenario(), detected="cool")
    with pytest.raises(InputError, match="lie in the drive's field.*detection.tone = \"drive\""):
        quiet(heterodyne_spectrum, scenario, np.array([0.0]))
    assert quiet(steady_state, scenario).modes[0].occupation > 0  # the steady state keeps it
