"""Master-equation steady state with a truncation that checks itself.

:func:`master_steady_state` builds the full or linearised model
(:mod:`simulator.master.hilbert`), solves L ρ = 0
(:class:`~simulator.master.liouvillian.LindbladSolver`) and reads off the
cavity photon number, its fluctuation occupation and g²(0), and every mode's
occupation. It then looks at the population in the top
:data:`~simulator.master.hilbert.TAIL_LEVELS` Fock levels of each factor: above
``tolerance`` the cutoff of that factor is raised and the state solved again,
until every factor passes or the Hilbert space would exceed
``max_dimension``; then it stops with an :class:`~simulator.errors.InputError`
naming the mode, its cutoff and the population found there.

Occupations are those of the fluctuations, n = ⟨b†b⟩ − |⟨b⟩|², the quantity
the linear engine reports; the full model's coherent amplitudes ⟨a⟩, ⟨b⟩ are
reported beside them.
"""

import dataclasses
import math

import numpy as np

from simulator.errors import InputError
from simulator.master.hilbert import (
    DEFAULT_TOLERANCE,
    MAX_DIMENSION,
    TAIL_LEVELS,
    build_model,
)
from simulator.master.liouvillian import LindbladSolver, csr
from simulator.model.system import as_system

MAX_ROUNDS = 6


@dataclasses.dataclass(frozen=True, kw_only=True)
class MasterModeState:
    """Steady-state numbers of one tensor factor (the cavity or a mechanical mode).

    ``occupation`` is ⟨c†c⟩ − |⟨c⟩|² (fluctuations), ``quanta`` is ⟨c†c⟩,
    ``amplitude`` is ⟨c⟩ (lab-frame operators, mean fields of a displaced
    frame added back; for the linearised model, of the fluctuations),
    ``tail_population`` the weight of the top
    :data:`TAIL_LEVELS` Fock levels of the cutoff.
    """

    name: str
    cutoff: int
    occupation: float
    quanta: float
    amplitude: complex
    tail_population: float
    populations: np.ndarray


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class MasterSteadyState:
    """Stationary state of a master-equation model and what it says.

    Attributes
    ----------
    model : simulator.master.hilbert.MasterModel
    density_matrix : ndarray (d, d)
    cavity : MasterModeState
    modes : tuple of MasterModeState
    cavity_g2 : float
        ⟨a†a†aa⟩/⟨a†a⟩² of the intracavity field (of the fluctuations, for
        the linearised model, where ⟨a⟩ = 0).
    tolerance : float
        Population allowed in the top Fock levels of every factor.
    rounds : int
        Number of solves the truncation check needed.
    solver : simulator.master.liouvillian.SolveInfo
    """

    model: object
    density_matrix: np.ndarray
    cavity: MasterModeState
    modes: tuple
    cavity_g2: float
    tolerance: float
    rounds: int
    solver: object

    def to_dict(self):
        """Plain data for JSON (no density matrix)."""
        def entry(s):
            return {"name": s.name, "cutoff": s.cutoff, "occupation": s.occupation,
                    "quanta": s.quanta, "amplitude_re": s.amplitude.real,
                    "amplitude_im": s.amplitude.imag, "tail_population": s.tail_population}

        return {"model": self.model.kind, "frame": self.model.frame,
                "hilbert_dimension": self.model.dimension,
                "cavity": entry(self.cavity), "cavity_g2": self.cavity_g2,
                "modes": [entry(m) for m in self.modes],
                "truncation_tolerance": self.tolerance, "rounds": self.rounds,
                "solver": self.solver.method, "solver_steps": self.solver.steps,
                "solver_residual": self.solver.residual,
                "solver_seconds": self.solver.seconds}


def master_steady_state(system, kind="full", *, frame="auto", cutoffs=None,
                        tolerance=DEFAULT_TOLERANCE, adapt=True,
                        max_dimension=MAX_DIMENSION, method="gmres"):
    """Steady state of the scenario's master equation, with a checked truncation.

    Parameters
    ----------
    system : simulator.model.system.System
        Or a scenario, built into one.
    kind : {"full", "linearised"}
        Nonlinear Hamiltonian with its drive, or the displaced-frame
        linearised model (see :mod:`simulator.master.hilbert`).
    frame : {"auto", "lab", "displaced"}
        Fock basis of the full model (see :func:`~simulator.master.hilbert.build_model`).
    cutoffs : sequence of int or dict, optional
        Starting Fock dimensions (cavity first); default from the expected
        occupations.
    tolerance : float
        Largest population allowed in the top :data:`TAIL_LEVELS` levels of
        every factor.
    adapt : bool
        Raise a failing cutoff (by half, at least by 2) and solve again;
        with False, stop at the first failure.
    max_dimension : int
        Largest Hilbert-space dimension tried.
    method : {"gmres", "direct"}
        Solver, see :class:`~simulator.master.liouvillian.LindbladSolver`.

    Returns
    -------
    MasterSteadyState

    Raises
    ------
    simulator.errors.InputError
        If the truncation cannot be made to pass within ``max_dimension``, or
        the options are invalid.
    simulator.errors.OperatingPointError
        If the linear engine finds the operating point unstable (the cutoffs
        are chosen from its occupations).
    """
    if not 0 < tolerance < 1:
        raise InputError(f"truncation tolerance = {tolerance!r}; expected a population "
                         "in (0, 1)")
    system = as_system(system, stage="simulator.master.steady.master_steady_state")
    model = build_model(system, kind, frame=frame, cutoffs=cutoffs, tolerance=tolerance,
                        max_dimension=max_dimension)
    _check_size(model, max_dimension)
    for rounds in range(1, MAX_ROUNDS + 1):
        solver = LindbladSolver(model.hamiltonian, model.collapse, method=method)
        rho, info = solver.steady_state()
        state = _read(model, rho, info, tolerance, rounds)
        factors = (state.cavity,) + state.modes
        failing = [f for f in factors if f.tail_population > tolerance]
        if not failing:
            return state
        if not adapt:
            raise InputError(_truncation_message(failing[0], tolerance, None)
                             + "; raise this cutoff or allow adapt=True")
        raised = {f.name: max(f.cutoff + 2, math.ceil(1.5 * f.cutoff)) for f in failing}
        new = [raised.get(name, n) for name, n in zip(model.names, model.cutoffs, strict=True)]
        if math.prod(new) > max_dimension:
            raise InputError(_truncation_message(failing[0], tolerance, (new, max_dimension)))
        model = build_model(system, kind, frame=model.frame, cutoffs=new,
                            tolerance=tolerance)
    raise InputError(_truncation_message(failing[0], tolerance, None)
                     + f" after {MAX_ROUNDS} rounds of raising the cutoffs")


def _check_size(model, max_dimension):
    if model.dimension <= max_dimension:
        return
    worst = int(np.argmax(model.cutoffs))
    dims = " × ".join(f"{n} ({name})" for name, n in zip(model.names, model.cutoffs,
                                                           strict=True))
    raise InputError(
        f"the {model.kind} master-equation model needs a Hilbert space of {dims} = "
        f"{model.dimension} states, above max_dimension = {max_dimension}: "
        f"{model.names[worst]} is expected to hold "
        f"{model.expected_occupations[worst]:.4g} quanta. The master equation fits only "
        "small occupations (see docs/master-equation.md); use the linear engine here"
        + (", or the linearised master-equation model" if model.kind == "full" else ""))


def _truncation_message(factor, tolerance, growth):
    text = (f"truncation check failed for {factor.name}: population "
            f"{factor.tail_population:.3g} in the top {TAIL_LEVELS} Fock levels of cutoff "
            f"{factor.cutoff} (tolerance {tolerance:.3g}; occupation {factor.quanta:.4g})")
    if growth:
        new, limit = growth
        text += (f"; raising the cutoffs to {new} would need {math.prod(new)} states, "
                 f"above max_dimension = {limit}")
    return text


def _read(model, rho, info, tolerance, rounds):
    dims = model.cutoffs
    diag = np.real(np.diag(rho)).reshape(dims)
    factors = []
    lab = _lab_operators(model)
    for k, (name, c) in enumerate(zip(model.names, lab, strict=True)):
        pops = diag.sum(axis=tuple(i for i in range(len(dims)) if i != k))
        amp = expect(c, rho) * (np.exp(1j * model.cavity_phase) if k == 0 else 1.0)
        quanta = float(expect(c.conj().T @ c, rho).real)
        factors.append(MasterModeState(
            name=name, cutoff=dims[k], occupation=quanta - abs(amp) ** 2, quanta=quanta,
            amplitude=complex(amp), tail_population=float(max(pops[-TAIL_LEVELS:].sum(), 0.0)),
            populations=pops))
    a = lab[0]
    ad = a.conj().T
    n = factors[0].quanta
    g2 = float(expect(ad @ ad @ a @ a, rho).real / n**2) if n > 0 else float("nan")
    return MasterSteadyState(model=model, density_matrix=rho, cavity=factors[0],
                             modes=tuple(factors[1:]), cavity_g2=g2, tolerance=tolerance,
                             rounds=rounds, solver=info)


def _lab_operators(model):
    """Annihilators with the displaced frame's mean fields added back (sparse)."""
    import scipy.sparse

    eye = scipy.sparse.identity(model.dimension, dtype=complex, format="csr")
    return [csr(op) + mean * eye
            for op, mean in zip(model.annihilators, model.mean_fields, strict=True)]


def expect(op, rho):
    """Tr(op ρ) for a sparse operator ``op`` and a dense ``rho``."""
    return complex(op.multiply(rho.T).sum())
