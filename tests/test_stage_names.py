"""A stage that does not handle several drive tones refuses them naming itself: the name
is passed by the stage (``as_system(..., stage=...)``), so it stays right when the stage
reaches the guard through a helper of its own."""

import pytest
from tone_scenarios import OMEGA_HZ, scenario_text, tone_table

from simulator.errors import InputError
from simulator.linear.referral import imprecision_backaction
from simulator.master.steady import master_steady_state
from simulator.model.system import System, as_system
from simulator.scenario.loader import parse_scenario


@pytest.fixture(scope="module")
def two_tones():
    return System(parse_scenario(scenario_text(extra=tone_table("probe", 1e3,
                                                                 OMEGA_HZ + 3e5))))


@pytest.mark.parametrize("stage, name", [
    (imprecision_backaction, "simulator.linear.referral.imprecision_backaction"),
    (master_steady_state, "simulator.master.steady.master_steady_state"),
])
def test_refusal_names_the_public_stage(two_tones, stage, name):
    args = (1e6,) if stage is imprecision_backaction else ()
    with pytest.raises(InputError, match=f"^{name} does not yet support several drive tones"):
        stage(two_tones, *args)


def test_guard_takes_the_stage_name_and_handles_scenarios(two_tones):
    with pytest.raises(InputError, match="^my fit does not yet support .*'drive', 'probe'"):
        as_system(two_tones.scenario, stage="my fit")
    with pytest.raises(InputError, match="^this computation does not yet support"):
        as_system(two_tones)
    assert as_system(two_tones, several_tones=True) is two_tones
    with pytest.raises(TypeError, match="got str"):
        as_system("scenario.toml")
