"""The bundled demo scenario (an invented 4 K trampoline resonator)."""

from importlib import resources

from simulator.scenario.loader import parse_scenario


def demo_scenario():
    """The bundled demo scenario, as run by ``noisechain demo`` and ``make demo``."""
    text = resources.files("simulator.data").joinpath("demo.toml").read_text("utf-8")
    return parse_scenario(text, source="demo.toml")
