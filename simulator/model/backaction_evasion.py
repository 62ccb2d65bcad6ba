"""Two tones at ±Ωm about one cavity mode: the back-action-evading measurement.

A lower tone at ω̄ − ν and an upper tone at ω̄ + ν on one cavity mode, with ν
near the frequency Ωm of one mechanical mode, share the cavity's noise band
around ω̄: this is the configuration the per-tone model
(:func:`simulator.model.optomechanics.several_tones_model`) refuses. With the
cavity in the frame rotating at ω̄ and the mechanics in the frame rotating at
ν, and the terms rotating at ±2ν dropped (valid for κ ≪ 4Ωm),

    H = −Δ̄ a†a + (Ωm − ν) b†b − G−(a b† + a† b) − G+(a b + a† b†),

G∓ = g0 √n∓ the couplings of the lower and upper tone, Δ̄ = ω̄ − ω_cavity
(effective). With the mean fields real this reads, in quadratures,
H_int = −(G− + G+) X_a X1 − (G− − G+) Y_a X2: for G− = G+ and ν = Ωm the
mechanical quadrature X1 commutes with H, so it is measured in the cavity's
phase quadrature Y_a without back-action, which all goes into X2. The terms
dropped add back-action to X1 at relative order (κ/4Ωm)².

References
----------
Clerk, Marquardt & Jacobs, New J. Phys. 10, 095010 (2008), Secs. 2–3 (the
two-tone scheme and its rotating-wave Hamiltonian); Aspelmeyer, Kippenberg &
Marquardt, Rev. Mod. Phys. 86, 1391 (2014), Sec. VI.E.
"""

import numpy as np

from simulator.errors import ScenarioError
from simulator.model.operating_point import operating_point
from simulator.model.optomechanics import CAVITY_STATES, OUTPUTS
from simulator.model.statespace import StateSpace
from simulator.model.units import angular

# Largest κ/4Ωm accepted: the dropped counter-rotating terms scale as its square.
MAX_SIDEBAND_RATIO = 0.25


def backaction_evading_model(scenario, point=None):
    """The rotating-wave linear model of two tones about one cavity mode.

    Parameters
    ----------
    scenario : simulator.scenario.loader.Scenario
        The ``[drive]`` and exactly one ``[[tones]]`` table on the same cavity
        mode, one mechanical mode.
    point : simulator.model.operating_point.OperatingPoint, optional
        Its operating point (computed when left out).

    Returns
    -------
    simulator.model.statespace.StateSpace
        States ``cavity.X, cavity.Y`` (frame of the tones' mean frequency) and
        ``<mode>.X1, <mode>.X2`` (frame rotating at half the tones' spacing,
        X1 the quadrature the cavity's Y measures); inputs ``external.X/Y,
        internal.X/Y, <mode>.bath.X1/X2``; outputs ``output.X/Y``.
    """
    point = point or operating_point(scenario)
    tones = point.tones
    if len(tones) != 2 or tones[0].cavity_mode != tones[1].cavity_mode:
        raise ScenarioError("the back-action-evading model takes the drive and one "
                            "[[tones]] table on the same cavity mode; expected exactly two "
                            "tones on one mode", key="tones", source=scenario.source)
    if len(point.modes) != 1:
        raise ScenarioError(f"the back-action-evading model takes one mechanical mode; "
                            f"found {len(point.modes)}", key="mechanics",
                            source=scenario.source)
    lower, upper = sorted(tones, key=lambda t: t.detuning_effective_hz)
    cav, mode = point.cavity_modes[lower.cavity_mode], point.modes[0]
    kappa, kappa_ex, om, gm = angular([cav.linewidth_hz, cav.external_linewidth_hz,
                                       mode.frequency_hz, mode.linewidth_hz])
    d_low, d_up = angular([lower.detuning_effective_hz, upper.detuning_effective_hz])
    nu, mean = (d_up - d_low) / 2, (d_up + d_low) / 2
    if kappa / (4 * om) > MAX_SIDEBAND_RATIO or abs(om - nu) > om / 2:
        raise ScenarioError(
            f"κ/4Ωm = {kappa / (4 * om):.3g} and half the tones' spacing ν/2π = "
            f"{nu / (2 * np.pi):.6g} Hz against Ωm/2π = {mode.frequency_hz:.6g} Hz; the "
            f"rotating-wave model needs κ/4Ωm ≤ {MAX_SIDEBAND_RATIO:g} and ν near Ωm",
            key="tones", source=scenario.source)
    g_minus, g_plus = (angular(t.coupling_rates_hz[0]) for t in (lower, upper))
    c, d, dm = g_minus + g_plus, g_minus - g_plus, om - nu
    kappa_in = max(kappa - kappa_ex, 0.0)
    A = np.array([[-kappa / 2, -mean, 0.0, -d],
                  [mean, -kappa / 2, c, 0.0],
                  [0.0, -d, -gm / 2, dm],
                  [c, 0.0, -dm, -gm / 2]])
    coupling = np.zeros((4, 4))
    coupling[0, 3], coupling[1, 2], coupling[2, 1], coupling[3, 0] = -d, c, -d, c
    B = np.zeros((4, 6))
    B[0:2, 0:2] = np.sqrt(kappa_ex) * np.eye(2)
    B[0:2, 2:4] = np.sqrt(kappa_in) * np.eye(2)
    B[2:4, 4:6] = np.sqrt(gm) * np.eye(2)
    N = np.diag([0.5, 0.5] + [cav.bath_occupation + 0.5] * 2 + [mode.bath_occupation + 0.5] * 2)
    C = np.hstack([-np.sqrt(kappa_ex) * np.eye(2), np.zeros((2, 2))])
    D = np.hstack([np.eye(2), np.zeros((2, 4))])
    name = mode.name
    return StateSpace(
        A=A, B=B, N=N, C=C, D=D, states=(*CAVITY_STATES, f"{name}.X1", f"{name}.X2"),
        inputs=("external.X", "external.Y", "internal.X", "internal.Y",
                f"{name}.bath.X1", f"{name}.bath.X2"),
        outputs=OUTPUTS, coupling=coupling,
        sources=(("external port vacuum", (0, 1)), ("internal loss bath", (2, 3)),
                 (f"{name} thermal bath", (4, 5))))
