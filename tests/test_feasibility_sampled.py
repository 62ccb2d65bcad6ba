"""The Cramér–Rao bound is that of the samples actually recorded.

The record is integrate-and-dump samples: its spectral matrix is the continuous
one aliased and multiplied by sinc²(f/fs) on |f| < fs/2 (Oppenheim and Schafer,
Discrete-Time Signal Processing, 3rd ed. (2010), Sec. 4.2). Here records made
by the exact discrete recursion (simulator/records) are checked against the
Fisher information of that sampled matrix through the Whittle score, and the
automatic sample rate against its documented rule (docs/records.md).
"""

import numpy as np
import pytest

from simulator.analysis.feasibility import default_paths, fisher_matrix, occupation_bound
from simulator.analysis.information import steps
from simulator.model.chain import LINE_SINC2, automatic_sample_rate
from simulator.model.system import System
from simulator.workflows.demo import demo_scenario

OLD_RATE_HZ = 5e6  # the demo's 1.5 MHz lines at 0.3 fs (sinc² = 0.74), as the former rule allowed


@pytest.fixture(scope="module")
def demo():
    return demo_scenario()


def whittle_scores(counts, scale, fs, s, ds, segment):
    """Score of the Whittle likelihood of each segment of an iq record, at the truth.

    For real channels with DFT X_k the periodogram matrix P_k = X_k X_k†/(L fs) is,
    at 0 < f_k < fs/2, complex Wishart with one degree of freedom about S(f_k),
    so U = Σ_k [tr(S⁻¹∂S S⁻¹ P_k) − tr(S⁻¹∂S)] has mean 0 and variance
    Σ_k tr(S⁻¹∂S S⁻¹∂S) = T_segment · F (Whittle, Ark. Mat. 2, 423 (1953)).
    """
    x = counts[: counts.shape[0] // segment * segment].reshape(-1, segment, 2) * scale
    spectra = np.fft.fft(x, axis=1)[:, 1:segment // 2]  # (segments, bins, 2)
    inv = np.linalg.inv(s)
    a = inv @ ds @ inv
    quad = np.einsum("kwa,wab,kwb->k", spectra.conj(), a, spectra).real / (segment * fs)
    return quad - np.trace(inv @ ds, axis1=1, axis2=2).real.sum()


def test_whittle_score_of_records_has_the_variance_of_the_sampled_bound(demo):
    """The demo's 1.5 MHz lines sampled at 5 MHz (sinc² = 0.74 at the lines): the score
    variance over 600 records of 4096 samples equals T·F of the sampled matrix within
    4 standard errors (√(2/599) of a Gaussian sample variance), and the information of
    the continuous record, 30 % higher, lies outside that band."""
    path = default_paths(demo)[0]
    scenario = demo.replace("digitizer.sample_rate_hz", OLD_RATE_HZ)
    segment, count = 4096, 600
    scenario = scenario.replace("record.duration_s", segment * count / OLD_RATE_HZ)
    from simulator.records.generate import generate_record

    record = generate_record(System(scenario), seed=20261202)
    f = np.fft.fftfreq(segment, 1 / OLD_RATE_HZ)[1:segment // 2]
    up, down, span = steps(scenario, path)
    matrix = lambda s: System(s).chain.sampled_channel_matrix(f, OLD_RATE_HZ)  # noqa: E731
    s = matrix(scenario)
    ds = (matrix(up) - matrix(down)) / span
    scores = whittle_scores(record.counts.astype(float), record.shot_noise_per_count,
                            OLD_RATE_HZ, s, ds, segment)
    t_segment = segment / OLD_RATE_HZ
    sampled = fisher_matrix(scenario, [path])[0, 0] * t_segment
    continuous = fisher_matrix(scenario, [path], sample_rate_hz=np.inf)[0, 0] * t_segment
    error = 4 * np.sqrt(2 / (count - 1))
    print(f"score variance {scores.var(ddof=1):.4f}, sampled T·F {sampled:.4f}, "
          f"continuous T·F {continuous:.4f}, mean {scores.mean():.4f}")
    assert scores.var(ddof=1) == pytest.approx(sampled, rel=error)
    assert abs(scores.mean()) < 4 * np.sqrt(sampled / count)
    assert continuous > sampled * (1 + error)


def test_bound_approaches_the_continuous_one_as_the_rate_grows(demo):
    """sinc² → 1 and the aliases vanish as fs → ∞: the occupation bound of the samples
    falls towards that of the continuous record, and is larger at every finite rate
    (the samples are a function of the continuous record)."""
    errors = [occupation_bound(demo, sample_rate_hz=fs).error_one_second
              for fs in (5e6, 2e7, 2e8, np.inf)]
    assert errors[0] > errors[1] > errors[2] >= errors[3] * (1 - 1e-6)
    assert errors[2] == pytest.approx(errors[3], rel=2e-3)
    assert errors[0] > 1.1 * errors[3]  # the old rate lost ≥ 10 % in σ_n


def test_grid_resolves_the_information_integral(demo):
    """The default grid against one four times as dense (and resolving 10× closer to
    each line): the trapezoidal integral agrees to 1e-3."""
    from simulator.analysis.feasibility import _grid, _sample_rate
    from simulator.analysis.information import record_grid

    system = System(demo)
    fs = _sample_rate(system)
    paths = list(default_paths(demo))
    coarse = fisher_matrix(system, paths, frequency_hz=_grid(system, fs) / (2 * np.pi))
    fine = record_grid(system.chain.channel_form(fs), np.pi * fs, points_per_decade=192,
                       closest=1e-3, coarse_points=1601)
    dense = fisher_matrix(system, paths, frequency_hz=fine / (2 * np.pi))
    np.testing.assert_allclose(coarse, dense, rtol=1e-3)


@pytest.mark.parametrize("kind", ["iq", "if"])
def test_automatic_rate_keeps_95_percent_of_every_line(demo, kind):
    """The rule of docs/records.md: sinc²(f/fs) ≥ 0.95 at the highest line centre
    (plus f_IF for a real record), and fs/2 above every line with three half-widths."""
    from simulator.model.laser_noise import device_eigenvalues

    scenario = demo.replace("detection.intermediate_frequency_hz", 8e6)
    scenario = scenario.replace("record.kind", kind)
    chain = System(scenario).chain
    f_if = scenario.detection.intermediate_frequency_hz if kind == "if" else 0.0
    fs = automatic_sample_rate(chain, scenario.detection.intermediate_frequency_hz)
    lam = device_eigenvalues(chain.model, also=("filter",)) / (2 * np.pi)
    line = np.max(np.abs(lam.imag)) + f_if
    top = np.max(np.abs(lam.imag) + 3 * np.abs(lam.real)) + f_if
    assert np.sinc(line / fs) ** 2 >= LINE_SINC2
    assert fs / 2 >= top
    # the smallest rate meeting both, rounded up by at most 25 %: sinc² at 1/1.25 of fs fails
    # unless the band condition set the rate
    assert np.sinc(line / (fs / 1.25)) ** 2 < LINE_SINC2 or fs <= 1.25 * 2.5 * top


def test_bound_reports_its_rate_and_method(demo):
    bound = occupation_bound(demo)
    assert bound.sample_rate_hz == automatic_sample_rate(System(demo).chain)
    assert bound.method == "pole-residue"
    with pytest.raises(Exception, match="sample_rate_hz"):
        occupation_bound(demo, sample_rate_hz=-1.0)


def test_bound_at_an_exceptional_point_uses_the_resolvent_and_says_so():
    """At g = (κ − Γm)/4 (no eigenvector basis) the bound comes from the resolvent with
    the aliases summed, names that in its method, and agrees with the pole-residue
    bound a relative 10⁻³ away in g (the bound is smooth through the point)."""
    from test_record_recursions import MODE_SETS, chain_scenario

    kappa, gamma = 200e3, 30.0
    values = {}
    for delta in (0.0, 1e-3):
        scenario = chain_scenario(receiver="iq", bandwidth_hz=0.6e6, current_noise=3e-12,
                                  amplifier=0.0, laser="none", modes=MODE_SETS["one"],
                                  g_hz=(kappa - gamma) / 4 * (1 + delta))
        values[delta] = occupation_bound(scenario)
    assert "resolvent" in values[0.0].method and "condition" in values[0.0].method
    assert values[1e-3].method == "pole-residue"
    assert values[0.0].error_one_second == pytest.approx(values[1e-3].error_one_second,
                                                         rel=3e-3)


def test_if_record_information_of_the_samples_equals_the_alias_sum_route(demo):
    """The one real photocurrent at f_IF = 8 MHz, sampled: the information from the
    carried and sampled pole form equals ∫_0^{fs/2} (∂S/S)² df with S the chain's own
    sampled density (DetectionChain.sampled_spectrum: aliases of the time-averaged
    photocurrent density × sinc², a second route) differenced whole, on the same grid."""
    from simulator.analysis.feasibility import _grid, _sample_rate

    scenario = demo.replace("detection.intermediate_frequency_hz", 8e6)
    scenario = scenario.replace("record.kind", "if")
    system = System(scenario)
    fs = _sample_rate(system)
    f = _grid(system, fs)[::5] / (2 * np.pi)
    f = f[(f > 0) & (f < fs / 2)]
    path = default_paths(scenario)[0]
    up, down, span = steps(scenario, path)
    density = lambda s: System(s).chain.sampled_spectrum(f, fs, aliases=100)  # noqa: E731
    ratio = (density(up) - density(down)) / span / density(scenario)
    direct = np.trapezoid(ratio**2, f)
    assert fisher_matrix(system, [path], frequency_hz=f)[0, 0] == pytest.approx(direct, rel=1e-4)
