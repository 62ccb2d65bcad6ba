"""The digitiser's spectrum from the sampled pole–residue form, against the alias sum.

simulator.linear.record_budget.digitiser_spectrum takes its total from the
chain's poles and residues sampled in closed form (every alias summed exactly;
simulator/model/poles.py). The route it replaced summed the continuous record
density × sinc² over ±100 aliases (DetectionChain.sampled_spectrum). Checks:

- the two routes agree, in total and line by line, within the alias sum's own
  truncation; that truncation falls as N⁻³ with the number N of aliases
  summed (the coloured part of a low-passed density falls as f⁻⁴ × sinc², so
  the tail beyond N, with its odd part cancelled by the symmetric sum, goes as
  N⁻³), so ±400 aliases come ~4³ = 64 times closer to the pole form than ±100:
  the pole form is the limit, the alias sum the approximation
  (Oppenheim and Schafer, Discrete-Time Signal Processing, 3rd ed. (2010),
  Sec. 4.2: the sampled density is the aliased continuous one);
- the lines sum to the total to 1e-12, on an 11-state model with laser noise,
  with degenerate mechanical modes (repeated poles) and at an exceptional
  point, where the form falls back to the resolvent and says so.
"""

import numpy as np
import pytest
from conftest import REPO
from test_record_budget import ALIAS_SUM_RTOL, RECEIVERS, grid, make
from test_record_recursions import MODE_SETS
from test_record_recursions import chain_scenario as record_chain_scenario

from simulator.linear import record_budget
from simulator.linear.record_budget import ALIASES, digitiser_spectrum
from simulator.model.system import System
from simulator.scenario.loader import load_scenario

# ±400 aliases must close at least this factor of the ±100 gap (N⁻³: 64 expected)
CONVERGENCE = 30.0
ROUND_OFF = 1e-13  # relative differences below this are round-off, not truncation


def alias_sum_route(monkeypatch, system, f, aliases):
    """digitiser_spectrum as it was: the total by the truncated alias sum."""
    with monkeypatch.context() as m:
        m.setattr(record_budget, "sampled_density", lambda chain, g, fs, aliases: (
            chain.sampled_spectrum(g, fs, aliases=aliases), "alias sum"))
        return digitiser_spectrum(system, f, aliases=aliases)


def assert_alias_sum_converges_to(monkeypatch, system, f, exact):
    """Old route at ±100 within ALIAS_SUM_RTOL, line by line; ±400 N⁻³ closer."""
    gaps = {}
    for n in (ALIASES, 4 * ALIASES):
        old = alias_sum_route(monkeypatch, system, f, n)
        assert old.contributions.keys() == exact.contributions.keys()
        scale = np.abs(exact.total)
        gaps[n] = float(np.max(np.abs(old.total - exact.total) / scale))
        for name, line in exact.contributions.items():
            # each line against the total it is part of (the lines cancel in part)
            assert np.max(np.abs(old.contributions[name] - line) / scale) <= gaps[n] + 1e-15
    assert gaps[ALIASES] < ALIAS_SUM_RTOL
    assert gaps[4 * ALIASES] < max(gaps[ALIASES] / CONVERGENCE, ROUND_OFF)
    return gaps


@pytest.mark.parametrize("kind", list(RECEIVERS))
def test_alias_sum_converges_to_the_pole_form_in_total_and_per_line(kind, monkeypatch):
    system = System(make(**RECEIVERS[kind]))
    f = grid(kind)
    exact = digitiser_spectrum(system, f)
    assert exact.calibration["sampled_by"] == "pole-residue"
    assert exact.budget_residual() < 1e-12
    gaps = assert_alias_sum_converges_to(monkeypatch, system, f, exact)
    if kind != "homodyne":  # behind a low-pass the truncation is visible, not round-off
        assert gaps[ALIASES] > 1e-10


def test_eleven_states_with_laser_noise(monkeypatch):
    """The bundled scenario whose alias sum took ~14 s: same total and lines."""
    system = System(load_scenario(REPO / "scenarios" / "membrane_phase_noise.toml"))
    assert len(system.chain.model.states) == 11
    spectrum = digitiser_spectrum(system)
    assert spectrum.calibration["sampled_by"] == "pole-residue"
    assert spectrum.budget_residual() < 1e-12
    f = spectrum.frequency_hz[::97]  # ~70 points: the alias sum is the slow side here
    assert_alias_sum_converges_to(monkeypatch, system, f, digitiser_spectrum(system, f))
    np.testing.assert_allclose(spectrum.total[::97], digitiser_spectrum(system, f).total,
                               rtol=1e-12)


@pytest.mark.parametrize("receiver", ["iq", "if", "homodyne"])
def test_repeated_poles_and_the_exceptional_point(receiver, monkeypatch):
    """Two degenerate modes (repeated poles): exact form. At g = (κ − Γm)/4 the cavity
    and the mode share a defective eigenvalue: the resolvent fallback, named in the
    calibration, still gives the record's density, and the lines still close."""
    kappa, gamma = 200e3, 30.0
    common = dict(receiver=receiver, bandwidth_hz=0.6e6, current_noise=3e-12, amplifier=1.0,
                  laser="none")
    cases = {"pole-residue": dict(modes=MODE_SETS["two degenerate"], g_hz=20e3),
             "resolvent": dict(modes=MODE_SETS["one"], g_hz=(kappa - gamma) / 4)}
    for method, case in cases.items():
        system = System(record_chain_scenario(**common, **case))
        fs = system.scenario.digitizer.sample_rate_hz
        f = np.linspace(-fs / 2 if receiver == "iq" else 0.0, fs / 2, 61)[1:-1]
        spectrum = digitiser_spectrum(system, f)
        assert spectrum.calibration["sampled_by"].startswith(method)
        assert spectrum.budget_residual() < 1e-12
        old = system.chain.sampled_spectrum(f, fs, aliases=4 * ALIASES)
        # the if fallback is itself an alias sum over ±100: the ±400 one within its
        # truncation; the others are exact (closed form or discrete-time resolvent)
        np.testing.assert_allclose(spectrum.total, old, rtol=ALIAS_SUM_RTOL)
        if method == "resolvent" and receiver == "if":
            np.testing.assert_allclose(
                spectrum.total, system.chain.sampled_spectrum(f, fs, aliases=ALIASES),
                rtol=1e-12)
