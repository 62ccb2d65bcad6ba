"""noisechain: a quantum-noise simulator of the optomechanical measurement chain.

The public names below are imported lazily so that the command line starts
fast; ``import simulator`` itself loads only this file.
"""

import importlib

__version__ = "0.1.0"

_PUBLIC = {
    "Scenario": "simulator.scenario.loader",
    "load_scenario": "simulator.scenario.loader",
    "parse_scenario": "simulator.scenario.loader",
    "scenario_from_dict": "simulator.scenario.loader",
    "operating_point": "simulator.model.operating_point",
    "OperatingPoint": "simulator.model.operating_point",
    "linear_model": "simulator.model.optomechanics",
    "StateSpace": "simulator.model.statespace",
    "System": "simulator.model.system",
    "stability": "simulator.model.stability",
    "steady_state": "simulator.linear.steady_state",
    "SteadyState": "simulator.linear.steady_state",
    "inspect_scenario": "simulator.workflows.inspection",
    "Spectrum": "simulator.linear.spectrum",
    "heterodyne_spectrum": "simulator.linear.spectra",
    "homodyne_spectrum": "simulator.linear.spectra",
    "sideband_summary": "simulator.linear.sidebands",
    "to_displacement": "simulator.linear.referral",
    "to_force": "simulator.linear.referral",
    "imprecision_backaction": "simulator.linear.referral",
    "simulate_record": "simulator.workflows.record",
    "Record": "simulator.records.generate",
    "load_record": "simulator.io.recordfile",
    "expected_spectrogram": "simulator.analysis.spectrogram",
    "expected_sideband_power": "simulator.analysis.spectrogram",
    "ScenarioError": "simulator.errors",
    "InputError": "simulator.errors",
    "OperatingPointError": "simulator.errors",
}

__all__ = sorted(_PUBLIC) + ["__version__"]


def __getattr__(name):
    if name in _PUBLIC:
        return getattr(importlib.import_module(_PUBLIC[name]), name)
    raise AttributeError(f"module 'simulator' has no attribute {name!r}")
