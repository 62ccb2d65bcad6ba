"""Workflows: what a user asks for, composed from the stages below.

Inspection of one scenario (:mod:`~simulator.workflows.inspection`), sweeps
over any parameter (:mod:`~simulator.workflows.sweep`, on local processes or
Dask through :mod:`~simulator.workflows.tasks` and
:mod:`~simulator.workflows.processes`), Monte Carlo trials of a user's
estimator (:mod:`~simulator.workflows.trial`,
:mod:`~simulator.workflows.estimator`), the end-to-end run with its report
(:mod:`~simulator.workflows.run`) and the demo. Resumable, interruptible
(:mod:`~simulator.workflows.interrupt`), and the only layer besides the
command line that touches files and figures.
"""
