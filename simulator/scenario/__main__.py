"""``python -m simulator.scenario``: print the scenario reference (docs/scenario-reference.md)."""

from simulator.scenario.loader import Scenario
from simulator.scenario.schema import reference_markdown

print(reference_markdown(Scenario), end="")
