"""The microwave receiver: an amplifier chain and an IQ mixer, in volts at the digitiser.

Its record is the optical heterodyne record of the same efficiency and added
noise (the physics of the two receivers is the same phase-preserving
measurement; only the scale differs), and its scale is checked by hand: a
white input-referred noise of n + ½ quanta (n added by the amplifier, ½ the
vacuum) arrives at the digitiser as the power P = G h f (n + ½) B in a band
B (added noise referred to the amplifier's input: Clerk, Devoret, Girvin,
Marquardt, Schoelkopf, Rev. Mod. Phys. 82, 1155 (2010), Sec. V), with the
IQ convention v = I cos ωt + Q sin ωt of mean power (I² + Q²)/(2Z) (common
practice).
"""

import numpy as np
import pytest
from conftest import REPO, make_scenario, scenario_dict
from scipy import constants

from simulator.errors import ScenarioError
from simulator.model.system import System
from simulator.records.generate import plan_record
from simulator.scenario.loader import load_scenario, scenario_from_dict

MICROWAVE = {"frequency_hz": 6e9, "power_w": 1e-10, "detuning_hz": -20e6}
RECEIVER = {"receiver": "microwave", "efficiency": 0.6}
AMPLIFIER = {"amplifier_added_quanta": 12.0, "amplifier_gain_db": 70.0}


def microwave(record=None, **electronics):
    return make_scenario(drive=MICROWAVE | {"wavelength_m": None}, detection=RECEIVER,
                         electronics=AMPLIFIER | electronics, record=record or {})


def optical_equivalent(record=None):
    return make_scenario(drive=MICROWAVE | {"wavelength_m": None},
                         detection={"efficiency": 0.6},
                         electronics={"amplifier_added_quanta": 12.0}, record=record or {})


@pytest.mark.parametrize("record", [{}, {"kind": "if"}], ids=["iq", "if"])
def test_the_record_spectrum_is_the_optical_heterodyne_one(record):
    if record:
        record_if = {"intermediate_frequency_hz": 50e6}
        mw = make_scenario(drive=MICROWAVE | {"wavelength_m": None},
                           detection=RECEIVER | record_if, electronics=AMPLIFIER, record=record)
        opt = make_scenario(drive=MICROWAVE | {"wavelength_m": None},
                            detection={"efficiency": 0.6} | record_if,
                            electronics={"amplifier_added_quanta": 12.0}, record=record)
    else:
        mw, opt = microwave(), optical_equivalent()
    f = np.linspace(-60e6, 60e6, 2001)
    a, b = System(mw).chain.record_spectrum(f), System(opt).chain.record_spectrum(f)
    np.testing.assert_allclose(a, b, rtol=1e-12, atol=0)
    assert System(mw).chain.efficiency == System(opt).chain.efficiency == 0.6


def test_a_noise_temperature_is_the_added_noise_in_kelvin():
    # n_add = k_B T_N/(h f): T_N = 12 h f/k_B is exactly 12 quanta (module doc of
    # simulator.scenario.receiver; Clerk et al. 2010, Sec. V)
    t_n = 12.0 * constants.h * 6e9 / constants.k
    by_t = microwave(amplifier_added_quanta=0.0, amplifier_noise_temperature_k=t_n)
    f = np.linspace(-30e6, 30e6, 301)
    np.testing.assert_allclose(System(by_t).chain.record_spectrum(f),
                               System(microwave()).chain.record_spectrum(f), rtol=1e-12)
    assert System(by_t).chain.added_quanta == pytest.approx(12.0, rel=1e-14)


@pytest.mark.parametrize(("kind", "bands"), [("iq", 1), ("if", 2)])
def test_volts_per_quantum_against_the_power_at_the_digitiser(kind, bands):
    """P = G h f (n + ½) B from the record's voltage density, by hand.

    No drive and no coupling: the field is vacuum at every frequency, so the
    record is white, n_add + ½ quanta (the loss mixes vacuum with vacuum).
    iq: the complex I + iQ, density vpu² S_w, power ∫|V|²/(2Z) over the band.
    if: the real IF voltage, both signs of frequency, power ∫v²/Z; the IF band
    takes in the signal and the image band (bands = 2).
    """
    gain_db, z, n, band = 63.0, 75.0, 9.0, 1e5
    g, hf = 10 ** (gain_db / 10), constants.h * 6e9
    extra = {"intermediate_frequency_hz": 40e6} if kind == "if" else {}
    s = make_scenario(drive=MICROWAVE | {"wavelength_m": None, "power_w": 0.0},
                      mechanics={"coupling_hz": 0.0}, detection=RECEIVER | extra,
                      electronics={"amplifier_added_quanta": n, "amplifier_gain_db": gain_db,
                                   "impedance_ohm": z}, record={"kind": kind})
    chain = System(s).chain
    vpu = chain.volts_per_unit
    expected_vpu = np.sqrt(2 * g * z * hf) / (2.0 if kind == "if" else 1.0)
    assert vpu == pytest.approx(expected_vpu, rel=1e-14)
    centre = 40e6 if kind == "if" else 0.0
    density = chain.record_spectrum(np.linspace(centre - band / 2, centre + band / 2, 11))
    np.testing.assert_allclose(density, bands * (n + 0.5), rtol=1e-12)
    if kind == "iq":
        power = vpu**2 * density.mean() * band / (2 * z)
    else:  # the band at +f_IF and its mirror at −f_IF
        power = 2 * vpu**2 * density.mean() * band / z
    assert power == pytest.approx(bands * g * hf * (n + 0.5) * band, rel=1e-12)
    assert chain.calibration()["digitiser_watts_per_hz_per_quantum"] == pytest.approx(
        g * hf, rel=1e-14)


def test_the_record_calibration_is_in_volts_with_no_photocurrent():
    plan = plan_record(microwave(), duration_s=1e-4)
    cal = plan.truth.calibration
    assert not [k for k in cal if any(w in k for w in ("ampere", "photocurrent",
                                                       "transimpedance", "local_oscillator"))]
    assert cal["added_noise_quanta"] == 12.0 and cal["amplifier_gain_db"] == pytest.approx(70.0)
    assert cal["volts_per_shot_noise_unit"] == pytest.approx(
        np.sqrt(2 * 1e7 * 50.0 * constants.h * 6e9), rel=1e-12)
    optical = plan_record(optical_equivalent(), duration_s=1e-4).truth.calibration
    assert "local_oscillator_photocurrent_a" in optical and "transimpedance_ohm" in optical


def test_the_bundled_drum_is_its_optical_description_with_another_scale():
    drum = load_scenario(REPO / "scenarios" / "drum_microwave_mK.toml")
    data = drum.to_dict()
    data["detection"].pop("receiver")
    for key in ("amplifier_gain_db", "impedance_ohm"):
        data["electronics"].pop(key)
    optical = scenario_from_dict(data)
    f = np.linspace(-10e6, 10e6, 401)
    np.testing.assert_allclose(System(drum).chain.record_spectrum(f),
                               System(optical).chain.record_spectrum(f), rtol=1e-12)


@pytest.mark.parametrize(("detection", "electronics", "key", "words"), [
    ({"local_oscillator_power_w": 1e-2}, {}, "detection.local_oscillator_power_w",
     "sets no scale of the record"),
    ({"local_oscillator_power_dbm": 3.0}, {}, "detection.local_oscillator_power_w",
     "expected it left out"),
    ({"balanced": False}, {}, "detection.balanced", "no signal–local-oscillator beam"),
    ({}, {"transimpedance_ohm": 1e3}, "electronics.transimpedance_ohm", "no photocurrent"),
    ({}, {"current_noise_a_per_sqrt_hz": 1e-12}, "electronics.current_noise_a_per_sqrt_hz",
     "referred to its input"),
    ({"scheme": "homodyne"}, {}, "detection.scheme", 'expected "heterodyne"'),
    ({}, {"amplifier_gain_db": None}, "electronics.amplifier_gain_db",
     "expected the power gain in dB"),
    ({}, {"amplifier_added_quanta": None}, "electronics.amplifier_added_quanta",
     "amplifier_noise_temperature_k"),
    ({}, {"amplifier_added_quanta": None, "amplifier_noise_temperature_k": 0.1},
     "electronics.amplifier_noise_temperature_k", "below the quantum limit"),
    ({}, {"amplifier_noise_temperature_k": 3.5}, "electronics.amplifier_noise_temperature_k",
     "expected one of the two"),
])
def test_a_key_of_the_other_receiver_or_a_missing_one_is_refused(detection, electronics, key,
                                                                 words):
    data = scenario_dict(drive=MICROWAVE | {"wavelength_m": None},
                         detection=RECEIVER | detection, electronics=AMPLIFIER | electronics)
    with pytest.raises(ScenarioError, match=words) as info:
        scenario_from_dict(data)
    assert info.value.key == key


@pytest.mark.parametrize("key", ["amplifier_gain_db", "impedance_ohm"])
def test_microwave_keys_are_refused_for_an_optical_receiver(key):
    with pytest.raises(ScenarioError, match='only with detection.receiver = "microwave"') as info:
        make_scenario(electronics={key: 40.0})
    assert info.value.key == f"electronics.{key}"


def test_setting_the_noise_temperature_by_path_replaces_the_added_quanta():
    # the two keys stand for one quantity: a sweep over either must work
    drum = load_scenario(REPO / "scenarios" / "drum_microwave_mK.toml")
    hot = drum.replace("electronics.amplifier_noise_temperature_k", 3.5)
    assert hot.electronics.amplifier_added_quanta == 0.0
    assert System(hot).chain.added_quanta == pytest.approx(
        constants.k * 3.5 / (constants.h * drum.drive.carrier_frequency_hz), rel=1e-14)
    back = hot.replace("electronics.amplifier_added_quanta", 12.0)
    assert back == drum
    assert scenario_from_dict(hot.to_dict()) == hot  # the same through a full reload
