"""When one fluctuation field per tone describes several tones on one cavity mode.

Two tones k, l on one cavity mode, spaced by ω_kl, each scatter light into
the mechanics through the input noise of the cavity at the frequencies
ω_k ± Ωj and ω_l ± Ωi. The model of :func:`simulator.model.optomechanics.several_tones_model`
gives each tone its own, independent share of that noise and drops the terms
of the radiation-pressure force that rotate at ω_kl. Both are exact as long as
the bands the tones use do not overlap within the mechanical response width
w, and the beat of their intensities does not drive a mechanical mode
resonantly:

    |ω_kl − ν| ≫ w   for every ν in {0, Ωj, Ωi + Ωj, |Ωi − Ωj|},

where w is the largest effective mechanical linewidth Γj + Σk |Γopt,kj| (weak
coupling, Marquardt et al., PRL 99, 093902 (2007), Eq. (3); rates add over
tones, Aspelmeyer, Kippenberg & Marquardt, Rev. Mod. Phys. 86, 1391 (2014),
Sec. VII), at most the widest cavity linewidth (hybridised modes). The
spacing need not exceed κ: the error terms are off mechanical resonance by the
distance to the nearest ν, which is what sets their size. The exact
time-periodic computation in tests/test_tone_floquet.py shows the error
falling as that distance grows (docs/physics.md, "Several tones and cavity modes").
"""

import warnings

import numpy as np

from simulator.errors import ScenarioError
from simulator.model.units import angular

# Distance to the nearest combination frequency, in mechanical widths w: below
# REFUSE the per-tone model is refused, below WARN it is used with a warning.
# Set from the exact time-periodic comparison (tests/test_tone_floquet.py): the
# occupation error stays within 1 % beyond WARN·w and reaches tens of per cent
# near w.
REFUSE_WIDTHS = 3.0
WARN_WIDTHS = 30.0
# Largest frequency excursion of a cavity mode, as a fraction of its linewidth and of
# the tones' spacing, that the beat-driven mechanical motion may cause without a warning.
BEAT_EXCURSION = 0.1


# Phase noise of one tone's laser in the bands of another tone on its cavity mode (left
# out of the model), as a fraction of the mode's heating rate, above which it is warned.
CROSSED_PHASE_NOISE = 0.01


class ToneSpacingWarning(UserWarning):
    """Two tones on one cavity mode sit close to a mechanical combination frequency."""


class ToneNoiseWarning(UserWarning):
    """A tone's phase noise reaches another tone's sidebands, which the model leaves out."""


def _rates(point, tone, j):
    """(A−, A+) (1/s): tone's anti-Stokes and Stokes rates on mechanical mode j, weak
    coupling (Marquardt et al., PRL 99, 093902 (2007), Eq. (3))."""
    kappa = angular(point.cavity_modes[tone.cavity_mode].linewidth_hz)
    g, delta, om = angular([tone.coupling_rates_hz[j], tone.detuning_effective_hz,
                            point.modes[j].frequency_hz])
    return (g**2 * kappa / (kappa**2 / 4 + (delta + om) ** 2),
            g**2 * kappa / (kappa**2 / 4 + (delta - om) ** 2))


def mechanical_width(point):
    """w (rad/s): the largest effective mechanical linewidth, weak coupling, summed over tones."""
    widest = 0.0
    kappa_max = max(angular(c.linewidth_hz) for c in point.cavity_modes)
    for j, mode in enumerate(point.modes):
        total = angular(mode.linewidth_hz)
        for tone in point.tones:
            down, up = _rates(point, tone, j)
            total += abs(down - up)
        widest = max(widest, min(total, kappa_max))
    return float(widest)


def crossed_phase_noise(scenario, point, j):
    """(left out, scale) in 1/s: heating of mode j by phase noise in other tones' bands.

    Tone l's phase noise at ω_k − ω_l ± Ωj from its carrier lies in the sidebands
    of tone k on the same cavity mode, where it would heat like an input
    occupation Φ_l S̄_φφ,l (weak coupling: η_c [A−,k Φ_l S̄(ω_kl + Ωj) +
    A+,k Φ_l S̄(ω_kl − Ωj)]). The per-tone model keeps each tone's phase noise in
    its own band and leaves this out (white intensity noise it counts,
    :mod:`simulator.model.laser_noise`). The scale is the mode's weak-coupling
    heating rate Γm n_th + Σk A+,k + Σk (A−,k + A+,k) η_c n_c,k with each
    tone's own noise n_c,k.
    """
    from simulator.model.laser_spectra import phase_noise_density, tone_input_occupation
    from simulator.scenario.tone_sections import noise_lasers, noise_tables

    lasers = noise_lasers(scenario)
    mode = point.modes[j]
    left_out, scale = 0.0, angular(mode.linewidth_hz) * mode.bath_occupation
    for tone in point.tones:
        cav = point.cavity_modes[tone.cavity_mode]
        share = cav.external_linewidth_hz / cav.linewidth_hz
        down, up = _rates(point, tone, j)
        scale += up + (down + up) * share * tone_input_occupation(
            scenario, tone.name, tone.input_photon_flux, mode.frequency_hz)
        for other in point.tones:
            if other is tone or other.cavity_mode != tone.cavity_mode:
                continue
            noise = noise_tables(scenario, lasers[other.name][0])[0]
            spacing = tone.detuning_effective_hz - other.detuning_effective_hz
            left_out += share * other.input_photon_flux * (
                down * phase_noise_density(noise, spacing + mode.frequency_hz)
                + up * phase_noise_density(noise, spacing - mode.frequency_hz))
    return float(left_out), float(scale)


def check_tone_noise_bands(scenario, point):
    """Warn (:class:`ToneNoiseWarning`) where phase noise left out of other tones' bands
    exceeds ``CROSSED_PHASE_NOISE`` of a mode's heating (:func:`crossed_phase_noise`)."""
    for j, mode in enumerate(point.modes):
        left_out, scale = crossed_phase_noise(scenario, point, j)
        if left_out > CROSSED_PHASE_NOISE * scale:
            warnings.warn(
                f"mode {mode.name}: the phase noise of tones on one cavity mode reaches the "
                "sidebands of the other tones there (at the tones' spacing ± Ωm from its "
                f"carrier), which the per-tone model leaves out; it would add about "
                f"{left_out / scale:.3g} of the mode's heating rate (weak coupling), more "
                f"than {CROSSED_PHASE_NOISE:g}; the occupation is then too low. Put the "
                "tones on different cavity modes or where the phase noise at their spacing "
                "± Ωm is lower (docs/physics.md, \"Several tones and cavity modes\")",
                ToneNoiseWarning, stacklevel=3)


def combination_frequencies(point):
    """(ν in rad/s, words) of every frequency the spacing of two tones must avoid."""
    out = [(0.0, "zero (coinciding tones)")]
    modes = point.modes
    for i, a in enumerate(modes):
        out.append((angular(a.frequency_hz), f"Ωm of {a.name}"))
        for b in modes[i:]:
            out.append((angular(a.frequency_hz + b.frequency_hz),
                        f"Ωm of {a.name} + Ωm of {b.name}"))
            if b is not a:
                out.append((angular(abs(a.frequency_hz - b.frequency_hz)),
                            f"|Ωm of {a.name} − Ωm of {b.name}|"))
    return out


def spacing_margins(point):
    """For every pair of tones on one cavity mode: (k, l, distance/w, ν words, spacing Hz)."""
    width = mechanical_width(point)
    combos = combination_frequencies(point)
    out = []
    tones = point.tones
    for k in range(len(tones)):
        for m in range(k + 1, len(tones)):
            if (tones[k].cavity_mode != tones[m].cavity_mode
                    or tones[k].photon_number == 0 or tones[m].photon_number == 0):
                continue  # the dropped terms scale as √(n_k n_m)
            spacing = angular(abs(tones[k].detuning_effective_hz - tones[m].detuning_effective_hz))
            nu, words = min(combos, key=lambda c: abs(spacing - c[0]))
            ratio = abs(spacing - nu) / width if width > 0 else np.inf
            out.append((k, m, float(ratio), words, float(spacing / (2 * np.pi))))
    return out


def beat_excursion(point, k, m):
    """Frequency excursion (rad/s) of tone k's cavity mode from the beat of tones k and m.

    The intracavity intensity of two tones on one mode holds 2√(n_k n_m) cos ω_km t;
    it drives each mechanical mode j with the force term ṗ = 2√2 g0_j √(n_k n_m)
    cos ω_km t, which the symmetric damping answers with
    |q_j| = 2√2 g0_j √(n_k n_m) Ωj / |(wj/2 − iω_km)² + Ωj²| (wj the effective
    width), and that motion moves the mode by √2 g0_j |q_j|. The static
    operating point leaves this coherent motion out; it is negligible when the
    excursion is small against κ and against ω_km (a weak phase modulation of
    the mean fields).
    """
    a, b = point.tones[k], point.tones[m]
    spacing = angular(abs(a.detuning_effective_hz - b.detuning_effective_hz))
    total = 0.0
    width = mechanical_width(point)
    for j, mode in enumerate(point.modes):
        if a.photon_number == 0 or b.photon_number == 0:
            continue
        g0 = angular(a.coupling_rates_hz[j]) / np.sqrt(a.photon_number)
        om = angular(mode.frequency_hz)
        amp = (2 * np.sqrt(2) * g0 * np.sqrt(a.photon_number * b.photon_number) * om
               / abs((max(width, angular(mode.linewidth_hz)) / 2 - 1j * spacing) ** 2 + om**2))
        total += np.sqrt(2) * g0 * amp
    return float(total)


def check_tone_spacings(scenario, point):
    """Refuse (ScenarioError) or warn (:class:`ToneSpacingWarning`) on tones too close to
    a combination frequency; see the module text for the condition."""
    width_hz = mechanical_width(point) / (2 * np.pi)
    for k, m, ratio, words, spacing in spacing_margins(point):
        a, b = point.tones[k].name, point.tones[m].name
        text = (f"tones {a!r} and {b!r} on one cavity mode are {spacing:.6g} Hz apart, "
                f"{ratio:.3g} mechanical widths (w/2π = {width_hz:.3g} Hz) from {words}")
        if ratio < REFUSE_WIDTHS:
            raise ScenarioError(
                text + "; there the tones share input noise or their beat drives the "
                "mechanics, which one field per tone cannot describe; expected the "
                f"spacing at least {REFUSE_WIDTHS:g} widths (better {WARN_WIDTHS:g}) from "
                "every combination frequency (two tones about ±Ωm of one mode are a "
                "back-action-evading pair: detection.backaction_evading = true gives them "
                "their own rotating-wave model, docs/physics.md \"Back-action evasion\")",
                key=f"tones[{max(k, m) - 1}].detuning_hz",
                source=scenario.source)
        if ratio < WARN_WIDTHS:
            warnings.warn(text + f"; the per-tone model holds to a few per cent only beyond "
                          f"{WARN_WIDTHS:g} widths", ToneSpacingWarning, stacklevel=3)
        kappa = angular(point.cavity_modes[point.tones[k].cavity_mode].linewidth_hz)
        excursion = beat_excursion(point, k, m)
        limit = BEAT_EXCURSION * min(kappa, angular(spacing))
        if excursion > limit:
            warnings.warn(
                f"the intensity beat of tones {a!r} and {b!r} ({spacing:.6g} Hz) moves the "
                f"mechanics enough to sweep their cavity mode by {excursion / (2 * np.pi):.3g} "
                f"Hz, more than {BEAT_EXCURSION:g} of its linewidth or of the spacing "
                f"({limit / (2 * np.pi):.3g} Hz); the static operating point leaves this "
                "coherent motion out", ToneSpacingWarning, stacklevel=3)
