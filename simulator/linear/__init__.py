"""Linear: what the one linear model says in the frequency domain and at rest.

The third stage (beside :mod:`simulator.records` and :mod:`simulator.master`):
the exact steady state by the Lyapunov equation
(:mod:`~simulator.linear.steady_state`) with weak-coupling diagnostics
(:mod:`~simulator.linear.weak_coupling`); heterodyne and homodyne spectra in
shot-noise units with their noise budget (:mod:`~simulator.linear.spectra`,
:mod:`~simulator.linear.budget`, the result type
:mod:`~simulator.linear.spectrum`); the sideband summary
(:mod:`~simulator.linear.sidebands`); referral to displacement, force and
photocurrent (:mod:`~simulator.linear.referral`); and what laser noise does to
the occupation (:mod:`~simulator.linear.laser_effects`). Every function takes
a :class:`~simulator.model.system.System`.
"""
