"""The ratio-occupation gap of a detected tone split by cause, other tones a cause of their own.

Checks (simulator.linear.occupation_gap, several tones): the one-tone stand-in keeps the exact
occupation to weak-coupling accuracy (the other tones folded into the mode by
their summed rates, Marquardt, Chen, Clerk & Girvin, Phys. Rev. Lett. 99, 093902
(2007), Eqs. (3)–(5)); the other tones' term vanishes with their power (a weak
probe beside the detected drive); the thermal-cavity term of the detected tone's
mode keeps its closed form −2 n_c (1 + n)/(1 + 2 n_c) (Weinstein et al., Phys.
Rev. X 4, 041003 (2014)); and the terms with the remainder add up to the gap.
"""

import warnings

import pytest

from simulator.linear.occupation_gap import CAVITY, OTHER_TONES, detected_alone, occupation_gaps
from simulator.linear.steady_state import steady_state
from simulator.model.system import System
from simulator.scenario.loader import parse_scenario
from tests.tone_scenarios import OMEGA_HZ, scenario_text, second_mode, tone_table


def two_modes(pump_photons=2e4, detected="drive", idler_bath=0.0):
    text = scenario_text(drive_photons=2e4, bath_occupation=10.0,
                         extra=second_mode(bath_occupation=idler_bath)
                         + tone_table("pump", pump_photons, -OMEGA_HZ, "idler",
                                      frequency_hz=7e9)
                         + f'[detection]\ntone = "{detected}"\n')
    return System(parse_scenario(text))


def test_stand_in_keeps_the_occupation_in_weak_coupling():
    system = two_modes(detected="pump")
    exact = steady_state(system).modes[0].occupation
    alone = steady_state(detected_alone(system)).modes[0].occupation
    assert alone == pytest.approx(exact, rel=1e-2)


def test_other_tones_term_vanishes_with_their_power():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        strong = occupation_gaps(two_modes(pump_photons=2e4))[0]
        weak = occupation_gaps(two_modes(pump_photons=2e1))[0]
    for gap in (strong, weak):
        total = sum(gap.terms.values()) + gap.remainder
        assert total == pytest.approx(gap.difference, abs=1e-12)
    assert abs(weak.terms[OTHER_TONES]) < 1e-2 * abs(strong.terms[OTHER_TONES])


def test_thermal_cavity_of_the_detected_mode_keeps_its_closed_form():
    gap = occupation_gaps(two_modes(detected="pump", idler_bath=0.5))[0]
    assert gap.terms[CAVITY] == pytest.approx(gap.closed_form_cavity_term, rel=0.02)
    assert gap.cavity_thermal_occupation == pytest.approx(0.25)
