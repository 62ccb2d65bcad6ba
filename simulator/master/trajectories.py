"""Heterodyne records from quantum trajectories: the stochastic master equation.

The external port is monitored by heterodyne detection with efficiency η:
its collapse operator √κ_ex a is split into a measured part √(ηκ_ex) a and
an unmeasured part √((1−η)κ_ex) a, and ``qutip.smesolve`` integrates the
conditional state under heterodyne unravelling (Wiseman and Milburn, Quantum
Measurement and Control (Cambridge, 2010), Ch. 4). QuTiP 5 returns per
sample interval the averages of the two currents
J_x = ⟨c + c†⟩ + √2 ξ_x and J_y = ⟨−i(c − c†)⟩ + √2 ξ_y (c the measured
operator, ξ unit white noises), so z = (J_x + iJ_y)/2 = ⟨c⟩ + (ξ_x + iξ_y)/√2
has a complex shot-noise density of 1 per unit time, the normalisation of the
linear records. With the time unit r of the model, z is multiplied by √r.

The stored record is the fluctuation of the output field, as in the linear
engine's records: w = conj(−e^{iφ}(z − ⟨z⟩_ss)) in shot-noise units, with
⟨z⟩_ss the steady-state mean (the coherent carrier is not part of the
record), φ the phase of the displaced frame, and the complex conjugate that
puts the anti-Stokes sideband at positive frequency in an FFT (docs/records.md,
"Sign convention"; docs/physics.md §12).
Its two-sided spectrum is 1 + η N_out(ν), integrate-and-dump sampled.

Scope: an ideal iq heterodyne receiver; the scenario's amplifier,
electronics noise and filter are not applied (the record's ``form``
attribute says so). The digitiser scales, the file layout and the truth
fields come from the linear engine's record plan; the occupations in the
truth are the master equation's. Each record is one trajectory started from
the steady state, a pure function of (scenario, seed, options).
"""

import dataclasses

import numpy as np

from simulator.errors import InputError
from simulator.master.hilbert import DEFAULT_TOLERANCE
from simulator.master.liouvillian import csr
from simulator.master.steady import expect, master_steady_state
from simulator.model.system import as_system

FORM = "master-equation trajectory (stochastic master equation, ideal heterodyne receiver)"
STEP_PHASE = 0.2  # solver step × largest |eigenvalue| of K = −iH − ½Σc†c


def master_records(system, seeds, *, duration_s=None, kind="full", step_phase=STEP_PHASE,
                   steady=None, sink=None, tolerance=DEFAULT_TOLERANCE, **steady_options):
    """One heterodyne record per seed from stochastic-master-equation trajectories.

    Parameters
    ----------
    system : simulator.model.system.System
        Or a scenario, built into one.
        Heterodyne detection with an ``iq`` record; sample rate from
        ``digitizer.sample_rate_hz`` or the linear engine's automatic choice.
    seeds : sequence of int
        One trajectory (and record) per seed.
    duration_s : float, optional
        Overrides ``record.duration_s``.
    kind : {"full", "linearised"}
    step_phase : float
        Solver step times the largest |eigenvalue| of the no-jump generator
        K = −iH − ½Σc†c (explicit Euler–Maruyama: stable and accurate to a
        few percent in the spectra at 0.2; the SME has time-step error).
    steady : MasterSteadyState, optional
        Reuse a steady state already computed (it fixes ``kind``).
    sink : callable, optional
        ``sink(plan, index)`` returns where record ``index`` goes (as in
        :func:`simulator.records.generate.generate_record`); memory by default.
        :func:`simulator.workflows.record.master_records_to_files` passes one
        HDF5 file per seed.
    tolerance, **steady_options
        Passed to :func:`~simulator.master.steady.master_steady_state`.

    Returns
    -------
    list of simulator.records.generate.Record
    """
    import qutip

    from simulator.records.generate import plan_record

    seeds = [_check_seed(s) for s in seeds]
    if not seeds:
        raise InputError("no seeds given; expected one seed per record")
    if not 0 < step_phase <= 1:
        raise InputError(f"step_phase = {step_phase!r}; expected a number in (0, 1]")
    system = as_system(system, stage="simulator.master.trajectories.master_records")
    scenario = system.scenario
    plan = plan_record(system, seed=seeds[0], duration_s=duration_s, store_mechanics=False)
    if plan.chain.receiver != "iq":
        raise InputError(f"master-equation records need heterodyne detection with an iq "
                         f"record; this scenario's receiver is {plan.chain.receiver!r}")
    if steady is None:
        steady = master_steady_state(system, kind, tolerance=tolerance, **steady_options)
    model = steady.model
    r, eta = model.rate_unit_rad_s, scenario.detection.efficiency
    a = model.annihilators[0]
    measured = np.sqrt(eta * model.external_rate) * a
    c_ops = list(model.collapse[1:])  # collapse[0] is the external port √κ_ex a
    if eta < 1:
        c_ops.append(np.sqrt((1 - eta) * model.external_rate) * a)
    interval = r / plan.sample_rate_hz  # one sample interval in units of 1/r
    times = np.arange(plan.n_samples + 1) * interval
    k = csr(-1j * model.hamiltonian - 0.5 * sum(c.dag() * c for c in model.collapse))
    radius = float(np.max(np.abs(np.linalg.eigvals(k.toarray()))))
    substeps = max(1, int(np.ceil(interval * radius / step_phase)))
    rho0 = qutip.Qobj(steady.density_matrix, dims=model.hamiltonian.dims)
    result = qutip.smesolve(
        model.hamiltonian, rho0, times, c_ops=c_ops, sc_ops=[measured], heterodyne=True,
        ntraj=len(seeds), seeds=seeds,
        options={"store_measurement": True, "dt": interval / substeps,
                 "method": "euler", "progress_bar": False, "keep_runs_results": True})
    currents = np.asarray(result.measurement)[:, 0]  # (trajectory, quadrature, sample)
    mean = expect(csr(measured), steady.density_matrix)
    z = np.sqrt(r) * ((currents[:, 0] + 1j * currents[:, 1]) / 2 - mean)
    w = np.conj(-np.exp(1j * model.cavity_phase) * z)
    truth = dataclasses.replace(
        plan.truth, occupation=tuple(m.occupation for m in steady.modes),
        cavity_occupation=steady.cavity.occupation)
    return [_write(dataclasses.replace(plan, seed=seed, form=FORM, truth=truth), trace,
                   sink, i)
            for i, (seed, trace) in enumerate(zip(seeds, w, strict=True))]


def master_record(system, *, seed=None, **options):
    """One record (see :func:`master_records`); seed default ``scenario.scenario.seed``."""
    system = as_system(system, stage="simulator.master.trajectories.master_record")
    seed = system.scenario.scenario.seed if seed is None else seed
    return master_records(system, [seed], **options)[0]


def _write(plan, trace, sink, index):
    from simulator.records import kernels
    from simulator.records.generate import MemorySink

    target = MemorySink(plan) if sink is None else sink(plan, index)
    y = np.column_stack([trace.real, trace.imag])
    with target:
        counts, clipped = kernels.Digitiser(plan)(np.ascontiguousarray(y))
        target.write(0, counts, None)
        return target.finish(clipped)


def _check_seed(seed):
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or not 0 <= seed < 2**32:
        raise InputError(f"seed = {seed!r}; expected a non-negative integer below 2**32")
    return int(seed)
