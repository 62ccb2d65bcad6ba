"""Operating point: the classical steady state the fluctuations are linearised around.

The mean intracavity photon number n̄ solves, self-consistently with the static
radiation-pressure displacement of every mechanical mode,

    n̄ · (κ²/4 + Δ(n̄)²) = κ_ex · Φ,      Δ(n̄) = Δ0 + s · n̄,
    s = Σ_j 2 g0_j² Ωj / (Ωj² + Γj²/4),

with Φ = P/(ħω_L) the drive photon flux, Δ0 the detuning from the bare cavity
and Δ the effective detuning. The Ωj² + Γj²/4 comes from the symmetric
(rotating-wave) mechanical damping the engine uses (``simulator.model.optomechanics``); for
Brownian damping it would read Ωj². Up to three positive solutions exist: that
is optomechanical bistability, and every branch is reported.

References
----------
Aspelmeyer, Kippenberg, Marquardt, Rev. Mod. Phys. 86, 1391 (2014), Sec. V.A
(static bistability).
"""

import dataclasses

import numpy as np

from simulator.model.units import HBAR, angular, bose_einstein, ordinary, photon_energy_j


@dataclasses.dataclass(frozen=True, kw_only=True)
class ModePoint:
    """Operating-point quantities of one mechanical mode."""

    name: str
    frequency_hz: float
    linewidth_hz: float
    single_photon_coupling_hz: float
    coupling_rate_hz: float  # g/2π = g0·√n̄ / 2π
    zero_point_amplitude_m: float  # x_zpf = √(ħ/2mΩm)
    bath_occupation: float
    cooperativity: float  # C = 4g²/(κΓm)
    quantum_cooperativity: float  # C/n_th
    sideband_resolution: float  # Ωm/κ


@dataclasses.dataclass(frozen=True, kw_only=True)
class OperatingPoint:
    """Classical operating point of a scenario; see :func:`operating_point`."""

    drive_frequency_hz: float
    input_photon_flux: float  # photons per second at the external port
    photon_number: float  # n̄ on the chosen branch
    branches: tuple  # n̄ of every solution, ascending
    bistable: bool
    branch: str
    detuning_bare_hz: float
    detuning_effective_hz: float
    cavity_linewidth_hz: float
    external_linewidth_hz: float
    cavity_bath_occupation: float
    modes: tuple  # ModePoint per mechanical mode
    # With [[tones]]: every tone (the drive first) and cavity mode ([cavity] first);
    # the fields above are then the drive's, and ``branches`` holds the total photon
    # number Σ n_k of each solution. Empty for a scenario with the drive alone.
    tones: tuple = ()  # simulator.model.tone_point.TonePoint per tone
    cavity_modes: tuple = ()  # simulator.model.tone_point.CavityModePoint per mode

    @property
    def several_tones(self):
        """True when the scenario has tones beside the drive (``[[tones]]``)."""
        return len(self.tones) > 1

    @property
    def static_shift_hz(self):
        """Effective minus bare detuning (Hz): the static radiation-pressure shift."""
        return self.detuning_effective_hz - self.detuning_bare_hz


def shift_per_photon(mechanics):
    """Static detuning shift per intracavity photon, s (rad/s), summed over modes."""
    total = 0.0
    for mode in mechanics:
        g0, om, gm = angular([mode.coupling_hz, mode.frequency_hz, mode.linewidth_hz])
        total += 2.0 * g0**2 * om / (om**2 + gm**2 / 4.0)
    return total


def photon_number_branches(*, kappa, kappa_ex, flux, detuning_bare, shift):
    """Every positive solution n̄ of the self-consistency cubic, ascending.

    All rates angular (rad/s). In units of the half linewidth, x = s·n̄/(κ/2)
    and d = Δ0/(κ/2) satisfy x³ + 2d·x² + (1 + d²)·x − P = 0 with
    P = s·κ_ex·Φ/(κ/2)³; the real roots are found from the companion matrix
    and polished by Newton steps on the well-scaled cubic.
    """
    half = kappa / 2.0
    if flux == 0.0:
        return (0.0,)
    if shift == 0.0:
        return (kappa_ex * flux / (half**2 + detuning_bare**2),)
    d = detuning_bare / half
    p = shift * kappa_ex * flux / half**3
    coeffs = np.array([1.0, 2.0 * d, 1.0 + d * d, -p])
    roots = np.roots(coeffs)
    scale = 1.0 + np.abs(roots)
    real = np.sort(roots[np.abs(roots.imag) <= 1e-7 * scale].real)
    polished = []
    for x in real:
        for _ in range(3):
            f = ((x + 2 * d) * x + 1 + d * d) * x - p
            df = (3 * x + 4 * d) * x + 1 + d * d
            if df != 0:
                x -= f / df
        if x > 0:
            polished.append(x)
    return tuple(x * half / shift for x in polished)


def operating_point(scenario):
    """Solve the classical operating point of ``scenario``.

    Parameters
    ----------
    scenario : simulator.scenario.loader.Scenario

    Returns
    -------
    OperatingPoint
    """
    if scenario.tones:
        return _several_tones_point(scenario)
    drive, cavity = scenario.drive, scenario.cavity
    f_drive = drive.carrier_frequency_hz
    flux = drive.power_w / photon_energy_j(f_drive)
    kappa, kappa_ex = angular([cavity.linewidth_hz, cavity.external_linewidth_hz])
    shift = shift_per_photon(scenario.mechanics)
    given = float(angular(drive.detuning_hz))
    if drive.detuning_reference == "effective":
        n = kappa_ex * flux / (kappa**2 / 4 + given**2)
        branches, chosen, bistable = (n,), n, False
        detuning_bare, detuning_eff = given - shift * n, given
    else:
        branches = photon_number_branches(kappa=kappa, kappa_ex=kappa_ex, flux=flux,
                                          detuning_bare=given, shift=shift)
        bistable = len(branches) > 1
        pick = {"lowest": 0, "middle": len(branches) // 2, "highest": -1}
        chosen = branches[pick[drive.bistable_branch]]
        detuning_bare, detuning_eff = given, given + shift * chosen
    modes = tuple(_mode_point(mode, chosen, kappa) for mode in scenario.mechanics)
    return OperatingPoint(
        drive_frequency_hz=f_drive, input_photon_flux=flux, photon_number=chosen,
        branches=tuple(branches), bistable=bistable, branch=drive.bistable_branch,
        detuning_bare_hz=float(ordinary(detuning_bare)),
        detuning_effective_hz=float(ordinary(detuning_eff)),
        cavity_linewidth_hz=cavity.linewidth_hz,
        external_linewidth_hz=cavity.external_linewidth_hz,
        cavity_bath_occupation=cavity.bath_occupation, modes=modes)


def _several_tones_point(scenario):
    """Operating point with ``[[tones]]``: every tone's photons shift its cavity mode."""
    from simulator.model.tone_point import solve_tones

    drive, cavity = scenario.drive, scenario.cavity
    solutions = solve_tones(scenario)
    pick = {"lowest": 0, "middle": len(solutions) // 2, "highest": -1}
    tones, cavity_modes = solutions[pick[drive.bistable_branch]]
    first = tones[0]
    kappa = angular(cavity.linewidth_hz)
    modes = tuple(_mode_point(mode, first.photon_number, kappa) for mode in scenario.mechanics)
    return OperatingPoint(
        drive_frequency_hz=first.frequency_hz, input_photon_flux=first.input_photon_flux,
        photon_number=first.photon_number,
        branches=tuple(sum(t.photon_number for t in sol[0]) for sol in solutions),
        bistable=len(solutions) > 1, branch=drive.bistable_branch,
        detuning_bare_hz=first.detuning_bare_hz,
        detuning_effective_hz=first.detuning_effective_hz,
        cavity_linewidth_hz=cavity.linewidth_hz,
        external_linewidth_hz=cavity.external_linewidth_hz,
        cavity_bath_occupation=cavity.bath_occupation, modes=modes, tones=tones,
        cavity_modes=cavity_modes)


def bath_occupation(mode):
    """Thermal phonon occupation of a mode's bath, given directly or by temperature."""
    if mode.bath_occupation is not None:
        return mode.bath_occupation
    return float(bose_einstein(mode.frequency_hz, mode.bath_temperature_k))


def _mode_point(mode, photon_number, kappa):
    g_hz = mode.coupling_hz * np.sqrt(photon_number)
    n_th = bath_occupation(mode)
    cooperativity = 4 * g_hz**2 / (ordinary(kappa) * mode.linewidth_hz)
    x_zpf = np.sqrt(HBAR / (2 * mode.effective_mass_kg * angular(mode.frequency_hz)))
    return ModePoint(
        name=mode.name, frequency_hz=mode.frequency_hz, linewidth_hz=mode.linewidth_hz,
        single_photon_coupling_hz=mode.coupling_hz, coupling_rate_hz=float(g_hz),
        zero_point_amplitude_m=float(x_zpf), bath_occupation=n_th,
        cooperativity=float(cooperativity),
        quantum_cooperativity=_ratio(cooperativity, n_th),
        sideband_resolution=mode.frequency_hz / float(ordinary(kappa)))


def _ratio(numerator, denominator):
    """numerator/denominator, infinite where the quotient overflows or divides by 0."""
    with np.errstate(over="ignore", divide="ignore"):
        value = np.float64(numerator) / np.float64(denominator) if denominator > 0 else np.inf
    return float(value)
