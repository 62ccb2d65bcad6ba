"""A stage that does not handle several drive tones refuses them naming itself: the name
is passed by the stage (``as_system(..., stage=...)``), so it stays right when the stage
reaches the guard through a helper of its own (feasibility does)."""

import pytest
from tone_scenarios import OMEGA_HZ, scenario_text, tone_table

from simulator.analysis.feasibility import asymmetry_time, occupation_bound
from simulator.errors import InputError
from simulator.linear.record_budget import digitiser_spectrum
from simulator.model.system import System, as_system
from simulator.scenario.loader import parse_scenario


@pytest.fixture(scope="module")
def two_tones():
    return System(parse_scenario(scenario_text(extra=tone_table("probe", 1e3,
                                                                 OMEGA_HZ + 3e5))))


@pytest.mark.parametrize("stage, name", [
    (occupation_bound, "simulator.analysis.feasibility.occupation_bound"),
    (asymmetry_time, "simulator.analysis.feasibility.asymmetry_time"),
    (digitiser_spectrum, "simulator.linear.record_budget.digitiser_spectrum"),
])
def test_refusal_names_the_public_stage(two_tones, stage, name):
    with pytest.raises(InputError, match=f"^{name} does not yet support several drive tones"):
        stage(two_tones)


def test_guard_takes_the_stage_name_and_handles_scenarios(two_tones):
    with pytest.raises(InputError, match="^my fit does not yet support .*'drive', 'probe'"):
        as_system(two_tones.scenario, stage="my fit")
    with pytest.raises(InputError, match="^this computation does not yet support"):
        as_system(two_tones)
    assert as_system(two_tones, several_tones=True) is two_tones
    with pytest.raises(TypeError, match="got str"):
        as_system("scenario.toml")
