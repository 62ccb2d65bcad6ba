"""What each drive tone contributes to each mechanical mode, for reports.

With several tones (``[[tones]]``) the weak-coupling rates add over tones
(docs/physics.md §13): tone k on cavity mode c scatters at
A∓,k = g_k² κc / (κc²/4 + (Δk ± Ωm)²), damps the mode by A−,k − A+,k and
heats it at A+,k (Marquardt, Chen, Clerk & Girvin, Phys. Rev. Lett. 99,
093902 (2007), Eqs. (3)–(5)). :func:`tone_rows` lists them per tone, with the
tone's photons, detuning and cooperativity C = 4 g_k²/(κc Γm), for
``inspect``.
"""

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
        for m in row["modes"]:
            lines.append(f"  mode {m['mode']}: g {m['g_hz']:.4g} Hz, cooperativity "
                         f"{m['cooperativity']:.4g}, damping {m['optical_damping_hz']:.4g} Hz, "
                         f"heating (Stokes rate) {m['stokes_rate_hz']:.4g} Hz")
    return lines
