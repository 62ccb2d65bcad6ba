"""Why n from the sideband ratio differs from the exact one (simulator.linear.occupation_gap).

- thermal cavity input, weak coupling, resolved sidebands, red drive: the
  anti-Stokes weight is n − 2 n_c and the Stokes weight n + 1, so
  n_R − n = −2 n_c (1 + n)/(1 + 2 n_c) (Weinstein et al., Phys. Rev. X 4,
  041003 (2014); derivation in the module notes); the term found by re-solving
  the model without the bath must equal it;
- the single mode with vacuum inputs: its gap is the weak-coupling correction,
  which falls as (g/κ)² (checked by quartering the drive power);
- several causes: the terms sum to the printed difference up to their
  interplay, which is second order in the causes (halving both shrinks it ×4)
  and below 5 % of the difference here;
- the command line prints the difference with its causes, the JSON carries
  the same numbers.
"""

import json

import numpy as np
import pytest
from conftest import mode, scenario_with_coupling

from simulator.cli.parser import main
from simulator.linear.occupation_gap import CAVITY, LASER, OVERLAP, STRONG, occupation_gaps


def weak(**changes):
    """g/κ = 0.01, Ωm/κ = 20, red sideband: the regime of the closed form."""
    sc = scenario_with_coupling(g_hz=10e3, detuning_hz=-20e6,
                                modes=[mode(frequency_hz=20e6, linewidth_hz=10.0,
                                            bath_occupation=5.0)])
    for path, value in changes.items():
        sc = sc.replace(path, value)
    return sc


@pytest.mark.parametrize("n_bath", [0.02, 0.2])
def test_cavity_term_is_minus_two_n_cav_in_weak_coupling(n_bath):
    gap = occupation_gaps(weak(**{"cavity.bath_occupation": n_bath}))[0]
    n_c = 0.5 * n_bath  # κ_0/κ = ½ in the base scenario
    assert gap.cavity_thermal_occupation == pytest.approx(n_c, rel=1e-12)
    closed = -2 * n_c * (1 + gap.steady_state) / (1 + 2 * n_c)
    assert gap.closed_form_cavity_term == pytest.approx(closed, rel=1e-12)
    # corrections of order g/κ = 0.01 and κ/Ωm = 0.05 (seen: 4e-4 relative)
    assert gap.terms[CAVITY] == pytest.approx(closed, rel=2e-3)
    assert set(gap.terms) == {CAVITY, STRONG}


def test_weak_coupling_term_falls_as_g_over_kappa_squared():
    power = weak().drive.power_w
    gaps = [occupation_gaps(weak(**{"drive.power_w": power * x}))[0] for x in (1.0, 0.25)]
    rel = [g.terms[STRONG] / g.steady_state for g in gaps]
    assert rel[0] / rel[1] == pytest.approx(4.0, rel=0.1)
    assert all(g.remainder == 0.0 for g in gaps)


def test_terms_sum_to_the_difference_up_to_a_second_order_interplay():
    remainders = []
    for x in (1.0, 0.5):
        gap = occupation_gaps(weak(**{"cavity.bath_occupation": 0.1 * x,
                                      "drive.phase_noise.linewidth_hz": 20.0 * x}))[0]
        assert set(gap.terms) == {CAVITY, LASER, STRONG}
        total = sum(gap.terms.values())
        assert gap.difference == pytest.approx(total + gap.remainder, rel=1e-12)
        assert abs(gap.remainder) < 0.05 * abs(gap.difference)
        remainders.append(gap.remainder)
    assert remainders[0] / remainders[1] == pytest.approx(4.0, rel=0.2)


def test_other_modes_overlap_term_vanishes_for_far_apart_modes():
    sc = scenario_with_coupling(g_hz=10e3, detuning_hz=-20e6, modes=[
        mode(name="a", frequency_hz=20e6, linewidth_hz=10.0, bath_occupation=5.0),
        mode(name="b", frequency_hz=20.02e6, linewidth_hz=10.0, bath_occupation=5.0)])
    near = occupation_gaps(sc)[0]
    assert OVERLAP in near.terms
    far = occupation_gaps(sc.replace("mechanics[1].frequency_hz", 35e6))[0]
    assert abs(far.terms[OVERLAP]) < 0.1 * abs(near.terms[OVERLAP])


def test_spectrum_command_prints_the_difference_and_its_causes(tmp_path, capsys):
    path = tmp_path / "hot.toml"
    path.write_text(weak(**{"cavity.bath_occupation": 0.2}).to_toml(), encoding="utf-8")
    assert main(["spectrum", str(path), "--at", "cavity"]) == 0
    text = capsys.readouterr().out
    assert "below the steady state" in text and CAVITY in text and "2 n_cav" in text
    assert main(["spectrum", str(path), "--json", "--at", "cavity"]) == 0
    side = json.loads(capsys.readouterr().out)["sidebands"][0]
    gap = side["gap"]
    assert gap["difference"] == pytest.approx(side["occupation_from_ratio"]
                                              - side["steady_state_occupation"], rel=1e-12)
    assert np.isclose(sum(gap["terms"].values()) + gap["remainder"], gap["difference"],
                      rtol=1e-12)
    assert gap["terms"][CAVITY] == pytest.approx(gap["closed_form_cavity_term"], rel=2e-3)
