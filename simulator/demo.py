"""The bundled demo: run the demo scenario and write what it produces to a folder."""

import json
from importlib import resources
from pathlib import Path

from simulator.files import atomic_write_text
from simulator.scenario import parse_scenario


def demo_scenario():
    """The bundled demo scenario (an invented 4 K trampoline resonator)."""
    text = resources.files("simulator.data").joinpath("demo.toml").read_text("utf-8")
    return parse_scenario(text, source="demo.toml")


def run_demo(out):
    """Run the demo scenario; write its outputs into folder ``out``.

    Returns the list of files written.
    """
    from simulator.cli import _clean
    from simulator.inspection import inspect_scenario

    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    scenario = demo_scenario()
    report = inspect_scenario(scenario)
    written = []
    for name, text in (("scenario.toml", scenario.to_toml()),
                       ("inspect.json", json.dumps(_clean(report.to_dict()), indent=2)),
                       ("inspect.txt", report.to_text() + "\n")):
        atomic_write_text(out / name, text)
        written.append(out / name)
    return written
