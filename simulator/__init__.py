"""noisechain: a quantum-noise simulator of the optomechanical measurement chain.

The public names below are imported lazily so that the command line starts
fast; ``import simulator`` itself loads only this file.
"""

import importlib

__version__ = "0.1.0"

_PUBLIC = {
    "Scenario": "simulator.scenario",
    "load_scenario": "simulator.scenario",
    "parse_scenario": "simulator.scenario",
    "scenario_from_dict": "simulator.scenario",
    "operating_point": "simulator.operating_point",
    "OperatingPoint": "simulator.operating_point",
    "linear_model": "simulator.model",
    "StateSpace": "simulator.statespace",
    "System": "simulator.system",
    "stability": "simulator.stability",
    "steady_state": "simulator.steady_state",
    "SteadyState": "simulator.steady_state",
    "inspect_scenario": "simulator.inspection",
    "Spectrum": "simulator.spectrum",
    "heterodyne_spectrum": "simulator.spectra",
    "homodyne_spectrum": "simulator.spectra",
    "sideband_summary": "simulator.sidebands",
    "to_displacement": "simulator.transduction",
    "to_force": "simulator.transduction",
    "imprecision_backaction": "simulator.transduction",
    "simulate_record": "simulator.records",
    "Record": "simulator.records",
    "load_record": "simulator.recordfile",
    "ScenarioError": "simulator.errors",
    "InputError": "simulator.errors",
    "OperatingPointError": "simulator.errors",
}

__all__ = sorted(_PUBLIC) + ["__version__"]


def __getattr__(name):
    if name in _PUBLIC:
        return getattr(importlib.import_module(_PUBLIC[name]), name)
    raise AttributeError(f"module 'simulator' has no attribute {name!r}")
