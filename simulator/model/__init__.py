"""Model: one scenario built once into its System.

The second stage. From a scenario: the operating point (intracavity field,
static radiation-pressure shift, bistable branches, g = g0·√n̄, bath
occupations: :mod:`~simulator.model.operating_point`), the linearised
optomechanical model as one state space with named states and signals
(:mod:`~simulator.model.optomechanics`, :mod:`~simulator.model.statespace`),
the drive's classical noise and calibration tone as states and inputs of that
model (:mod:`~simulator.model.laser_noise`, :mod:`~simulator.model.tone`), the
detection chain out to the record's channels (:mod:`~simulator.model.chain`)
and the stability verdict (:mod:`~simulator.model.stability`), all held by one
immutable :class:`~simulator.model.system.System` that every later stage
takes. Hz ↔ rad/s conversion happens here (:mod:`~simulator.model.units`).
"""
