"""The full nonlinear master equation: its linear limit and the single-photon regime.

Large-n̄, small-g0/κ limit: the full model must reproduce the linear engine
(Aspelmeyer, Kippenberg, Marquardt, Rev. Mod. Phys. 86, 1391 (2014), Sec.
III.B: linearisation drops −g0 δa†δa (δb + δb†), a relative correction of
order g0/κ). Single-photon regime, g0 ~ κ < Ωm: the cavity resonance moves by
the polaron shift g0²/Ωm and grows phonon sidebands with Poisson weights of
parameter (g0/Ωm)² (Nunnenkamp, Børkje, Girvin, PRL 107, 063602 (2011), Eq.
(5) and Fig. 1), and a weak drive on the single-photon resonance sees photon
blockade, g²(0) < 1 (Rabl, PRL 107, 063601 (2011), Eq. (7) and Fig. 2).
"""

import math

import numpy as np
import pytest
import scipy.constants
from conftest import make_scenario, mode, power_for_photon_number

from simulator.linear.spectra import photon_flux_density
from simulator.linear.steady_state import steady_state
from simulator.master.spectra import carrier_flux, output_flux_density
from simulator.master.steady import master_steady_state
from simulator.model.operating_point import operating_point
from simulator.model.system import System

F_DRIVE = 2.8e14


def linear_regime_scenario(photons=2.0, g0_hz=2e4):
    """g0/κ = 0.02, red sideband, n̄ photons (invented device)."""
    power = power_for_photon_number(photons, linewidth_hz=1e6, external_linewidth_hz=0.5e6,
                                    detuning_hz=-2e6, drive_frequency_hz=F_DRIVE)
    return make_scenario(
        drive={"frequency_hz": F_DRIVE, "wavelength_m": None, "power_w": power,
               "detuning_hz": -2e6, "detuning_reference": "effective"},
        mechanics=[mode(frequency_hz=2e6, linewidth_hz=2e4, coupling_hz=g0_hz,
                        bath_occupation=0.5)])


def test_full_model_reproduces_the_linear_engine_in_its_regime():
    """Stated tolerance 1 % (half of g0/κ = 0.02, the scale of the relative
    effect of the dropped term) for occupations, photon number and the
    spectrum relative to its sideband peak. Measured here: occupations agree
    to 2e-5, ⟨a†a⟩ to n̄ within 8e-4, the spectrum within 3e-4 of the peak."""
    scenario = linear_regime_scenario()
    linear = steady_state(scenario)
    full = master_steady_state(scenario, "full", frame="displaced", tolerance=1e-6)
    assert full.model.frame == "displaced"
    assert full.modes[0].occupation == pytest.approx(linear.modes[0].occupation, rel=1e-2)
    assert full.cavity.occupation == pytest.approx(linear.cavity_occupation, rel=1e-2)
    point = operating_point(scenario)
    assert full.cavity.quanta == pytest.approx(point.photon_number, rel=1e-2)
    f = np.array([-2e6, -1e6, 0.0, 1.9e6, 2e6, 2.1e6])
    master, _ = output_flux_density(full, f)
    flux = photon_flux_density(System(scenario).model, f)
    assert np.max(np.abs(master - flux)) <= 1e-2 * flux.max()
    # the coherent output carrier: |√Φ − √κ_ex ᾱ|² from the mean field
    kappa_ex, kappa = 2 * np.pi * 0.5e6, 2 * np.pi * 1e6
    alpha = np.sqrt(kappa_ex * point.input_photon_flux) / complex(kappa / 2, 2 * np.pi * 2e6)
    expected = abs(np.sqrt(point.input_photon_flux) - np.sqrt(kappa_ex) * alpha) ** 2
    assert carrier_flux(full) == pytest.approx(expected, rel=1e-3)


def test_lab_and_displaced_frames_agree():
    """The lab frame uses no operating point at all: it checks the mean field
    (photon number, static displacement ⟨b⟩ = i g0 n̄/(iΩm + Γm/2)) and the
    displacement algebra of the displaced frame."""
    scenario = linear_regime_scenario(photons=0.5, g0_hz=5e4)
    lab = master_steady_state(scenario, "full", frame="lab", tolerance=1e-7)
    shifted = master_steady_state(scenario, "full", frame="displaced", tolerance=1e-7)
    assert (lab.model.frame, shifted.model.frame) == ("lab", "displaced")
    assert lab.cavity.quanta == pytest.approx(shifted.cavity.quanta, rel=1e-5)
    assert lab.cavity.amplitude == pytest.approx(shifted.cavity.amplitude, rel=1e-5)
    assert lab.modes[0].amplitude == pytest.approx(shifted.modes[0].amplitude, rel=1e-4)
    assert lab.modes[0].occupation == pytest.approx(shifted.modes[0].occupation, rel=1e-4)
    assert lab.cavity_g2 == pytest.approx(shifted.cavity_g2, rel=1e-5)
    n = operating_point(scenario).photon_number
    g0, om, gm = (2 * np.pi * x for x in (5e4, 2e6, 2e4))
    assert lab.modes[0].amplitude == pytest.approx(1j * g0 * n / complex(gm / 2, om), rel=1e-2)


# Single-photon strong coupling (invented device): κ/2π = 1 MHz, Ωm = 4κ,
# g0 = 2κ, so the polaron shift g0²/Ωm = κ and (g0/Ωm)² = 1/4; Γm = 0.02 κ,
# zero temperature. The drive holds n̄ ≈ 1e-3 photons (weak drive); the
# absorption rate κn̄ is far below Γm, so the mechanics relaxes between photons.
K_HZ, KEX_HZ, OM_HZ, GM_HZ, G0_HZ = 1e6, 0.5e6, 4e6, 2e4, 2e6
POLARON_HZ = G0_HZ**2 / OM_HZ
FLUX = 1e-3 * (2 * np.pi * K_HZ) ** 2 / 4 / (2 * np.pi * KEX_HZ)
CUTOFFS = {"cavity": 4, "m0": 10}


def single_photon_scenario(detuning_hz, g0_hz=G0_HZ):
    return make_scenario(
        drive={"frequency_hz": F_DRIVE, "wavelength_m": None, "detuning_hz": detuning_hz,
               "power_w": FLUX * scipy.constants.h * F_DRIVE},
        cavity={"linewidth_hz": K_HZ, "external_linewidth_hz": KEX_HZ},
        mechanics=[mode(frequency_hz=OM_HZ, linewidth_hz=GM_HZ, coupling_hz=g0_hz,
                        bath_occupation=0.0)])


def weak_drive_amplitudes(detuning_hz, g0_hz=G0_HZ, levels=12):
    """Weak-drive pure-state amplitudes (Carmichael, Brecha, Rice, Opt. Commun.
    82, 73 (1991); from memory): with H_eff = H − (i/2)(κ a†a + Γm b†b) and the
    drive √(κ_ex Φ) to first and second order, H_eff ψ1 = −i a†|0⟩ and
    H_eff ψ2 = −i a† ψ1, so ⟨a†a⟩ = κ_ex Φ |ψ1|² and g²(0) = 2|ψ2|²/|ψ1|⁴.
    Dense linear algebra in the 1- and 2-photon sectors: independent of the
    master-equation solvers. Units of κ."""
    k, om, gm, g0, d = 1.0, OM_HZ / K_HZ, GM_HZ / K_HZ, g0_hz / K_HZ, detuning_hz / K_HZ
    b = np.diag(np.sqrt(np.arange(1, levels)), 1)
    eye = np.eye(levels)

    def h_eff(n):
        return (-d * n - 0.5j * k * n) * eye + (om - 0.5j * gm) * b.T @ b - g0 * n * (b + b.T)

    vacuum = eye[0]
    psi1 = np.linalg.solve(h_eff(1), -1j * vacuum)
    psi2 = np.linalg.solve(h_eff(2), -1j * np.sqrt(2) * psi1)
    n1 = np.vdot(psi1, psi1).real
    return n1 * 2 * np.pi * KEX_HZ * FLUX / (2 * np.pi * K_HZ) ** 2, \
        2 * np.vdot(psi2, psi2).real / n1**2


def franck_condon_photon_number(detuning_hz):
    """Nunnenkamp, Børkje, Girvin 2011 (Eq. (5), Γm → 0): under weak drive the
    cavity absorbs on the polaron-shifted resonance and its phonon sidebands,
    ⟨a†a⟩ = κ_ex Φ Σ_k e^{−λ} λ^k/k! / ((κ/2)² + (Δ0 + g0²/Ωm − kΩm)²),
    λ = (g0/Ωm)²."""
    lam = (G0_HZ / OM_HZ) ** 2
    total = sum(math.exp(-lam) * lam**k / math.factorial(k)
                / ((K_HZ / 2) ** 2 + (detuning_hz + POLARON_HZ - k * OM_HZ) ** 2)
                for k in range(25))
    return 2 * np.pi * KEX_HZ * FLUX * total / (2 * np.pi) ** 2


def test_polaron_shift_moves_the_cavity_resonance():
    detunings = np.array([-1.6, -1.3, -1.15, -1.0, -0.85, -0.7, -0.4, 0.0]) * K_HZ
    photons = []
    for d0 in detunings:
        steady = master_steady_state(single_photon_scenario(d0), "full", cutoffs=CUTOFFS,
                                     method="direct", adapt=False)
        assert steady.model.frame == "lab"
        photons.append(steady.cavity.quanta)
        # 3 %: the closed form neglects Γm (2 % of κ) inside the photon lifetime
        assert steady.cavity.quanta == pytest.approx(franck_condon_photon_number(d0), rel=3e-2)
        assert steady.cavity.quanta == pytest.approx(weak_drive_amplitudes(d0)[0], rel=1e-2)
    photons = np.array(photons)
    peak = int(np.argmax(photons))
    # parabola through the three points around the maximum
    x, y = detunings[peak - 1:peak + 2], photons[peak - 1:peak + 2]
    a, b, _ = np.polyfit(x, y, 2)
    assert -b / (2 * a) == pytest.approx(-POLARON_HZ, abs=0.03 * K_HZ)
    assert photons[-1] < 0.3 * photons.max()  # the bare resonance Δ0 = 0 is far off peak


def test_photon_blockade_under_weak_resonant_drive():
    steady = master_steady_state(single_photon_scenario(-POLARON_HZ), "full", cutoffs=CUTOFFS,
                                 method="direct", adapt=False)
    expected = weak_drive_amplitudes(-POLARON_HZ)[1]
    assert expected < 0.5  # blockade in the reference itself
    assert steady.cavity_g2 == pytest.approx(expected, rel=3e-2)
    assert steady.cavity_g2 < 0.5
    # control: with g0 ≪ κ the same weak drive gives a coherent field, g²(0) = 1
    weak = master_steady_state(single_photon_scenario(0.0, g0_hz=1e3), "full",
                               cutoffs={"cavity": 4, "m0": 4}, method="direct", adapt=False)
    assert weak.cavity_g2 == pytest.approx(1.0, abs=1e-3)
