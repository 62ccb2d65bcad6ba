"""Pole–residue spectra against the resolvent and the discrete recursion.

The partial-fraction form (simulator/model/poles.py) must equal
S(ω) = H N H†, H = C(−iω − A)⁻¹B + D, as StateSpace.output_spectrum computes it
(1e-10 relative to the total), for the bundled scenarios, per noise source,
for random stable models and with repeated poles; close to an exceptional
point it must say so and fall back to the resolvent. The sampled form must
equal the spectrum of the exact discrete model (Van Loan's discretisation,
simulator/records/discretize.py) and the aliased × sinc² sum of the
continuous one (Oppenheim and Schafer, Discrete-Time Signal Processing, 3rd
ed. (2010), Sec. 4.2).
"""

import numpy as np
import pytest
from conftest import REPO
from test_discretize import CHAINS, chain_scenario, sampled_from_discrete
from test_record_recursions import MODE_SETS
from test_record_recursions import chain_scenario as record_chain_scenario

from simulator.model import poles
from simulator.model.chain import automatic_sample_rate
from simulator.model.statespace import StateSpace
from simulator.model.system import System
from simulator.scenario.loader import load_scenario

RTOL = 1e-10
BUNDLED = ["membrane_4k", "membrane_phase_noise", "drum_microwave_mK",
           "microtoroid_room_temperature"]


def relative_error(fast, exact):
    """Largest |difference| per frequency over the trace of the exact total."""
    scale = np.abs(np.trace(exact, axis1=-2, axis2=-1))
    return float(np.max(np.abs(fast - exact).max(axis=(-1, -2)) / scale))


@pytest.mark.parametrize("name", BUNDLED)
def test_bundled_scenarios_equal_the_resolvent_in_total_and_per_source(name):
    model = System(load_scenario(REPO / "scenarios" / f"{name}.toml")).chain.model
    omega = 2 * np.pi * np.concatenate([np.linspace(-4e7, 4e7, 3001),
                                        np.geomspace(1.0, 1e8, 400)])
    exact = model.output_spectrum(omega)
    form = poles.pole_form(model)
    assert form.exact and form.method == "pole-residue"
    assert relative_error(form.spectrum(omega)[0], exact) < RTOL
    groups = [idx for _, idx in model.sources]
    split = poles.pole_form(model, groups).spectrum(omega)
    for (_, idx), part in zip(model.sources, split, strict=True):
        sub = StateSpace(A=model.A, B=model.B[:, idx], N=model.N[np.ix_(idx, idx)], C=model.C,
                         D=model.D[:, idx], states=model.states,
                         inputs=tuple(model.inputs[i] for i in idx), outputs=model.outputs)
        # each term relative to the total it is part of (a far tail of one source is tiny)
        assert np.max(np.abs(part - sub.output_spectrum(omega)).max(axis=(-1, -2))
                      / np.abs(np.trace(exact, axis1=-2, axis2=-1))) < RTOL


@pytest.mark.parametrize("seed", range(6))
def test_random_stable_models_equal_the_resolvent(seed):
    rng = np.random.default_rng(seed)
    n, m, p = rng.integers(1, 13), rng.integers(1, 6), rng.integers(1, 3)
    a = rng.normal(size=(n, n))
    a -= (np.max(np.linalg.eigvals(a).real) + rng.uniform(0.01, 1.0)) * np.eye(n)
    root = rng.normal(size=(m, m))
    model = StateSpace(A=a, B=rng.normal(size=(n, m)), N=root @ root.T, C=rng.normal(size=(p, n)),
                       D=rng.normal(size=(p, m)) * rng.integers(0, 2),
                       states=tuple(f"x{i}" for i in range(n)),
                       inputs=tuple(f"w{i}" for i in range(m)),
                       outputs=tuple(f"y{i}" for i in range(p)))
    omega = np.linspace(-30, 30, 2001)
    form = poles.pole_form(model)
    assert form.exact
    assert relative_error(form.spectrum(omega)[0], model.output_spectrum(omega)) < RTOL


def test_repeated_poles_are_exact():
    """Two identical modes with equal couplings: a repeated (non-defective) pole pair,
    and identical I and Q filters: a repeated real pole."""
    scenario = record_chain_scenario(receiver="iq", bandwidth_hz=0.6e6, current_noise=3e-12,
                                     amplifier=0.0, laser="none",
                                     modes=MODE_SETS["two degenerate"], g_hz=20e3)
    model = System(scenario).chain.model
    lam = np.linalg.eigvals(model.A)
    gaps = np.abs(lam[:, None] - lam[None, :]) + np.eye(lam.size) * 1e300
    assert gaps.min() < 1e-6 * np.abs(lam).max()  # degenerate
    omega = 2 * np.pi * np.linspace(-3e6, 3e6, 2001)
    form = poles.pole_form(model)
    assert form.exact
    assert relative_error(form.spectrum(omega)[0], model.output_spectrum(omega)) < RTOL


def test_exceptional_point_falls_back_to_the_resolvent_and_says_so():
    """At g = (κ − Γm)/4 the cavity and the mode share one defective eigenvalue
    (the onset of normal-mode splitting): no eigenvector basis, so the form uses the
    resolvent, reports why, and its continuous and sampled spectra stay exact."""
    kappa, gamma = 200e3, 30.0
    scenario = record_chain_scenario(receiver="iq", bandwidth_hz=0.6e6, current_noise=3e-12,
                                     amplifier=0.0, laser="none", modes=MODE_SETS["one"],
                                     g_hz=(kappa - gamma) / 4)
    chain = System(scenario).chain
    form = poles.pole_form(chain.model)
    assert not form.exact and "resolvent" in form.method and "condition" in form.method
    omega = 2 * np.pi * np.linspace(-3e6, 3e6, 401)
    assert relative_error(form.spectrum(omega)[0], chain.model.output_spectrum(omega)) < RTOL
    fs = automatic_sample_rate(chain)
    f = np.linspace(-fs / 2, fs / 2, 41)[1:-1] + 0.123 * fs / 40
    from simulator.records.discretize import discretize

    disc = discretize(chain.model, 1 / fs, integrator_drift=chain.integrator_drift())
    c = np.array([1.0, 1.0j])
    sampled = chain.channel_form(fs).project(c).spectrum(-2 * np.pi * f)[0, :, 0, 0].real
    np.testing.assert_allclose(sampled, sampled_from_discrete(chain, disc, f), rtol=1e-7)


@pytest.mark.parametrize("name", list(CHAINS))
def test_sampled_form_equals_the_discrete_model_and_the_alias_sum(name):
    """Closed-form sampling of the poles against the spectrum of the exact discrete
    recursion and against the truncated alias sum, for iq, if and homodyne chains."""
    from simulator.records.discretize import discretize

    scenario = chain_scenario(**CHAINS[name])
    chain = System(scenario).chain
    fs = automatic_sample_rate(chain, scenario.detection.intermediate_frequency_hz)
    disc = discretize(chain.model, 1 / fs, integrator_drift=chain.integrator_drift())
    f = np.linspace(-fs / 2, fs / 2, 41)[1:-1] + 0.123 * fs / 40
    matrix = chain.sampled_channel_matrix(f, fs)
    if chain.receiver == "iq":
        c = np.array([1.0, 1.0j])
        record = np.einsum("i,wij,j->w", c, matrix, c.conj()).real
    else:
        record = matrix[:, 0, 0].real
    np.testing.assert_allclose(record, sampled_from_discrete(chain, disc, f), rtol=1e-8)
    np.testing.assert_allclose(record, chain.sampled_spectrum(f, fs, aliases=600), rtol=2e-8)
    # and the continuous record: the if form against the record's own density
    continuous = chain.channel_form()
    if chain.receiver == "iq":
        continuous = continuous.project(np.array([1.0, 1.0j]))
    np.testing.assert_allclose(continuous.spectrum(-2 * np.pi * f)[0, :, 0, 0].real,
                               chain.record_spectrum(f), rtol=1e-12)


def test_compiled_kernel_equals_numpy():
    rng = np.random.default_rng(3)
    n = 12
    lam = -rng.uniform(1, 10, n) + 1j * rng.uniform(-10, 10, n)
    coef = rng.normal(size=(2 * n, 4))
    a = -1j * np.linspace(-20, 20, poles.COMPILED_FROM_POINTS + 5)
    compiled = poles.evaluate(a, lam, coef)
    f = 1.0 / (a[:, None] - lam)
    np.testing.assert_allclose(compiled, f.real @ coef[:n] + f.imag @ coef[n:], rtol=1e-12,
                               atol=1e-12 * np.abs(compiled).max())


def test_eigenbasis_check_names_the_problem():
    jordan = np.array([[-1.0, 1.0], [0.0, -1.0]])  # defective: one eigenvector
    *_, problem = poles.verified_eigenbasis(jordan)
    assert "condition" in problem
    *_, problem = poles.verified_eigenbasis(np.diag([-1.0, -2.0]))
    assert problem == ""


def test_approaching_the_exceptional_point_stays_exact_or_falls_back():
    """g = (κ − Γm)/4 · (1 ± δ) for δ from 10⁻¹ to 10⁻⁸: the eigenvectors grow ever
    more parallel; wherever the form keeps its poles it is within 1e-10 of the
    resolvent, and it falls back (saying so) before it would not be."""
    kappa, gamma = 200e3, 30.0
    omega = 2 * np.pi * np.linspace(-3e6, 3e6, 801)
    fell_back = []
    for delta in (1e-1, 1e-3, 1e-4, -1e-5, 1e-6, 1e-8, -1e-8):
        scenario = record_chain_scenario(
            receiver="iq", bandwidth_hz=0.6e6, current_noise=3e-12, amplifier=0.0,
            laser="none", modes=MODE_SETS["one"], g_hz=(kappa - gamma) / 4 * (1 + delta))
        model = System(scenario).chain.model
        form = poles.pole_form(model)
        assert relative_error(form.spectrum(omega)[0], model.output_spectrum(omega)) < RTOL
        fell_back.append(not form.exact)
    assert fell_back[:3] == [False] * 3 and fell_back[-2:] == [True] * 2


def test_fallback_if_record_equals_the_record_density():
    """The resolvent fallback carries the projection and the carrier of an if record:
    at an exceptional point its continuous density equals the chain's record_spectrum
    and its sampled one the alias sum; its lines still lay a grid in the band."""
    kappa, gamma = 200e3, 30.0
    scenario = record_chain_scenario(receiver="if", bandwidth_hz=None, current_noise=0.0,
                                     amplifier=0.0, laser="none", modes=MODE_SETS["one"],
                                     g_hz=(kappa - gamma) / 4)
    chain = System(scenario).chain
    assert chain.receiver == "if"
    continuous = chain.channel_form()
    assert not continuous.exact
    f = np.linspace(1e4, 4e6, 301)
    np.testing.assert_allclose(continuous.spectrum(-2 * np.pi * f)[0, :, 0, 0].real,
                               chain.record_spectrum(f), rtol=1e-12)
    fs = automatic_sample_rate(chain, scenario.detection.intermediate_frequency_hz)
    g = f[f < fs / 2][::10]
    np.testing.assert_allclose(chain.sampled_channel_matrix(g, fs)[:, 0, 0].real,
                               chain.sampled_spectrum(g, fs), rtol=1e-9)
    centres, widths = chain.channel_form(fs).lines()
    assert np.all(np.abs(centres) <= np.pi * fs * (1 + 1e-12)) and np.all(widths > 0)
