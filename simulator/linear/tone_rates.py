"""What each drive tone contributes to each mechanical mode, for reports.

With several tones (``[[tones]]``) the weak-coupling rates add over tones
(docs/physics.md §13): tone k on cavity mode c scatters at
A∓,k = g_k² κc / (κc²/4 + (Δk ± Ωm)²), damps the mode by A−,k − A+,k and
heats it at A+,k (Marquardt, Chen, Clerk & Girvin, Phys. Rev. Lett. 99,
093902 (2007), Eqs. (3)–(5)). :func:`tone_rows` lists them per tone, with the
tone's photons, detuning and cooperativity C = 4 g_k²/(κc Γm), for
``inspect``.
"""

import numpy as np

from simulator.linear.weak_coupling import scattering_rates
from simulator.model.units import angular, ordinary, photon_energy_j
from simulator.scenario.units import power_text


def tone_rows(point, detected=None):
    """Plain data per tone: name, cavity mode, photons, effective detuning, and per
    mechanical mode g, cooperativity, optical damping and Stokes (heating) rate in Hz.

    ``detected`` names the tone the receiver demodulates (marked ``"detected": True``).
    Empty for a scenario with the drive alone.
    """
    rows = []
    for tone in point.tones:
        cav = point.cavity_modes[tone.cavity_mode]
        per_mode = []
        for j, mode in enumerate(point.modes):
            g_hz = tone.coupling_rates_hz[j]
            down, up = scattering_rates(
                g=float(angular(g_hz)), kappa=float(angular(cav.linewidth_hz)),
                detuning=float(angular(tone.detuning_effective_hz)),
                frequency=float(angular(mode.frequency_hz)))
            per_mode.append({
                "mode": mode.name, "g_hz": float(g_hz),
                "cooperativity": float(4 * g_hz**2 / (cav.linewidth_hz * mode.linewidth_hz)),
                "optical_damping_hz": float(ordinary(down - up)),
                "stokes_rate_hz": float(ordinary(up))})
        rows.append({"name": tone.name, "cavity_mode": cav.name,
                     "frequency_hz": float(tone.frequency_hz),
                     "power_w": float(tone.input_photon_flux
                                      * photon_energy_j(tone.frequency_hz)),
                     "photon_number": float(tone.photon_number),
                     "detuning_effective_hz": float(tone.detuning_effective_hz),
                     "detected": tone.name == detected, "modes": per_mode})
    return rows


def tone_text(rows):
    """Terminal lines of :func:`tone_rows`: one block per tone."""
    lines = []
    for row in rows:
        mark = "   (detected)" if row["detected"] else ""
        lines += ["", f"tone {row['name']} on cavity mode {row['cavity_mode']}{mark}",
                  f"  power                  {power_text(row['power_w'])}",
                  f"  intracavity photons    {row['photon_number']:.6g}",
                  f"  detuning effective     {row['detuning_effective_hz']:.6g} Hz"]
        if "field_occupation" in row:  # the fluctuations of the tone's own field
            lines.append(f"  field occupation       {row['field_occupation']:.6g}")
        for m in row["modes"]:
            lines.append(f"  mode {m['mode']}: g {m['g_hz']:.4g} Hz, cooperativity "
                         f"{m['cooperativity']:.4g}, damping {m['optical_damping_hz']:.4g} Hz, "
                         f"heating (Stokes rate) {m['stokes_rate_hz']:.4g} Hz")
    return lines


def classical_heating(scenario, point, j):
    """Weak-coupling heating rate (1/s) of mechanical mode ``j`` by every tone's laser noise.

    A laser's noise u (phase φ or relative intensity ε, two-sided density
    S̄_uu) enters each tone k it makes as δa_in,k = σ_k u, with σ_k = −iā_in,k
    for phase and ā_in,k/2 for intensity (ā_in,k the tone's incoming carrier,
    its intracavity mean field real; docs/laser-noise.md). Tone k's field
    turns it into the force √2 c_k(ω) u(ω) on the mode, with
    c_k(ω) = g_k √κex [χ_k(ω) σ_k + χ_k(−ω)* σ_k*] and
    χ_k(ω) = 1/(κ/2 − i(Δk + ω)). Tones made by one laser add their forces
    before squaring, so that

        heating = ½ Σ_lasers S̄_uu(Ωm) Σ_{ω = ±Ωm} |Σ_{k on the laser} c_k(ω)|².

    For one tone, dropping the term in σ_k² that is off resonance in resolved
    sidebands, this is (A− + A+) η_c n_c, the form of Safavi-Naeini et al.,
    New J. Phys. 15, 035007 (2013) and Jayich et al., New J. Phys. 14, 115018
    (2012); here that term is kept, and correlated tones interfere
    (tests/test_tone_noise.py checks it against the exact model).
    """
    from simulator.model.laser_spectra import tone_densities
    from simulator.scenario.tone_sections import noise_lasers

    lasers = noise_lasers(scenario)
    mode = point.modes[j]
    om = float(angular(mode.frequency_hz))
    forces = {}  # (laser, "phase" or "intensity") -> Σ_k c_k(±Ωm)
    for tone in point.tones:
        cav = point.cavity_modes[tone.cavity_mode]
        kappa, kex, delta, g = (float(x) for x in angular([
            cav.linewidth_hz, cav.external_linewidth_hz, tone.detuning_effective_hz,
            tone.coupling_rates_hz[j]]))
        a_in = np.sqrt(tone.photon_number) * (kappa / 2 - 1j * delta) / np.sqrt(kex)
        w = np.array([om, -om])
        chi, chi_mirror = 1 / (kappa / 2 - 1j * (delta + w)), 1 / (kappa / 2 - 1j * (delta - w))
        for kind, laser, sigma in (("phase", lasers[tone.name][0], -1j * a_in),
                                   ("intensity", lasers[tone.name][1], a_in / 2)):
            c = g * np.sqrt(kex) * (chi * sigma + np.conj(chi_mirror) * np.conj(sigma))
            forces[laser, kind] = forces.get((laser, kind), 0.0) + c
    total = 0.0
    for (laser, kind), c in forces.items():
        s_phi, s_eps = tone_densities(scenario, laser, mode.frequency_hz)
        total += 0.5 * float(s_phi if kind == "phase" else s_eps) * float(np.sum(np.abs(c) ** 2))
    return total + _crossed_intensity_heating(scenario, point, j)


def _crossed_intensity_heating(scenario, point, j):
    """Heating (1/s) by white intensity noise of tone l in the bands of tone k on its mode:
    (A−,k + A+,k) η_c Σ_l Φ_l S̄_εε,l/4, a phase-insensitive input occupation
    (:func:`simulator.model.laser_noise.laser_model`)."""
    from simulator.model.laser_spectra import tone_densities

    om = float(angular(point.modes[j].frequency_hz))
    total = 0.0
    for k, tone in enumerate(point.tones):
        occupation = sum(other.input_photon_flux * tone_densities(
            scenario, other.name, point.modes[j].frequency_hz)[1] / 4
            for m, other in enumerate(point.tones)
            if m != k and other.cavity_mode == tone.cavity_mode)
        if occupation > 0:
            cav = point.cavity_modes[tone.cavity_mode]
            kappa, kex, delta, g = (float(x) for x in angular([
                cav.linewidth_hz, cav.external_linewidth_hz, tone.detuning_effective_hz,
                tone.coupling_rates_hz[j]]))
            down, up = scattering_rates(g=g, kappa=kappa, detuning=delta, frequency=om)
            total += (down + up) * kex / kappa * occupation
    return total
