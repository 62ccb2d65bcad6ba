"""The back-action-evading pair as a System: budget, closed forms and the exact periodic model.

A scenario with ``detection.backaction_evading = true`` and tones at ±Ωm
about one cavity mode builds the rotating-wave two-tone model of Clerk,
Marquardt & Jacobs, New J. Phys. 10, 095010 (2008), with the counter-rotating
terms as a stated bath correction (simulator/model/backaction_evasion.py).
Checks: the measured quadrature X1 carries no back-action but the
counter-rotating residual, which scales as (κ/4Ωm)²; the imprecision and the
conjugate quadrature's heating against their closed forms; the System's
heterodyne spectrum, its X1 and X2 variances and its mechanical line (width
and frequency) against the exact linearised equations with time-periodic
coefficients (tests/periodic_linear.py; the spectrum by harmonic balance),
where nothing is dropped.
"""

import numpy as np
import pytest
from periodic_linear import optomechanical_diffusion, optomechanical_drift, periodic_covariance
from scipy.integrate import solve_ivp
from tone_scenarios import CARRIER_HZ, G0_HZ, OMEGA_HZ, scenario_text, tone_table

from simulator.errors import InputError, ScenarioError
from simulator.linear.quadratures import (
    closed_form_variances,
    imprecision_closed_form,
    quadrature_budget,
)
from simulator.linear.spectra import heterodyne_spectrum, homodyne_spectrum, state_spectrum
from simulator.linear.steady_state import steady_state
from simulator.model.backaction_evasion import backaction_evading_model, pair_parameters
from simulator.model.system import System
from simulator.model.units import angular
from simulator.scenario.loader import parse_scenario

PHOTONS, GAMMA_HZ = 1e4, 10.0
PAIR = "\n[detection]\nbackaction_evading = true\nefficiency = {eta!r}\n"


def pair(kappa_hz=200e3, *, upper_photons=PHOTONS, n_bath=0.0, cavity_bath=0.0, eta=1.0,
         spacing_offset_hz=0.0):
    """Lower tone (the drive) at −Ωm, upper at +Ωm (+ offset), declared a pair."""
    upper = tone_table("upper", upper_photons, OMEGA_HZ + spacing_offset_hz,
                       kappa_hz=kappa_hz, frequency_hz=CARRIER_HZ + 2 * OMEGA_HZ)
    text = scenario_text(drive_photons=PHOTONS, bath_occupation=n_bath,
                         linewidth_hz=GAMMA_HZ, kappa_hz=kappa_hz,
                         extra=PAIR.format(eta=eta) + upper)
    return parse_scenario(text.replace("[[mechanics]]",
                                       f"bath_occupation = {cavity_bath!r}\n[[mechanics]]", 1))


def exact_periodic(scenario, samples=64):
    """Period-averaged X1, X2 variances and the mechanical Floquet multipliers of the
    exact linearised equations (one frame, the lower tone's; mechanics in the lab)."""
    point = System(scenario).point
    low, up = sorted(point.tones, key=lambda t: t.detuning_effective_hz)
    d_low = angular(low.detuning_effective_hz)
    nu2 = angular(up.detuning_effective_hz) - d_low
    cav, mode = point.cavity_modes[0], point.modes[0]
    fields = [dict(kappa=angular(cav.linewidth_hz), kappa_ex=angular(cav.external_linewidth_hz),
                   n_bath=cav.bath_occupation, detuning=d_low, g0=[angular(G0_HZ)],
                   tones=[(np.sqrt(low.photon_number), 0.0), (np.sqrt(up.photon_number), nu2)])]
    mech = [dict(frequency=angular(OMEGA_HZ), linewidth=angular(GAMMA_HZ),
                 n_bath=mode.bath_occupation)]
    drift, n = optomechanical_drift(fields, mech)
    period = 2 * np.pi / nu2
    vs = periodic_covariance(drift, optomechanical_diffusion(fields, mech), period, n,
                             samples=samples, average=False)[:-1]
    x1 = x2 = 0.0
    for t, v in zip(np.arange(samples) * period / samples, vs, strict=True):
        c, s = np.cos(nu2 / 2 * t), np.sin(nu2 / 2 * t)
        x1 += np.array([c, -s]) @ v[2:4, 2:4] @ np.array([c, -s]) / samples
        x2 += np.array([s, c]) @ v[2:4, 2:4] @ np.array([s, c]) / samples
    monodromy = solve_ivp(lambda t, y: (drift(t) @ y.reshape(n, n)).ravel(), (0, period),
                          np.eye(n).ravel(), method="DOP853", rtol=1e-12,
                          atol=1e-14).y[:, -1].reshape(n, n)
    mu = np.linalg.eigvals(monodromy)
    return x1, x2, mu[np.argsort(-np.abs(mu))[:2]], period


def exact_heterodyne(scenario, frequency_hz, harmonics=3, samples=8):
    """Time-averaged heterodyne spectrum (cavity port, η = 1) of the exact periodic
    equations at offsets ``frequency_hz`` from the pair's mean frequency.

    Harmonic balance (frequency-domain Floquet theory): with A(t) = Σm Am e^(−imΩ0t),
    Ω0 = 2ν, an input e^(−iωt) drives x(t) = Σk xk e^(−i(ω + kΩ0)t) with
    (−i(ω + kΩ0) − A0) xk − A1 x(k−1) − A−1 x(k+1) = δk0 B; the time-averaged
    density at ω' sums the harmonics k of the inputs at ω' − kΩ0 (cross terms of
    different k average out). Am are exact from ``samples`` points of A(t), a
    trigonometric polynomial of degree one in Ω0 t (harmonic transfer functions:
    Wereley & Hall, Proc. 29th IEEE Conf. Decision and Control (1990), recalled
    from memory; common practice for periodic systems).
    """
    point = System(scenario).point
    low, up = sorted(point.tones, key=lambda t: t.detuning_effective_hz)
    d_low = angular(low.detuning_effective_hz)
    om0 = angular(up.detuning_effective_hz) - d_low
    cav, mode = point.cavity_modes[0], point.modes[0]
    kappa, kex = angular([cav.linewidth_hz, cav.external_linewidth_hz])
    fields = [dict(kappa=kappa, kappa_ex=kex, n_bath=cav.bath_occupation, detuning=d_low,
                   g0=[angular(G0_HZ)],
                   tones=[(np.sqrt(low.photon_number), 0.0), (np.sqrt(up.photon_number), om0)])]
    mech = [dict(frequency=angular(OMEGA_HZ), linewidth=angular(GAMMA_HZ))]
    drift, n = optomechanical_drift(fields, mech)
    times = np.arange(samples) * 2 * np.pi / om0 / samples
    a_t = np.array([drift(t) for t in times])
    coef = {m: np.einsum("j,jab->ab", np.exp(1j * m * om0 * times), a_t) / samples
            for m in (-1, 0, 1)}
    b = np.zeros((4, 6))
    b[0:2, 0:2], b[0:2, 2:4] = np.sqrt(kex) * np.eye(2), np.sqrt(kappa - kex) * np.eye(2)
    b[2:4, 4:6] = np.sqrt(angular(GAMMA_HZ)) * np.eye(2)
    noise = np.diag([0.5] * 2 + [cav.bath_occupation + 0.5] * 2 + [mode.bath_occupation + 0.5] * 2)
    c, d = np.hstack([-np.sqrt(kex) * np.eye(2), np.zeros((2, 2))]), np.eye(2, 6)
    u = np.array([1.0, 1.0j]) / np.sqrt(2)
    ks = range(-harmonics, harmonics + 1)
    size = len(ks) * n
    out = []
    for w_out in angular(np.asarray(frequency_hz, dtype=float)) + om0 / 2:  # ω̄'s frame
        total = 0.0
        for k in ks:
            w, m = w_out - k * om0, np.zeros((size, size), complex)
            for i, kk in enumerate(ks):
                m[i * n:(i + 1) * n, i * n:(i + 1) * n] = -1j * (w + kk * om0) * np.eye(n) - coef[0]
                if i > 0:
                    m[i * n:(i + 1) * n, (i - 1) * n:i * n] = -coef[1]
                if i < len(ks) - 1:
                    m[i * n:(i + 1) * n, (i + 1) * n:(i + 2) * n] = -coef[-1]
            rhs = np.zeros((size, 6), complex)
            rhs[harmonics * n:(harmonics + 1) * n] = b
            x = np.linalg.solve(m, rhs)[(k + harmonics) * n:(k + harmonics + 1) * n]
            h = u @ (c @ x + (d if k == 0 else 0))
            total += float(np.real(h @ noise @ h.conj()))
        out.append(total + 0.5)  # 1 + (S̄zz − ½)
    return np.array(out)


@pytest.mark.parametrize("kappa_hz", [400e3, 100e3])
def test_measured_quadrature_is_free_of_backaction_up_to_counter_rotating_terms(kappa_hz):
    """Equal couplings, ν = Ωm: the cavity's noise reaches X1 only through the
    counter-rotating terms, ½ (κ/4Ωm)² of the heating of X2 (module notes of
    simulator.linear.quadratures), and the exact periodic X1 agrees (the exact
    residual itself is checked in tests/test_backaction_evasion.py)."""
    budget = quadrature_budget(pair(kappa_hz))
    small = (kappa_hz / (4 * OMEGA_HZ)) ** 2
    assert abs(budget.x1_backaction) < 1e-12 * budget.x2_heating
    ratio = budget.x1_counter_rotating / budget.x2_heating
    assert ratio / small == pytest.approx(0.5, rel=0.02)
    x1, x2, _, _ = exact_periodic(pair(kappa_hz))
    assert budget.x1_counter_rotating == pytest.approx(x1 - 0.5, rel=1e-3)
    assert budget.x2_variance == pytest.approx(x2, rel=1e-6)


def test_counter_rotating_residual_scales_as_kappa_squared():
    """Halving κ quarters the residual back-action on X1 relative to X2's heating."""
    ratios = []
    for kappa_hz in (400e3, 200e3, 100e3):
        b = quadrature_budget(pair(kappa_hz))
        ratios.append(b.x1_counter_rotating / b.x2_heating)
    assert ratios[0] / ratios[1] == pytest.approx(4.0, rel=1e-3)
    assert ratios[1] / ratios[2] == pytest.approx(4.0, rel=1e-3)
    pure = backaction_evading_model(pair(400e3), counter_rotating=False).covariance()
    assert pure[2, 2] == pytest.approx(0.5, abs=1e-12)  # the rotating-wave model alone


def test_variances_against_closed_forms():
    """Var X1 = n_th + ½ + (A+ + A−)(n_c + ½)/Γm and Var X2 = Var X1 + 4c²(n_c + ½)/
    (Γm(Γm + κ)): derived from the model's equations (simulator.linear.quadratures),
    with a hot drum and a hot internal loss."""
    scenario = pair(200e3, n_bath=30.0, cavity_bath=0.2)
    budget = quadrature_budget(scenario)
    x1, x2 = closed_form_variances(pair_parameters(scenario, System(scenario).point))
    assert budget.x1_variance == pytest.approx(x1, rel=1e-9)
    assert budget.x2_variance == pytest.approx(x2, rel=1e-9)
    assert sum(budget.x2_by_source.values()) == pytest.approx(budget.x2_variance, rel=1e-9)


def test_imprecision_referred_to_x1_against_closed_form():
    """The phase quadrature's homodyne spectrum over the transduction of X1 is X1's own
    spectrum plus S_imp(f) = (κ²/4 + ω²)/(2ηκex c²) + κin n_bath/c² (closed form of the
    module notes; its ω = 0 value as in Clerk, Marquardt & Jacobs (2008), Sec. 3,
    recalled from memory)."""
    eta = 0.6
    scenario = pair(200e3, n_bath=5.0, cavity_bath=0.3, eta=eta)
    system = System(scenario)
    p = pair_parameters(scenario, system.point)
    f = np.array([0.0, 3.0, 30.0, 3e3, 1e5])
    detected = homodyne_spectrum(system, f, quadrature_angle=np.pi / 2).total
    x1 = state_spectrum(system.model, f, ["drum.X1"])[:, 0, 0].real
    c, w = p.g_minus + p.g_plus, angular(f)
    transduction = 2 * eta * p.kappa_ex * c**2 / (p.kappa**2 / 4 + w**2)
    imprecision = (detected - 1) / transduction - x1 + 1 / transduction
    assert imprecision == pytest.approx(imprecision_closed_form(p, f, eta), rel=1e-7)
    budget = quadrature_budget(system)
    assert budget.imprecision_per_hz == pytest.approx(imprecision_closed_form(p, 0.0, eta))
    assert budget.imprecision_quanta < 0.5  # below the one-tone standard quantum limit


def test_mechanical_line_against_floquet_multipliers():
    """Unequal couplings (G+ = G−/2) and ν off Ωm by 50 Hz: the counter-rotating
    damping and spring are not zero; the System's mechanical eigenvalues, in the
    laboratory frame, give the exact Floquet multipliers e^(λT) of the periodic
    equations over one period T = π/ν, and its X1, X2 variances the exact ones."""
    scenario = pair(400e3, upper_photons=PHOTONS / 4, n_bath=20.0, spacing_offset_hz=50.0)
    system = System(scenario)
    x1, x2, mu, period = exact_periodic(scenario)
    mode = steady_state(system).modes[0]
    lam = -np.pi * mode.effective_linewidth_hz + 2j * np.pi * mode.effective_frequency_hz
    expected = np.exp(np.array([lam, lam.conjugate()]) * period)
    found = mu[np.argsort(mu.imag)[::-1]]
    assert np.abs(np.log(found / expected[np.argsort(expected.imag)[::-1]])).max() * (
        1 / period) < 1e-3 * angular(GAMMA_HZ)
    v = system.model.covariance()
    assert v[2, 2] == pytest.approx(x1, rel=1e-4)
    assert v[3, 3] == pytest.approx(x2, rel=1e-4)


def test_pair_model_names_its_signals_as_the_one_tone_model():
    from simulator.model import backaction_evasion, optomechanics

    assert backaction_evasion.CAVITY_STATES == optomechanics.CAVITY_STATES
    assert backaction_evasion.OUTPUTS == optomechanics.OUTPUTS


def test_commands_and_refusals():
    """The pair has no sideband summary (an error naming the quadrature budget); a pair
    that is not one is refused with the key; without the flag the per-tone model still
    refuses tones at ±Ωm."""
    from simulator.linear.sidebands import sideband_summary

    with pytest.raises(InputError, match="quadrature_budget"):
        sideband_summary(pair())
    with pytest.raises(ScenarioError, match="κ/4Ωm"):
        System(pair(8e6))
    text = pair().to_toml().replace("backaction_evading = true", "backaction_evading = false")
    with pytest.raises(ScenarioError, match="back-action-evading pair"):
        System(parse_scenario(text))


@pytest.mark.parametrize(("scheme", "factor"), [("homodyne", 1.0), ("heterodyne", 2.0)])
def test_record_imprecision_against_the_ideal_detector(scheme, factor):
    """An optical receiver with no electronic noise: a phase-quadrature homodyne record
    refers to X1 the ideal imprecision; a heterodyne record, which shares the field
    between two quadratures, twice it (common practice: the heterodyne penalty)."""
    budget = quadrature_budget(pair(eta=0.8).replace("detection.scheme", scheme))
    assert budget.record_imprecision_quanta == pytest.approx(
        factor * budget.imprecision_quanta, rel=2e-3)


def test_bundled_pair_runs_end_to_end(tmp_path, capsys):
    """`spectrum` names the pair's axis and prints the quadrature budget; `run` writes a
    report that leads with it and the resolution beside one tone's."""
    import json
    from pathlib import Path

    from simulator.cli import parser as cli

    path = Path(__file__).resolve().parents[1] / "scenarios" / "drum_bae_microwave.toml"
    assert cli.main(["spectrum", str(path), "--json"]) == cli.EXIT_OK
    data = json.loads(capsys.readouterr().out)
    assert "offset from the pair's mean frequency" in data["axis"]
    assert "counter-rotating back-action: back-action motion" in data["contributions"]
    assert data["backaction_evasion"]["x2_backaction_heating"] > 100
    assert cli.main(["run", str(path), "--out", str(tmp_path / "run")]) == cli.EXIT_OK
    capsys.readouterr()
    page = (tmp_path / "run" / "report.html").read_text()
    assert "Quadrature budget" in page and "one red-sideband tone, same photons" in page


@pytest.mark.parametrize("kappa_hz", [400e3, 100e3])
def test_heterodyne_spectrum_against_the_exact_periodic_spectrum(kappa_hz):
    """The System's heterodyne spectrum about the pair's mean frequency equals the
    time-averaged spectrum of the exact periodic equations: to 10⁻⁸ of the excess on
    X1's line and to 10⁻⁶ of the shot noise across the cavity (measured 10⁻¹¹ and
    10⁻⁹). The pure rotating-wave model misses on the line exactly the
    counter-rotating residual's share of X1, of order (κ/4Ωm)²."""
    scenario = pair(kappa_hz, n_bath=20.0)
    system = System(scenario)
    line = np.array([0.0, 5.0, 20.0, 200.0])
    band = np.array([2e3, 3e4, -3e4, kappa_hz / 2])
    f = np.concatenate([line, band])
    exact = exact_heterodyne(scenario, f)
    model = heterodyne_spectrum(system, f, efficiency=1.0).total
    assert np.abs((model - exact) / (exact - 1))[:4].max() < 1e-8
    assert np.abs(model - exact)[4:].max() < 1e-6
    pure = System(scenario, _parts=(system.point, backaction_evading_model(
        scenario, system.point, counter_rotating=False), system.stability))
    missed = (heterodyne_spectrum(pure, line, efficiency=1.0).total - exact[:4]) / (exact[:4] - 1)
    budget = quadrature_budget(system)
    assert missed == pytest.approx(-budget.x1_counter_rotating / budget.x1_variance, rel=0.02)


def test_a_noisy_pair_is_refused_when_the_file_is_read():
    """The pair's model carries no classical noise: the loader (and so `check`) refuses a
    pair whose drive has phase noise, naming the key, as every later stage would."""
    text = pair().to_toml() + "\n[drive.phase_noise]\nfloor_rad2_per_hz = 1e-12\n" \
        "floor_high_hz = 2e7\n"
    with pytest.raises(ScenarioError, match="detection.backaction_evading: true with "
                                            "classical noise on a tone"):
        parse_scenario(text)
