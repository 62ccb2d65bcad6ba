"""What a new user reads in the outputs of the bundled scenarios.

Each test here pins a place where the printed numbers were right but easy to
misread, or where a command's output was misleading, and asserts the physics
that makes the printed label true.
"""

import math

import pytest

from simulator.cli.parser import main
from simulator.model.system import System
from simulator.scenario.loader import load_scenario
from simulator.workflows.inspection import inspect_scenario

RING = "scenarios/ring_two_modes.toml"  # cooling tone on one mode, probe on another


def test_mode_block_with_several_tones_says_whose_numbers_it_shows(capsys):
    """g and the cooperativity in a mode block are the detected tone's, while the
    optical damping and spring are summed over every tone: on the ring the detected
    probe sits on resonance and damps nothing (cooperativity 0.11), yet the block
    printed 79 kHz of damping from the cooling tone beside it without a word."""
    report = inspect_scenario(System(load_scenario(RING)), feasibility=False)
    d = report.to_dict()
    mode = d["modes"][0]
    per_tone = {row["name"]: row["modes"][0] for row in d["tones"]}
    detected = per_tone[d["detected_tone"]]
    # the cooperativity and g of the block are the detected tone's own
    assert mode["cooperativity"] == pytest.approx(detected["cooperativity"], rel=1e-9)
    assert mode["g_hz"] == pytest.approx(detected["g_hz"], rel=1e-9)
    # the damping is the sum over tones (weak coupling: rates add over tones,
    # Aspelmeyer, Kippenberg & Marquardt, Rev. Mod. Phys. 86, 1391 (2014), Sec. VII)
    total = sum(t["optical_damping_hz"] for t in per_tone.values())
    assert mode["optical_damping_hz"] == pytest.approx(total, rel=1e-9)
    assert abs(detected["optical_damping_hz"]) < 1e-6 * abs(total)  # resonant probe
    # C = 4g²/(κΓm) with the detected tone's g is far from what the damping implies
    assert math.isclose(mode["cooperativity"], 0.1112, rel_tol=1e-3)

    assert main(["inspect", RING, "--no-feasibility"]) == 0
    text = capsys.readouterr().out
    block = text.split("mode breathing\n", 1)[1]
    assert block.startswith("  (g, cooperativities, Ωm/κ: the detected tone probe's; "
                            "damping, spring, occupations, n_min: every tone's)\n")
