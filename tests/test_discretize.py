"""Exact discretisation (Van Loan), the innovations form and the chain's sampled spectrum.

Deterministic checks, no random numbers:

- a scalar Ornstein–Uhlenbeck process with integrate-and-dump output, where
  every entry of Φ, Γ and the joint noise covariance has a closed form,
  including a stiff case (decay rate 50 times the sample rate) that exercises
  the interval doubling;
- for every receiver of the detection chain (iq, if, homodyne; with filter,
  current noise, amplifier), the exact discrete-time spectrum of the sampled
  model equals the continuous chain spectrum aliased and multiplied by sinc²,
  which is what integrate-and-dump sampling must give;
- the stationary covariance is invariant under the discrete step;
- the innovations form has exactly the output autocovariance of the full model.
"""

import dataclasses

import numpy as np
import pytest
from conftest import mode, scenario_with_coupling

from simulator.model.chain import automatic_sample_rate
from simulator.model.statespace import StateSpace
from simulator.model.system import System
from simulator.records.discretize import discretize, innovations_form, noise_factor
from simulator.scenario.loader import scenario_from_dict


def ou_model(gamma, intensity, feedthrough):
    """dx = −γ x dt + dW, y = x + d·(dW/dt), E[dW²] = q dt."""
    return StateSpace(A=[[-gamma]], B=[[1.0]], N=[[intensity]], C=[[1.0]], D=[[feedthrough]],
                      states=("x",), inputs=("w",), outputs=("y",))


def ou_closed_form(gamma, q, d, t):
    """Φ, Γ, Q_ww, Q_wv, Q_vv of the OU process with averaged output over [0, T].

    Derived by direct integration: x(T) = e^{−γT}x0 + ∫e^{−γ(T−u)}dW,
    ρ = ∫₀ᵀ y ds = x0(1 − e^{−γT})/γ + ∫[(1 − e^{−γ(T−u)})/γ + d] dW(u);
    the same structure as the exact update of the OU process and its integral
    in Gillespie, Phys. Rev. E 54, 2084 (1996) (citation from memory).
    """
    e1, e2 = np.exp(-gamma * t), np.exp(-2 * gamma * t)
    phi = e1
    gam = (1 - e1) / (gamma * t)
    qww = q * (1 - e2) / (2 * gamma)
    int_state = (t - 2 * (1 - e1) / gamma + (1 - e2) / (2 * gamma)) / gamma**2
    int_cross = (t - (1 - e1) / gamma) / gamma
    qvv = q * (int_state + 2 * d * int_cross + d**2 * t) / t**2
    qwv = q * ((1 - e1) / gamma - (1 - e2) / (2 * gamma)) / gamma / t + q * d * (1 - e1) / (
        gamma * t)
    return phi, gam, qww, qwv, qvv


@pytest.mark.parametrize("gamma_t, d", [(0.3, 0.0), (0.3, 0.7), (50.0, 0.0), (50.0, -1.3)])
def test_ornstein_uhlenbeck_closed_form(gamma_t, d):
    t, q = 1e-6, 2.5
    gamma = gamma_t / t
    disc = discretize(ou_model(gamma, q, d), t)
    phi, gam, qww, qwv, qvv = ou_closed_form(gamma, q, d, t)
    assert disc.transition[0, 0] == pytest.approx(phi, rel=1e-12)
    assert disc.output[0, 0] == pytest.approx(gam, rel=1e-12)
    assert disc.process_noise[0, 0] == pytest.approx(qww, rel=1e-10)
    assert disc.cross_covariance[0, 0] == pytest.approx(qwv, rel=1e-9)
    assert disc.output_noise[0, 0] == pytest.approx(qvv, rel=1e-9)


def chain_scenario(**sections):
    """A sideband-cooling scenario with the chain sections given as dicts."""
    base = scenario_with_coupling(
        g_hz=40e3, linewidth_hz=600e3, detuning_hz=-300e3,
        modes=[mode(frequency_hz=300e3, linewidth_hz=3e3, coupling_hz=200.0,
                    bath_occupation=2.0, effective_mass_kg=1e-13)])
    data = base.to_dict()
    for name, values in sections.items():
        data.setdefault(name, {}).update(values)
    return scenario_from_dict(data, source="<test>")


CHAINS = {
    "iq ideal": {},
    "iq filtered, noisy, lossy": dict(
        detection={"efficiency": 0.7},
        electronics={"bandwidth_hz": 1.1e6, "current_noise_a_per_sqrt_hz": 2e-12}),
    "iq amplifier, single-ended": dict(
        detection={"balanced": False}, electronics={"amplifier_added_quanta": 12.0}),
    "if below, filtered": dict(
        detection={"intermediate_frequency_hz": 2.3e6},
        record={"kind": "if"}, electronics={"bandwidth_hz": 5e6,
                                             "current_noise_a_per_sqrt_hz": 1e-12}),
    "if above": dict(detection={"intermediate_frequency_hz": 1.7e6,
                                "local_oscillator_side": "above"}, record={"kind": "if"}),
    "homodyne filtered": dict(detection={"scheme": "homodyne", "quadrature_angle_rad": 1.1},
                              electronics={"bandwidth_hz": 0.8e6,
                                           "current_noise_a_per_sqrt_hz": 1e-12}),
}


def sampled_from_discrete(chain, disc, f):
    """Density of the stored record from the discrete model (FFT convention).

    iq: w = I + iQ, S_w = c S cᴴ with c = (1, i). if: the time average of
    r_n = 2 Re[e^{iθT(n+1)} ρ_n] is S_ρ(f − θ/2π) + S_ρ(−f − θ/2π).
    """
    c = np.array([1.0, 1.0j])
    if chain.receiver == "homodyne":
        return disc.spectrum(f)[..., 0, 0].real
    proj = lambda g: np.einsum("i,...ij,j->...", c, disc.spectrum(g), c.conj()).real  # noqa: E731
    if chain.receiver == "iq":
        return proj(f)
    shift = chain.carrier_rad_s / (2 * np.pi)
    return proj(f - shift) + proj(-f - shift)


@pytest.mark.parametrize("name", list(CHAINS))
def test_sampled_spectrum_is_aliased_continuous_times_sinc2(name):
    """Integrate-and-dump: S_n(f) = Σ_k S(f + k fs) sinc²((f + k fs)/fs), exactly.

    Standard sampling theory (e.g. Oppenheim and Schafer, Discrete-Time
    Signal Processing, 3rd ed. (2010), Sec. 4.2): averaging over the interval
    is a filter with |H|² = sinc²(f/fs), then sampling aliases.
    """
    scenario = chain_scenario(**CHAINS[name])
    chain = System(scenario).chain
    fs = automatic_sample_rate(chain, scenario.detection.intermediate_frequency_hz)
    disc = discretize(chain.model, 1 / fs, integrator_drift=chain.integrator_drift())
    f = np.linspace(-fs / 2, fs / 2, 41)[1:-1] + 0.123 * fs / 40
    exact = sampled_from_discrete(chain, disc, f)
    analytic = chain.sampled_spectrum(f, fs, aliases=600)
    np.testing.assert_allclose(exact, analytic, rtol=2e-8)


@pytest.mark.parametrize("name", list(CHAINS))
def test_stationary_covariance_is_invariant(name):
    scenario = chain_scenario(**CHAINS[name])
    chain = System(scenario).chain
    disc = discretize(chain.model, 1 / 4e6, integrator_drift=chain.integrator_drift())
    v = disc.state_covariance
    step = disc.transition @ v @ disc.transition.T + disc.process_noise
    np.testing.assert_allclose(step, v, atol=1e-10 * np.abs(v).max())


@pytest.mark.parametrize("name", list(CHAINS))
def test_innovations_form_reproduces_the_autocovariance(name):
    """Anderson and Moore, Optimal Filtering (1979), Ch. 9: the innovations
    representation has the same output second-order statistics."""
    scenario = chain_scenario(**CHAINS[name])
    chain = System(scenario).chain
    disc = discretize(chain.model, 1 / 4e6, integrator_drift=chain.integrator_drift())
    inn = innovations_form(disc)
    assert np.linalg.eigvalsh(inn.predictor_covariance).min() > -1e-12 * np.abs(
        disc.state_covariance).max()
    # The innovations model written as a DiscreteModel: state noise K e, output noise e.
    k, s = inn.gain, inn.innovation_covariance
    joint = np.block([[k @ s @ k.T, k @ s], [s @ k.T, s]])
    innov = dataclasses.replace(disc, noise_covariance=joint,
                                state_covariance=inn.predictor_covariance)
    lags = 60
    np.testing.assert_allclose(innov.autocovariance(lags), disc.autocovariance(lags),
                               atol=1e-9 * np.abs(disc.autocovariance(1)).max())
    # and it needs one normal per output channel
    assert s.shape == (len(chain.model.outputs),) * 2


def test_noise_factor_reproduces_rank_deficient_and_badly_scaled_covariances():
    rng = np.random.default_rng(5)
    m = rng.standard_normal((6, 3))
    scale = np.diag([1e-6, 1.0, 1e5, 3.0, 1e-3, 10.0])
    cov = scale @ m @ m.T @ scale
    factor = noise_factor(cov)
    assert factor.shape == (6, 3)
    np.testing.assert_allclose(factor @ factor.T, cov, rtol=1e-9,
                               atol=1e-12 * np.sqrt(np.outer(np.diag(cov), np.diag(cov))).max())
    rel = np.abs(factor @ factor.T - cov) / np.sqrt(np.outer(np.diag(cov), np.diag(cov)))
    assert rel.max() < 1e-10


def test_bad_interval_is_rejected():
    with pytest.raises(ValueError, match="sample_interval_s"):
        discretize(ou_model(1.0, 1.0, 0.0), -1.0)
