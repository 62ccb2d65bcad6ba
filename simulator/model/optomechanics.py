"""The linearised optomechanical model of a scenario, as one :class:`StateSpace`.

In the frame rotating at the drive, with fluctuations around the operating
point (ħ = 1, angular frequencies),

    H_lin = −Δ a†a + Σ_j [Ωj b_j†b_j − g_j (a + a†)(b_j + b_j†)],   g_j = g0_j √n̄,

and quadratures X = (a + a†)/√2, Y = (a − a†)/(i√2) (vacuum variance ½) for
the cavity and q_j, p_j for each mode. Per mode this gives the drift

    d/dt (X, Y, q, p) = [[−κ/2, −Δ, 0, 0], [Δ, −κ/2, 2g, 0],
                         [0, 0, −Γm/2, Ωm], [2g, 0, −Ωm, −Γm/2]] (X, Y, q, p) + noise,

with Δ the effective detuning. The phase of the intracavity field is chosen
real, so the amplitude quadrature of the fluctuations is X.

Noise inputs, each a pair of white quadratures with symmetrised intensity n + ½:
the external (driven and detected) port with rate κ_ex and vacuum, the internal
loss with rate κ − κ_ex and occupation ``cavity.bath_occupation``, and one bath
per mode with rate Γm and its thermal occupation. The outputs are the
quadratures of the field leaving the external port, a_out = a_in − √κ_ex a.

Mechanical damping is the symmetric (rotating-wave) form, damping q and p
alike at Γm/2 each; it differs from Brownian (velocity) damping at order
Γm/Ωm, which is negligible for the high-Q modes this tool is built for.

References
----------
Aspelmeyer, Kippenberg, Marquardt, Rev. Mod. Phys. 86, 1391 (2014), Secs. II
and VII (linearised dynamics and input-output theory).
"""

import numpy as np

from simulator.model import laser_noise
from simulator.model.statespace import StateSpace
from simulator.model.units import angular

CAVITY_STATES = ("cavity.X", "cavity.Y")
OUTPUTS = ("output.X", "output.Y")


def device_size(n_modes, n_tones=1):
    """Number of cavity and mechanical states: they come first in every model.

    With several tones the fields of the tones after the drive follow the
    mechanical modes (:func:`several_tones_model`) and count as device states.
    """
    return len(CAVITY_STATES) * n_tones + 2 * n_modes


def mode_states(j):
    """Slice of the states (q, p) of mechanical mode ``j``: after the cavity's X, Y."""
    start = device_size(j)
    return slice(start, start + 2)


def linear_model(scenario, point):
    """Build the linearised model of ``scenario`` around its operating point.

    Built once per :class:`simulator.model.system.System` (its ``model``); call
    that rather than this.

    Parameters
    ----------
    scenario : simulator.scenario.loader.Scenario
    point : simulator.model.operating_point.OperatingPoint

    Returns
    -------
    simulator.model.statespace.StateSpace
        States ``cavity.X, cavity.Y, <mode>.q, <mode>.p, ...``; inputs in pairs
        ``external.X/Y, internal.X/Y, <mode>.bath.q/p``; outputs ``output.X/Y``.
        When the drive carries classical noise or a calibration tone,
        :func:`simulator.model.laser_noise.laser_model` appends ``laser.*`` states
        and inputs; otherwise the model is exactly the one above. With several
        tones (``point.several_tones``) see :func:`several_tones_model`; a declared
        back-action-evading pair (``detection.backaction_evading``) takes
        :func:`simulator.model.backaction_evasion.backaction_evading_model`.
    """
    if point.several_tones:
        if scenario.detection.backaction_evading:  # one field for the pair (its own module)
            from simulator.model.backaction_evasion import backaction_evading_model

            return backaction_evading_model(scenario, point)
        return several_tones_model(scenario, point)
    kappa, kappa_ex, delta = angular([point.cavity_linewidth_hz,
                                      point.external_linewidth_hz,
                                      point.detuning_effective_hz])
    kappa_in = max(kappa - kappa_ex, 0.0)
    n_modes = len(point.modes)
    n = device_size(n_modes)
    m = 4 + 2 * n_modes
    A = np.zeros((n, n))
    coupling = np.zeros((n, n))
    B = np.zeros((n, m))
    N = np.zeros((m, m))
    A[0:2, 0:2] = [[-kappa / 2, -delta], [delta, -kappa / 2]]
    B[0:2, 0:2] = np.sqrt(kappa_ex) * np.eye(2)
    B[0:2, 2:4] = np.sqrt(kappa_in) * np.eye(2)
    N[0:2, 0:2] = 0.5 * np.eye(2)
    N[2:4, 2:4] = (point.cavity_bath_occupation + 0.5) * np.eye(2)
    states, inputs = list(CAVITY_STATES), ["external.X", "external.Y",
                                           "internal.X", "internal.Y"]
    sources = [("external port vacuum", (0, 1)),
               ("internal loss bath", (2, 3))]
    for j, mode in enumerate(point.modes):
        s, i = mode_states(j).start, 4 + 2 * j  # inputs: external, internal, then baths
        om, gm, g = angular([mode.frequency_hz, mode.linewidth_hz, mode.coupling_rate_hz])
        A[s:s + 2, s:s + 2] = [[-gm / 2, om], [-om, -gm / 2]]
        coupling[1, s] = coupling[s + 1, 0] = 2 * g
        B[s:s + 2, i:i + 2] = np.sqrt(gm) * np.eye(2)
        N[i:i + 2, i:i + 2] = (mode.bath_occupation + 0.5) * np.eye(2)
        states += [f"{mode.name}.q", f"{mode.name}.p"]
        inputs += [f"{mode.name}.bath.q", f"{mode.name}.bath.p"]
        sources.append((f"{mode.name} thermal bath", (i, i + 1)))
    A = A + coupling
    C = np.zeros((2, n))
    C[:, 0:2] = -np.sqrt(kappa_ex) * np.eye(2)
    D = np.zeros((2, m))
    D[:, 0:2] = np.eye(2)
    model = StateSpace(A=A, B=B, N=N, C=C, D=D, states=tuple(states),
                       inputs=tuple(inputs), outputs=OUTPUTS, sources=tuple(sources),
                       coupling=coupling)
    if laser_noise.is_quiet(scenario):
        return model
    return laser_noise.laser_model(model, scenario, point)


def several_tones_model(scenario, point, demodulated=None):
    """The linear model with one fluctuation field per drive tone, each in its own frame.

    Tone k on cavity mode c, with mean field √n_k (phase chosen real) and
    effective detuning Δk, contributes the quadratures (X_k, Y_k) with drift
    [[−κc/2, −Δk], [Δk, −κc/2]], couplings g_kj = g0_cj √n_k to every mechanical
    mode j as in the one-tone model, and its own vacuum (external port) and
    thermal (internal loss) inputs. The drive's field keeps the names and
    places of the one-tone model (``cavity.X/Y`` first, then the mechanical
    modes); the other tones follow as ``<tone>.X/Y`` with inputs
    ``<tone>.external.X/Y``, ``<tone>.internal.X/Y`` and outputs
    ``<tone>.output.X/Y``, the part of the field leaving the mode's port in
    that tone's frame.

    Exact for tones on different cavity modes. For tones on one mode it drops
    the terms that rotate at their spacing and counts each tone's share of the
    input noise as independent of the others' (docs/physics.md, "Several tones
    and cavity modes"); :func:`simulator.model.tone_validity.check_tone_spacings`
    refuses or warns where that fails. Classical laser noise enters every
    tone its laser makes (``noise_source``), each in its own frame
    (:func:`simulator.model.laser_noise.laser_model`); the local oscillator refers
    the outputs of the ``demodulated`` tones (default the scenario's) to their lasers.
    """
    from simulator.model.tone_validity import check_tone_noise_bands, check_tone_spacings

    check_tone_spacings(scenario, point)
    if not laser_noise.is_quiet(scenario):
        check_tone_noise_bands(scenario, point)
    n_modes, tones = len(point.modes), point.tones
    n_dev = device_size(n_modes, len(tones))
    m = 4 * len(tones) + 2 * n_modes
    A, coupling = np.zeros((n_dev, n_dev)), np.zeros((n_dev, n_dev))
    B, N = np.zeros((n_dev, m)), np.zeros((m, m))
    C, D = np.zeros((2 * len(tones), n_dev)), np.zeros((2 * len(tones), m))
    states, outputs, sources = list(CAVITY_STATES), list(OUTPUTS), []
    inputs = [""] * 4 + [f"{mode.name}.bath.{x}" for mode in point.modes for x in "qp"]
    inputs += [""] * (4 * (len(tones) - 1))
    field_rows = [0] + [device_size(n_modes) + 2 * k for k in range(len(tones) - 1)]
    input_cols = [0] + [4 + 2 * n_modes + 4 * k for k in range(len(tones) - 1)]
    for j, mode in enumerate(point.modes):
        s, i = mode_states(j).start, 4 + 2 * j
        om, gm = angular([mode.frequency_hz, mode.linewidth_hz])
        A[s:s + 2, s:s + 2] = [[-gm / 2, om], [-om, -gm / 2]]
        B[s:s + 2, i:i + 2] = np.sqrt(gm) * np.eye(2)
        N[i:i + 2, i:i + 2] = (mode.bath_occupation + 0.5) * np.eye(2)
        states += [f"{mode.name}.q", f"{mode.name}.p"]
        sources.append((f"{mode.name} thermal bath", (i, i + 1)))
    for k, tone in enumerate(tones):
        cav = point.cavity_modes[tone.cavity_mode]
        r, i = field_rows[k], input_cols[k]
        kappa, kappa_ex, delta = angular([cav.linewidth_hz, cav.external_linewidth_hz,
                                          tone.detuning_effective_hz])
        kappa_in = max(kappa - kappa_ex, 0.0)
        A[r:r + 2, r:r + 2] = [[-kappa / 2, -delta], [delta, -kappa / 2]]
        B[r:r + 2, i:i + 2] = np.sqrt(kappa_ex) * np.eye(2)
        B[r:r + 2, i + 2:i + 4] = np.sqrt(kappa_in) * np.eye(2)
        N[i:i + 2, i:i + 2] = 0.5 * np.eye(2)
        N[i + 2:i + 4, i + 2:i + 4] = (cav.bath_occupation + 0.5) * np.eye(2)
        C[2 * k:2 * k + 2, r:r + 2] = -np.sqrt(kappa_ex) * np.eye(2)
        D[2 * k:2 * k + 2, i:i + 2] = np.eye(2)
        for j, g in enumerate(angular(np.array(tone.coupling_rates_hz))):
            s = mode_states(j).start
            coupling[r + 1, s] = coupling[s + 1, r] = 2 * g
        prefix = "" if k == 0 else f"{tone.name}."
        inputs[i:i + 4] = [f"{prefix}{port}.{x}" for port in ("external", "internal")
                           for x in ("X", "Y")]
        # with several tones every tone's ports say their tone the same way, the drive's too
        sources += [(laser_noise.tone_source(port, tone.name if len(tones) > 1 else None),
                     (i + offset, i + offset + 1))
                    for port, offset in (("external port vacuum", 0), ("internal loss bath", 2))]
        if k:
            states += [f"{tone.name}.X", f"{tone.name}.Y"]
            outputs += [f"{tone.name}.output.X", f"{tone.name}.output.Y"]
    sources.sort(key=lambda item: item[1])
    A = A + coupling
    model = StateSpace(A=A, B=B, N=N, C=C, D=D, states=tuple(states),
                       inputs=tuple(inputs), outputs=tuple(outputs), sources=tuple(sources),
                       coupling=coupling)
    if laser_noise.is_quiet(scenario):
        return model
    return laser_noise.laser_model(model, scenario, point, demodulated)
