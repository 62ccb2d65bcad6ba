"""Records: synthetic digitised records with exactly the statistics of the model.

The time-domain branch of the third stage: the exact discretisation of the
system's detection-chain model at the sample interval (Van Loan's method and
the innovations form: :mod:`~simulator.records.discretize`), the numba
recursions that run it (:mod:`~simulator.records.kernels`), and the generator
that plans a record, draws its random numbers by seeded block and digitises it
(:mod:`~simulator.records.generate`). Writing a record to a file is
:mod:`simulator.io.recordfile`'s job.
"""
