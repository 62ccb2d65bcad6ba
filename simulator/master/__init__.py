"""Master-equation branch: the scenario in a truncated Fock space, solved with QuTiP.

Two models are built from the same :class:`~simulator.scenario.loader.Scenario` as the
linear engine (:mod:`simulator.master.hilbert`): the full nonlinear
Hamiltonian with its coherent drive, and the linearised model in the displaced
frame, which must reproduce the linear engine to truncation error. From either
one: the steady state with a self-checking truncation
(:mod:`simulator.master.steady`), output spectra by one linear solve per
frequency (:mod:`simulator.master.spectra`) and heterodyne records by the
stochastic master equation (:mod:`simulator.master.trajectories`).
:mod:`simulator.master.regime` says, from formulas alone, whether the linear
engine can be trusted for a scenario.

QuTiP is imported inside the functions that need it, so importing this package
(or :mod:`simulator.master.regime`) stays light.
"""

import importlib

_PUBLIC = {
    "MasterModel": "simulator.master.hilbert",
    "full_model": "simulator.master.hilbert",
    "linearised_model": "simulator.master.hilbert",
    "master_steady_state": "simulator.master.steady",
    "MasterSteadyState": "simulator.master.steady",
    "master_heterodyne_spectrum": "simulator.master.spectra",
    "regime_verdict": "simulator.master.regime",
    "RegimeVerdict": "simulator.master.regime",
}

__all__ = sorted(_PUBLIC)


def __getattr__(name):
    if name in _PUBLIC:
        return getattr(importlib.import_module(_PUBLIC[name]), name)
    raise AttributeError(f"module 'simulator.master' has no attribute {name!r}")
