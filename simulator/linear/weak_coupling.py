"""Closed-form weak-coupling results: scattering rates, damping, spring, cooling limit.

All arguments are angular rates (rad/s) and the results likewise, except the
dimensionless occupations. These formulas are diagnostics printed beside the
exact Lyapunov steady state; they hold for g ≪ κ (the engine itself never uses
them).

References
----------
Marquardt, Chen, Clerk, Girvin, PRL 99, 093902 (2007), Eqs. (3)–(5);
Wilson-Rae, Nooshi, Zwerger, Kippenberg, PRL 99, 093901 (2007);
Aspelmeyer, Kippenberg, Marquardt, Rev. Mod. Phys. 86, 1391 (2014), Eqs. (75),
(76), (82)–(84).
"""

import numpy as np


def scattering_rates(*, g, kappa, detuning, frequency):
    """Anti-Stokes (cooling) and Stokes (heating) rates A−, A+ (1/s).

        A∓ = g² κ / (κ²/4 + (Δ ± Ωm)²)
    """
    a_minus = g**2 * kappa / (kappa**2 / 4 + (detuning + frequency) ** 2)
    a_plus = g**2 * kappa / (kappa**2 / 4 + (detuning - frequency) ** 2)
    return a_minus, a_plus


def optical_spring(*, g, kappa, detuning, frequency):
    """Optical-spring frequency shift δΩm (rad/s).

        δΩm = g² [(Δ−Ωm)/(κ²/4+(Δ−Ωm)²) + (Δ+Ωm)/(κ²/4+(Δ+Ωm)²)]
    """
    lo, hi = detuning - frequency, detuning + frequency
    return g**2 * (lo / (kappa**2 / 4 + lo**2) + hi / (kappa**2 / 4 + hi**2))


def backaction_limit(*, g, kappa, detuning, frequency):
    """Quantum back-action limit of cooling n_min = A+/(A− − A+)."""
    a_minus, a_plus = scattering_rates(g=g, kappa=kappa, detuning=detuning,
                                       frequency=frequency)
    with np.errstate(divide="ignore", invalid="ignore"):
        return a_plus / (a_minus - a_plus)


def weak_coupling_occupation(*, g, kappa, detuning, frequency, linewidth,
                             bath_occupation, cavity_occupation=0.0):
    """Final phonon occupation in weak coupling (rate equation).

        n_f = [Γm n_th + A+ (n_c + 1) + A− n_c] / (Γm + A− − A+)

    ``cavity_occupation`` n_c is the thermal occupation the cavity would have
    from its baths alone (loss-weighted), zero for an optical cavity; with
    n_c = 0 this is n_f = (Γm n_th + Γopt n_min)/(Γm + Γopt).
    """
    a_minus, a_plus = scattering_rates(g=g, kappa=kappa, detuning=detuning,
                                       frequency=frequency)
    total = linewidth + a_minus - a_plus
    with np.errstate(divide="ignore", invalid="ignore"):
        return (linewidth * bath_occupation + a_plus * (cavity_occupation + 1)
                + a_minus * cavity_occupation) / total
