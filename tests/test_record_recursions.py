"""The recursion a record actually runs has exactly the sampled model's statistics.

No random statistics here: every check compares matrices, or two
deterministic computations of the same numbers.

- For a randomised family of detection chains (iq, if and homodyne
  receivers; electronics filters on and off, identical or slightly or very
  different on the I and Q channels; current noise; amplifier; laser-noise
  states; one to three mechanical modes, two of them degenerate; couplings
  up to an exceptional point), the output autocovariance of each recursion
  the record generator can run — full state, dense innovations and modal
  innovations — equals the sampled model's autocovariance
  (:meth:`simulator.records.discretize.DiscreteModel.autocovariance`) at lags 0 … L,
  computed from the matrices the kernel multiplies
  (:class:`simulator.records.kernels.Recursion`), and its outputs are stationary from
  the first sample (the full state form's state too).
- The numba kernel runs exactly those matrices: its output equals a plain
  numpy evaluation of the same recursion from the same start and normals.
- The modal form survives the eigensolver returning a repeated real
  eigenvalue as a conjugate pair λ ± iε, and a decomposition that lost half
  of an invariant subspace is caught by its reconstruction check.

The innovations representation reproduces the output process of the full
model exactly (Anderson and Moore, Optimal Filtering (1979), Sec. 9.3); the
autocovariance of a stationary linear recursion is the standard one,
R(0) = H P Hᵀ + J Jᵀ, R(τ) = H F^{τ−1}(F P Hᵀ + G Jᵀ) (ibid., Sec. 4.3).
"""

import dataclasses

import numpy as np
import pytest
from conftest import mode, scenario_with_coupling
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from simulator.records.discretize import (
    MODAL_RECONSTRUCTION_RTOL,
    discretize,
    innovations_form,
    modal_form,
    modal_reconstruction_error,
)
from simulator.records.generate import plan_record
from simulator.records.kernels import NormalBlocks, stepper
from simulator.scenario.loader import scenario_from_dict

LAGS = 48
RTOL = 1e-10  # relative to the largest entry of R(0)
FS = 8e6
OMEGA_HZ, KAPPA_HZ = 1.0e6, 200e3  # resolved sidebands, Ωm/κ = 5


def chain_scenario(*, receiver, bandwidth_hz, current_noise, amplifier, laser, modes, g_hz):
    """An invented sideband-cooling scenario with the given detection chain."""
    base = scenario_with_coupling(g_hz=g_hz, linewidth_hz=KAPPA_HZ, detuning_hz=-OMEGA_HZ,
                                  modes=modes)
    data = base.to_dict()
    data["digitizer"] = {"sample_rate_hz": FS}
    data["record"] = {"duration_s": 1e-3}
    electronics = {"current_noise_a_per_sqrt_hz": current_noise,
                   "amplifier_added_quanta": amplifier}
    if bandwidth_hz:
        electronics["bandwidth_hz"] = bandwidth_hz
    data["electronics"] = electronics
    if receiver == "homodyne":
        data["detection"].update(scheme="homodyne", quadrature_angle_rad=0.7)
    elif receiver == "if":
        data["detection"].update(intermediate_frequency_hz=1.9e6)
        data["record"]["kind"] = "if"
    if laser == "phase floor":
        data["drive"]["phase_noise"] = {"floor_rad2_per_hz": 1e-13, "floor_high_hz": 3e6}
    elif laser == "phase peak":
        data["drive"]["phase_noise"] = {"peak_rad2_per_hz": 1e-12, "peak_frequency_hz": 1.2e6,
                                        "peak_width_hz": 100e3}
    elif laser == "intensity":
        data["drive"]["intensity_noise"] = {"relative_intensity_noise_per_hz": 1e-14}
    return scenario_from_dict(data, source="<test>")


MODE_SETS = {
    "one": [mode(frequency_hz=OMEGA_HZ, linewidth_hz=30.0, bath_occupation=50.0)],
    "two degenerate": [mode(frequency_hz=OMEGA_HZ, linewidth_hz=30.0, bath_occupation=50.0),
                       mode("m1", frequency_hz=OMEGA_HZ, linewidth_hz=30.0,
                            bath_occupation=50.0)],
    "three": [mode(frequency_hz=OMEGA_HZ, linewidth_hz=30.0, bath_occupation=50.0),
              mode("m1", frequency_hz=1.3 * OMEGA_HZ, linewidth_hz=100.0, coupling_hz=60.0),
              mode("m2", frequency_hz=0.7 * OMEGA_HZ, linewidth_hz=5.0, coupling_hz=30.0)],
}
# g = (κ − Γm)/4 is the exceptional point of one mode at Δ = −Ωm (rotating-wave normal
# modes, e.g. Aspelmeyer, Kippenberg and Marquardt, Rev. Mod. Phys. 86, 1391 (2014));
# the drive power is set for the first mode, so couplings are g_hz · g0_k / g0_0.
COUPLINGS_HZ = (5e3, 20e3, (KAPPA_HZ - 30.0) / 4 * (1 - 1e-3), (KAPPA_HZ - 30.0) / 4)


def with_filter_mismatch(plan, mismatch):
    """The plan with the Q channel's filter pole moved by a relative ``mismatch``.

    The scenario has one electronics bandwidth for both channels; this gives
    the identical (0), nearly identical and different cases on the same chain.
    """
    model = plan.chain.model
    if mismatch == 0.0 or "filter.Q" not in model.states:
        return plan
    k = model.index("filter.Q")
    a = np.array(model.A)
    a[k, k] *= 1.0 + mismatch
    model = dataclasses.replace(model, A=a)
    disc = discretize(model, plan.discrete.sample_interval_s,
                      integrator_drift=plan.chain.integrator_drift())
    return dataclasses.replace(plan, discrete=disc, innovations=innovations_form(disc))


def recursions(plan):
    """Every stepper the generator can run for ``plan``: full state, dense, modal."""
    steppers = {"full-state": stepper(dataclasses.replace(plan, form="full-state"))}
    inn = dataclasses.replace(plan, form="innovations",
                              innovations=plan.innovations or innovations_form(plan.discrete))
    steppers["innovations"] = stepper(inn, modal=False)
    modal = stepper(inn)
    if modal.recursion.kind == "modal innovations":
        steppers["modal innovations"] = modal
    return steppers


def numpy_run(recursion, start, normals):
    """y_n of z_{n+1} = F z_n + G ξ_n, y_n = H z_n + J ξ_n, evaluated plainly."""
    z, out = np.array(start), []
    for xi in normals:
        out.append(recursion.output @ z + recursion.feedthrough @ xi)
        z = recursion.transition @ z + recursion.drive @ xi
    return np.array(out)


def assert_exact(plan, steppers):
    exact = plan.discrete.autocovariance(LAGS)
    scale = np.abs(exact[0]).max()
    for kind, step in steppers.items():
        rec = step.recursion
        assert rec.kind == kind
        assert rec.output_stationarity_error(LAGS) < RTOL, kind
        if kind == "full-state":  # its state gives the stored mechanical quadratures
            assert rec.state_stationarity_error() < RTOL
        error = np.abs(rec.autocovariance(LAGS) - exact).max() / scale
        assert error < RTOL, f"{kind}: autocovariance off by {error:.3g} (relative)"


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(receiver=st.sampled_from(["iq", "if", "homodyne"]),
       bandwidth_hz=st.sampled_from([0.0, 0.6e6, 3e6]),
       mismatch=st.sampled_from([0.0, 1e-12, 1e-7, 1e-3, 0.3]),
       current_noise=st.sampled_from([0.0, 3e-12]),
       amplifier=st.sampled_from([0.0, 15.0]),
       laser=st.sampled_from(["none", "phase floor", "phase peak", "intensity"]),
       modes=st.sampled_from(list(MODE_SETS)),
       g_hz=st.sampled_from(COUPLINGS_HZ))
def test_every_recursion_has_the_sampled_model_autocovariance(
        receiver, bandwidth_hz, mismatch, current_noise, amplifier, laser, modes, g_hz):
    scenario = chain_scenario(receiver=receiver, bandwidth_hz=bandwidth_hz,
                              current_noise=current_noise, amplifier=amplifier, laser=laser,
                              modes=MODE_SETS[modes], g_hz=g_hz)
    plan = with_filter_mismatch(plan_record(scenario, form="innovations"), mismatch)
    assert_exact(plan, recursions(plan))


@pytest.mark.parametrize("receiver", ["iq", "if", "homodyne"])
def test_kernels_run_exactly_their_recursion(receiver):
    """Each numba kernel's output equals numpy's evaluation of its :class:`Recursion`."""
    scenario = chain_scenario(receiver=receiver, bandwidth_hz=0.6e6, current_noise=3e-12,
                              amplifier=15.0, laser="phase peak", modes=MODE_SETS["three"],
                              g_hz=20e3)
    plan = plan_record(scenario, form="innovations")
    for kind, step in recursions(plan).items():
        count = 300
        normals = NormalBlocks(5, 1, step.width, 1 << 10).take(0, count)
        y = np.empty((count, 2 if receiver != "homodyne" else 1))
        step(normals, y, np.empty((count, 0)))
        expected = numpy_run(step.recursion, step.start, normals)
        scale = np.abs(expected).max()
        assert np.abs(y - expected).max() < 1e-11 * scale, kind


def test_the_chain_that_lost_half_a_subspace():
    """An invented microwave drum whose iq channels share a filter pole (same bandwidth,
    with current noise): every recursion is exact."""
    scenario = chain_scenario(receiver="iq", bandwidth_hz=8e6, current_noise=2e-12,
                              amplifier=12.0, laser="none", modes=MODE_SETS["one"], g_hz=20e3)
    plan = plan_record(scenario, form="innovations")
    steppers = recursions(plan)
    assert "modal innovations" in steppers
    assert_exact(plan, steppers)


def repeated_pole_transition(epsilon, rng):
    """Φ similar to diag(oscillator, [[a, ε], [−ε, a]]): a real pole a, repeated when ε = 0.

    For ε ≠ 0 the eigensolver must return the pair a ± iε, which is what two
    identical filters can look like to it when rounding splits their pole.
    """
    phi = np.zeros((4, 4))
    turn = 0.3
    phi[:2, :2] = 0.99 * np.array([[np.cos(turn), -np.sin(turn)], [np.sin(turn), np.cos(turn)]])
    phi[2:, 2:] = [[0.11, epsilon], [-epsilon, 0.11]]
    q = rng.normal(size=(4, 4))
    return q @ phi @ np.linalg.inv(q)


@pytest.mark.parametrize("epsilon", [0.0, 1e-15, 1e-13, 1e-9])
def test_modal_form_keeps_a_repeated_pole_whole(epsilon):
    rng = np.random.default_rng(3)
    phi = repeated_pole_transition(epsilon, rng)
    gam, drive = rng.normal(size=(2, 4)), rng.normal(size=(4, 2))
    modal = modal_form(phi, gam, drive)
    assert modal is not None
    assert modal.reconstruction_error < MODAL_RECONSTRUCTION_RTOL
    # the recursion in modal coordinates gives the dense recursion's outputs
    x, m = rng.normal(size=4), None
    m = modal.to_modal @ x
    for _ in range(20):
        xi = rng.normal(size=2)
        assert np.real(modal.output @ m) == pytest.approx(gam @ x, rel=1e-9, abs=1e-12)
        x = phi @ x + drive @ xi
        m = modal.eigenvalues * m + modal.drive @ xi


def test_a_basis_missing_half_a_subspace_fails_its_check():
    """What a fixed tolerance on Im λ did to the pair a ± iε: both members classed as
    real, their eigenvectors made real — the same vector twice. The check sees it."""
    rng = np.random.default_rng(4)
    phi = repeated_pole_transition(1e-13, rng)
    gam, drive = rng.normal(size=(2, 4)), rng.normal(size=(4, 2))
    good = modal_form(phi, gam, drive)
    lam, vec = np.linalg.eig(phi)
    inv = np.linalg.inv(vec)
    real = np.abs(lam.imag) <= 1e-12
    keep = np.flatnonzero(real | (lam.imag > 1e-12))
    weight = np.where(real[keep], 1.0, 2.0)
    vec_k = vec[:, keep].copy()
    vec_k[:, real[keep]] = vec_k[:, real[keep]].real
    broken = dataclasses.replace(good, eigenvalues=lam[keep], basis=vec_k * weight,
                                 to_modal=inv[keep], output=gam @ (vec_k * weight),
                                 drive=inv[keep] @ drive)
    assert modal_reconstruction_error(broken, phi, gam, drive) > 1e-3


def test_near_defective_transition_falls_back_to_the_dense_recursion():
    """A Jordan block perturbed by 1e-14: eigenvectors nearly parallel, so no modal form."""
    phi = np.array([[0.5, 1.0], [1e-14, 0.5]])
    assert modal_form(phi, np.eye(2), np.eye(2)) is None
