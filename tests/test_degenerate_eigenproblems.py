"""Every eigendecomposition in the engine, on degenerate and nearly defective cases.

An eigensolver may return a repeated eigenvalue with any basis of its
eigenspace, split it into a conjugate pair λ ± iε, or return nearly parallel
eigenvectors near an exceptional point. Each user of an eigendecomposition
either stays exact there or says why it cannot; the modal record recursion
has its own checks in test_record_recursions.py.

- Transfer functions (the resolvent behind spectra and the noise budget):
  equal to a direct solve of (−iω − A) with repeated poles (two degenerate
  modes, identical I and Q filters) and at an exceptional point.
- Mode eigenvalues: two identical modes with equal couplings have, exactly, a
  dark combination (q1 − q2)/√2 with the bare eigenvalue −Γm/2 + iΩm and a
  bright one whose eigenvalue is that of one mode with coupling √2·g0 (the
  symmetric combination couples with g√2: a fact of linear algebra, e.g.
  the collective coupling of N identical modes, √N g).
- Sideband weights: the dark line has none, and says so.
- Master equation: at an exceptional point of the no-jump generator K the
  preconditioner's basis is only approximate; the steady state still equals
  QuTiP's own (qutip.steadystate).
"""

import warnings

import numpy as np
import pytest
from conftest import mode, scenario_with_coupling
from test_record_recursions import MODE_SETS, chain_scenario

from simulator.linear.sidebands import sideband_summary
from simulator.linear.steady_state import mode_eigenvalues
from simulator.model.operating_point import operating_point
from simulator.model.optomechanics import linear_model
from simulator.model.statespace import Resolvent
from simulator.records.generate import plan_record

KAPPA_HZ, OMEGA_HZ, GAMMA_HZ = 200e3, 1e6, 30.0


def direct_transfer(model, omega):
    n = model.A.shape[0]
    return np.array([model.C @ np.linalg.solve(-1j * w * np.eye(n) - model.A, model.B)
                     + model.D for w in omega])


@pytest.mark.parametrize("modes, g_hz", [("two degenerate", 20e3),
                                         ("one", (KAPPA_HZ - GAMMA_HZ) / 4)])
def test_transfer_is_exact_with_repeated_poles_and_at_an_exceptional_point(modes, g_hz):
    scenario = chain_scenario(receiver="iq", bandwidth_hz=0.6e6, current_noise=3e-12,
                              amplifier=0.0, laser="none", modes=MODE_SETS[modes], g_hz=g_hz)
    model = plan_record(scenario).chain.model
    lam = np.linalg.eigvals(model.A)
    assert np.min(np.abs(lam[:, None] - lam[None, :]) + np.eye(len(lam)) * 1e300) < (
        1e-6 * np.abs(lam).max())  # the case is degenerate or nearly so
    omega = 2 * np.pi * np.linspace(-3e6, 3e6, 41)
    exact = direct_transfer(model, omega)
    assert np.abs(model.transfer(omega) - exact).max() < 1e-10 * np.abs(exact).max()


def test_resolvent_refuses_a_basis_that_does_not_rebuild_the_matrix():
    """A Jordan block: the eigenvectors are parallel, so the batched solve is used."""
    res = Resolvent(np.array([[-1.0, 1.0], [0.0, -1.0]]))
    assert not res.well_conditioned
    w = np.array([0.0, 0.5])
    exact = [np.linalg.inv(-1j * x * np.eye(2) - res.a) for x in w]
    assert np.allclose(res.solve_columns(w, np.eye(2)), exact, rtol=1e-13)


def degenerate_pair(g0_hz=100.0):
    return [mode(frequency_hz=OMEGA_HZ, linewidth_hz=GAMMA_HZ, coupling_hz=g0_hz,
                 bath_occupation=50.0),
            mode("m1", frequency_hz=OMEGA_HZ, linewidth_hz=GAMMA_HZ, coupling_hz=g0_hz,
                 bath_occupation=50.0)]


def device_eigenvalues(scenario):
    point = operating_point(scenario)
    model = linear_model(scenario, point)
    return mode_eigenvalues(model, len(point.modes))


def test_degenerate_modes_get_the_dark_and_bright_eigenvalues():
    g_hz = 20e3
    pair = scenario_with_coupling(g_hz=g_hz, linewidth_hz=KAPPA_HZ, detuning_hz=-OMEGA_HZ,
                                  modes=degenerate_pair())
    single = scenario_with_coupling(g_hz=g_hz * np.sqrt(2), linewidth_hz=KAPPA_HZ,
                                    detuning_hz=-OMEGA_HZ,
                                    modes=[mode(frequency_hz=OMEGA_HZ, linewidth_hz=GAMMA_HZ,
                                                coupling_hz=100.0 * np.sqrt(2),
                                                bath_occupation=50.0)])
    found = sorted(device_eigenvalues(pair), key=lambda lam: lam.real)
    bright = device_eigenvalues(single)[0]
    dark = 2 * np.pi * (-GAMMA_HZ / 2 + 1j * OMEGA_HZ)
    assert found[0] == pytest.approx(bright, rel=1e-10)
    assert found[1] == pytest.approx(dark, rel=1e-12)


def test_the_dark_line_has_no_weights_and_says_so():
    pair = scenario_with_coupling(g_hz=20e3, linewidth_hz=KAPPA_HZ, detuning_hz=-OMEGA_HZ,
                                  modes=degenerate_pair())
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        summary = sideband_summary(pair)
    lines = {np.isnan(s.anti_stokes.area_quanta): s for s in summary}
    assert set(lines) == {True, False}
    dark, bright = lines[True], lines[False]
    assert np.isnan(dark.ratio) and np.isnan(dark.stokes.area_quanta)
    assert "does not reach the output" in dark.warning
    assert dark.stokes.linewidth_hz == pytest.approx(GAMMA_HZ, rel=1e-9)
    assert bright.stokes.area_quanta > bright.anti_stokes.area_quanta > 0


def test_master_steady_state_at_an_exceptional_point_of_the_no_jump_generator():
    """Beam-splitter coupling g = |κ − Γ(2n + 1)|/4 makes K defective in every excitation
    subspace (rate units, Ωm = 1); the steady state is QuTiP's all the same."""
    qutip = pytest.importorskip("qutip")
    from simulator.master.liouvillian import PRECONDITIONER_MAX_CONDITION, LindbladSolver

    cut, kappa, gamma, n_th = 5, 0.3, 0.02, 1.0
    g = abs(kappa - gamma * (2 * n_th + 1)) / 4
    a = qutip.tensor(qutip.destroy(cut), qutip.qeye(cut))
    b = qutip.tensor(qutip.qeye(cut), qutip.destroy(cut))
    h = a.dag() * a + b.dag() * b - g * (a.dag() * b + a * b.dag())
    c_ops = [np.sqrt(kappa) * a, np.sqrt(gamma * (n_th + 1)) * b, np.sqrt(gamma * n_th) * b.dag()]
    solver = LindbladSolver(h, c_ops)
    _, vec = np.linalg.eig(solver.K.toarray())
    assert np.linalg.cond(vec) > PRECONDITIONER_MAX_CONDITION  # the Schur fallback is used
    rho, info = solver.steady_state()
    expected = qutip.steadystate(h, c_ops).full()
    assert np.abs(rho - expected).max() < 1e-8
    assert info.residual < 1e3 * solver.rtol
