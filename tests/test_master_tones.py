"""The several-tone linearised master equation against the linear engine and the rates.

Tones on two cavity modes cooling one drum (weak coupling, sideband resolved):
the mechanical occupation of the Lindblad steady state (QuTiP, Johansson, Nation
& Nori, Comput. Phys. Commun. 184, 1234 (2013)) equals the Lyapunov one of the
per-tone linear model (the same Langevin equations; truncation only), and both
the summed-rates closed form
n = [Γ n_th + Σk A+,k (n_c + 1) + Σk A−,k n_c]/(Γ + Σk (A−,k − A+,k)),
A∓,k = g_k² κ/(κ²/4 + (Δk ± Ωm)²) (Marquardt, Chen, Clerk & Girvin, Phys. Rev.
Lett. 99, 093902 (2007), Eqs. (3)–(5); Wilson-Rae, Nooshi, Zwerger & Kippenberg,
Phys. Rev. Lett. 99, 093901 (2007)), within the weak-coupling corrections.
"""

import pytest

from simulator.errors import InputError
from simulator.linear.weak_coupling import scattering_rates
from simulator.master.tone_fields import tone_field_occupations, tone_fields_steady_state
from simulator.model.system import System
from simulator.model.units import angular
from simulator.scenario.loader import parse_scenario
from tests.tone_scenarios import OMEGA_HZ, scenario_text, second_mode, tone_table

pytest.importorskip("qutip")


@pytest.fixture(scope="module")
def two_modes():
    """Drive at −Ωm on [cavity], a second red tone on the idler mode (thermal, n_c = 0.05)."""
    return System(parse_scenario(scenario_text(
        drive_photons=2e4, bath_occupation=10.0,
        extra=second_mode(bath_occupation=0.1)
        + tone_table("pump", 2e4, -OMEGA_HZ, "idler", frequency_hz=7e9))))


def test_master_occupation_is_the_lyapunov_and_the_summed_rates(two_modes):
    state = tone_fields_steady_state(two_modes)
    names, linear = tone_field_occupations(two_modes)
    assert state.names == names
    master = state.occupation("drum")
    lyapunov = linear[names.index("drum")]
    point = two_modes.point
    drum = point.modes[0]
    gamma, n_th = angular(drum.linewidth_hz), drum.bath_occupation
    num, den = gamma * n_th, gamma
    for tone in point.tones:
        cav = point.cavity_modes[tone.cavity_mode]
        n_c = (1 - cav.external_linewidth_hz / cav.linewidth_hz) * cav.bath_occupation
        down, up = scattering_rates(g=float(angular(tone.coupling_rates_hz[0])),
                                    kappa=float(angular(cav.linewidth_hz)),
                                    detuning=float(angular(tone.detuning_effective_hz)),
                                    frequency=float(angular(drum.frequency_hz)))
        num += up * (n_c + 1) + down * n_c
        den += down - up
    closed = num / den
    print(f"master {master:.6g}, Lyapunov {lyapunov:.6g}, summed rates {closed:.6g}")
    assert master == pytest.approx(lyapunov, rel=1e-3)
    # weak coupling: g/κ ≈ 0.04 here, the rate formula holds to a few (g/κ)²
    assert master == pytest.approx(closed, rel=2e-2)
    # each tone field also agrees (thermal idler input, near-vacuum drive field)
    for name in ("drive", "pump"):
        assert state.occupation(name) == pytest.approx(linear[names.index(name)],
                                                       rel=1e-2, abs=1e-4)


def test_truncation_and_single_tone_are_refused(two_modes):
    with pytest.raises(InputError, match="top 2 of 3 levels"):
        tone_fields_steady_state(two_modes, cutoffs=(3, 3, 3))
    with pytest.raises(InputError, match="max_dimension"):
        tone_fields_steady_state(two_modes, max_dimension=10)
    with pytest.raises(InputError, match="needs \\[\\[tones\\]\\]"):
        tone_fields_steady_state(parse_scenario(scenario_text()))
