"""The spectrum the digitiser sees: the record of the detection chain, with its noise budget.

:func:`digitiser_spectrum` is the default of ``noisechain spectrum``: the
exact density of the digitised samples at the record's sample rate, split into
one budget line per physical cause. The total comes from the chain's poles and
residues sampled in closed form (:func:`simulator.model.poles.channel_form`:
every alias summed exactly, one pass over the grid; the resolvent stands in
where the eigenvectors fail and the form says so); the truncated alias sum
:meth:`DetectionChain.sampled_spectrum
<simulator.model.chain.DetectionChain.sampled_spectrum>` is its independent
check in the tests. The lines are
built from the chain's own state-space inputs (which noise enters where), in
three steps that telescope, so they sum to the total to round-off:

1. the continuous record before the electronics filter, from the chain
   without its low-pass: the vacuum floor (the vacuum ½ of every quantum input
   on its direct path, including the detection-loss vacuum and, for the iq
   receiver, the ½ quantum that heterodyne detection must add; Caves 1982);
   the device's lines as an ideal receiver (η = 1) would record them; the
   signal the detection efficiency and a single-ended combiner remove,
   (η_d − 1)·X and η_d(b − 1)·X for the device excess X; the amplifier's noise
   beyond that quantum; the electronics current noise;
2. the low-pass filter: the filtered continuous record minus the unfiltered
   one, −(1 − |L(f)|²)·S(f);
3. the sampling: integrate-and-dump samples average over each interval,
   (sinc²(f/fs) − 1)·(S_L(f) − S_w), and fold in the noise of f + k·fs, k ≠ 0
   (aliasing, the rest of Σ_k S_L(f + k fs) sinc²((f + k fs)/fs)). White
   noise S_w (the density's limit at high frequency; zero behind a low-pass)
   passes the sampling unchanged, Σ_k sinc²(x + k) = 1, so it is left out of
   both lines.

Units. The record's shot-noise unit: the two-sided vacuum density of an ideal
receiver is 1 (iq); for real records (if, homodyne) the spectrum is one-sided
on f ≥ 0 and normalised to the one-sided vacuum level, so the numbers equal
the two-sided density of :meth:`record_spectrum`. ``calibration`` carries the
factor to V²/Hz at the digitiser (``volts_per_shot_noise_unit`` squared, times
2 for one-sided); :func:`in_volts` applies it.

References
----------
Caves, Phys. Rev. D 26, 1817 (1982) (added noise of heterodyne detection and
of phase-preserving amplifiers).
Gardiner and Collett, Phys. Rev. A 31, 3761 (1985) (input-output theory).
"""

import dataclasses

import numpy as np

from simulator.errors import InputError
from simulator.linear.budget import CHUNK, FLOOR, Paths, budget_pieces, source_groups
from simulator.linear.spectra import adaptive_grid, checked_grid, provenance, tone_lines
from simulator.linear.spectrum import Spectrum
from simulator.model.chain import detection_chain
from simulator.model.laser_noise import vacuum_intensity
from simulator.model.poles import channel_form
from simulator.model.sample_rate import record_sample_rate
from simulator.model.system import as_system
from simulator.model.units import angular
from simulator.scenario.tone_sections import offset_words, reference_words

RECORD_UNITS = "record shot-noise units (vacuum = 1)"
VOLT_UNITS = "V^2/Hz at the digitiser"
# Aliases summed on each side where an alias sum is still needed (the resolvent
# fallback of a carried if record, close to an exceptional point): the non-white
# part of the density falls at least as 1/f^3 after the sinc^2, so the truncated
# tail is below 1e-6 of the total on the bundled scenarios (checked in the tests).
ALIASES = 100
BAND_POINTS = 801  # uniform points laid over the whole Nyquist band (filter, sinc^2)
SINC = "sampling: average over each sample interval (sinc²)"
ALIASING = "sampling: aliasing (noise folded in from f + k·fs, k ≠ 0)"
_CHAIN_INPUTS = ("loss.", "added.", "electronics.")
# The rest of the density at a line is read as total − peak only above this fraction of
# the total: the Lorentzian peak 2·area/(π·FWHM) is good to about 1e-7 of itself, so a
# line that tall (a very high-Q mode) has its floor from the uncoupled chain (our choice)
RESOLVED_REST = 1e-5


def digitiser_spectrum(system, frequency_hz=None, *, sample_rate_hz=None, aliases=ALIASES):
    """Density of the digitised record, in shot-noise units, with its noise budget.

    Parameters
    ----------
    system : simulator.model.system.System
        Or a scenario, built into one.
    frequency_hz : array_like, optional
        Record frequencies (Hz): two-sided for the iq receiver (f > 0
        anti-Stokes), f ≥ 0 for real records. Default: every resonance
        resolved, over the Nyquist band.
    sample_rate_hz : float, optional
        Default: the record's (``digitizer.sample_rate_hz`` or the automatic one).
    aliases : int
        Aliases k summed on each side, only where the pole form falls back to
        an alias sum (see :func:`sampled_density`); otherwise every alias is
        summed exactly.

    Returns
    -------
    simulator.linear.spectrum.Spectrum
        ``total`` is :func:`sampled_density` (the limit of
        ``system.chain.sampled_spectrum(f, fs, aliases)`` as the aliases
        grow); the contributions sum to it to round-off.
    """
    system = as_system(system, several_tones="detected").require_stable()
    scenario, chain = system.scenario, system.chain
    fs = record_sample_rate(scenario, chain) if sample_rate_hz is None else float(sample_rate_hz)
    if not (np.isfinite(fs) and fs > 0):
        raise InputError(f"sample_rate_hz = {sample_rate_hz!r}; expected a positive rate in Hz")
    real = chain.receiver != "iq"
    f = (_record_grid(system, fs) if frequency_hz is None
         else checked_grid(frequency_hz, real, "a real record's"))
    parts = continuous_lines(system, f)
    if scenario.electronics.bandwidth_hz is not None:
        parts[f"electronics low-pass filter ({scenario.electronics.bandwidth_hz:.6g} Hz)"] = (
            chain.record_spectrum(f) - sum(parts.values()))
    # the continuous density as the lines give it (they agree with record_spectrum to the
    # resolvent's round-off), so that the sampling lines close the sum exactly
    continuous = sum(parts.values())
    total, method = sampled_density(chain, f, fs, aliases=aliases)
    # white noise (the density's limit at high frequency) passes the sampling unchanged
    # (Σ_k sinc²(x + k) = 1): the two sampling lines show what it does to the rest
    coloured = continuous - chain.white_density()
    sinc2 = np.sinc(f / fs) ** 2
    parts[SINC] = (sinc2 - 1.0) * coloured
    parts[ALIASING] = total - continuous - parts[SINC]
    volts2 = chain.volts_per_unit ** 2 * (2.0 if real else 1.0)
    lines = tuple(dataclasses.replace(
        line, name=f"{line.name}, at the digitiser",
        frequency_hz=float(record_frequency(scenario, chain, line.frequency_hz)),
        power=float(line.power * chain_gain(scenario, record_frequency(
            scenario, chain, line.frequency_hz), fs))) for line in _cavity_lines(system))
    det = scenario.detection
    prov = provenance(scenario, det.scheme, chain.efficiency,
                      det.quadrature_angle_rad if det.scheme == "homodyne" else None)
    prov.update(at="record", receiver=chain.receiver)
    return Spectrum(frequency_hz=f, axis=record_axis(scenario, chain),
                    sided="one-sided" if real else "two-sided", units=RECORD_UNITS,
                    total=total, quantity=f"record at the digitiser ({chain.receiver} "
                    f"receiver, {fs:.6g} samples/s)", contributions=parts,
                    calibration={**chain.calibration(), "sample_rate_hz": fs,
                                 "sampled_by": method,
                                 "v2_per_hz_per_shot_noise_unit": volts2},
                    lines=lines, provenance=prov)


def sampled_density(chain, frequency_hz, sample_rate_hz, *, aliases=ALIASES):
    """(density, method): the record's integrate-and-dump density from the chain's poles.

    The closed-form sampled pole–residue form of the record's channels
    (:meth:`simulator.model.poles.PoleForm.sampled`: Σ_k over every alias,
    exactly), projected on the record (I + iQ for iq; the one channel
    otherwise) and read on the record's FFT axis, ω = −2πf. ``method`` is the
    form's own: ``"pole-residue"``, or the resolvent fallback and why (then
    sampled through the discrete-time resolvent, or for a carried if record by
    the alias sum over ±``aliases``).
    """
    carrier = chain.carrier_rad_s if chain.receiver == "if" else None
    form = channel_form(chain.model, carrier_rad_s=carrier, sample_rate_hz=sample_rate_hz,
                        aliases=aliases)
    if chain.receiver == "iq":
        form = form.project(np.array([1.0, 1.0j]))
    f = np.asarray(frequency_hz, dtype=float)
    density = form.spectrum(-angular(f))[0, :, 0, 0].real.reshape(f.shape)
    return density, form.method


def chain_gain(scenario, frequency_hz, sample_rate_hz):
    """|L(f)|² sinc²(f/fs): what the low-pass and the sample averaging leave of a narrow line."""
    f = np.asarray(frequency_hz, dtype=float)
    corner = scenario.electronics.bandwidth_hz
    filt = 1.0 / (1.0 + (f / corner) ** 2) if corner else 1.0
    return np.sinc(f / sample_rate_hz) ** 2 * filt


def _cavity_lines(system):
    """The calibration tone's lines at the cavity port, with the receiver's efficiency.

    A line of power P at ν (heterodyne, two-sided) is P at its record frequency
    in the record's shot-noise units, one-sided ones included (their density
    and their vacuum level both double).
    """
    scenario, chain = system.scenario, system.chain
    if chain.receiver == "homodyne":
        theta = scenario.detection.quadrature_angle_rad
        return tone_lines(system.model, scenario, np.array([np.cos(theta), np.sin(theta)],
                                                           dtype=complex),
                          chain.efficiency, one_sided=True)
    return tone_lines(system.model, scenario, np.array([1.0, 1.0j]) / np.sqrt(2.0),
                      chain.efficiency)


def record_axis(scenario, chain):
    """The meaning of the record's frequency axis, in words."""
    reference = reference_words(scenario)
    if chain.receiver == "iq":
        return f"record frequency = {offset_words(scenario)}"
    if chain.receiver == "if":
        det = scenario.detection
        return (f"record frequency f >= 0 (intermediate frequency "
                f"{det.intermediate_frequency_hz:.9g} Hz, local oscillator "
                f"{det.local_oscillator_side} {reference})")
    return "record frequency f >= 0 (baseband)"


def in_volts(spectrum):
    """A spectrum of :func:`digitiser_spectrum` in V²/Hz at the digitiser."""
    if spectrum.units != RECORD_UNITS:
        raise InputError(f"spectrum in {spectrum.units!r}; expected {RECORD_UNITS!r}")
    k = spectrum.calibration["v2_per_hz_per_shot_noise_unit"]
    return dataclasses.replace(
        spectrum, units=VOLT_UNITS, total=k * spectrum.total,
        contributions={name: k * v for name, v in spectrum.contributions.items()})


def record_frequency(scenario, chain, offset_hz):
    """Where a line at optical offset ν (from the drive) appears on the record's axis.

    iq: f = ν; homodyne: |ν|; if: |ν − s f_IF| with s = +1 for a local
    oscillator above the drive, −1 below (:meth:`DetectionChain.record_spectrum`:
    S_r(f) = S_u(θ − 2πf) + S_u(θ + 2πf), θ = s·2π f_IF).
    """
    nu = np.asarray(offset_hz, dtype=float)
    if chain.receiver == "iq":
        return nu
    if chain.receiver == "homodyne":
        return np.abs(nu)
    return np.abs(nu - chain.carrier_rad_s / (2.0 * np.pi))


def continuous_lines(system, frequency_hz):
    """Budget lines of the continuous record before the low-pass, on the record's axis.

    See the module notes (step 1). The device's lines are divided by the
    receiver's efficiency η = η_d·b (b = ½ single-ended), which they carry
    exactly (the chain scales the output field by √η), so they read as at an
    ideal receiver; the efficiency lines take the difference.
    """
    scenario, point = system.scenario, system.point
    unfiltered = system.chain
    if scenario.electronics.bandwidth_hz is not None:
        electronics = dataclasses.replace(scenario.electronics, bandwidth_hz=None)
        unfiltered = detection_chain(dataclasses.replace(scenario, electronics=electronics),
                                     point, system.model)
    model, receiver = unfiltered.model, unfiltered.receiver
    vacuum = vacuum_intensity(model)
    for i, name in enumerate(model.inputs):
        if name.startswith("electronics."):
            vacuum[i] = 0.0  # classical current noise
        elif name.startswith("added."):
            vacuum[i] = 0.5 if receiver == "iq" else 0.0  # heterodyne's own half quantum
    groups = source_groups(model)
    chain_group = {g[0]: next(p for p in _CHAIN_INPUTS if model.inputs[g[1][0]].startswith(p))
                   for g in groups if model.inputs[g[1][0]].startswith(_CHAIN_INPUTS)}
    w = angular(np.asarray(frequency_hz, dtype=float))
    if receiver == "homodyne":
        projection, shifts = np.array([1.0 + 0j]), (-w,)
    else:
        projection = np.array([1.0, 1.0j])
        shifts = (-w,) if receiver == "iq" else (unfiltered.carrier_rad_s - w,
                                                  unfiltered.carrier_rad_s + w)
    paths = Paths(model, projection)
    raw = {}
    for omega in shifts:
        for start in range(0, omega.size, CHUNK):
            pieces = budget_pieces(paths, omega[start:start + CHUNK], groups, vacuum)[1]
            pieces[FLOOR] = pieces[FLOOR] + 0.5
            for name, value in pieces.items():
                raw.setdefault(name, np.zeros(omega.size))[start:start + value.size] += value
    return _named_lines(raw, chain_group, scenario, unfiltered)


def _named_lines(raw, chain_group, scenario, chain):
    eta = chain.efficiency
    eta_d = scenario.detection.efficiency
    share = eta / eta_d
    out = {FLOOR: raw.pop(FLOOR)}
    chain_lines = {}
    for name in list(raw):
        source = name.split(": ")[0]
        if source in chain_group:
            chain_lines[chain_group[source]] = chain_lines.get(chain_group[source], 0.0) + \
                raw.pop(name)
    device = {name: value / eta for name, value in raw.items()}
    out.update(device)
    excess = sum(device.values()) if device else np.zeros_like(out[FLOOR])
    if eta_d < 1.0:
        out[f"detection efficiency η = {eta_d:.4g}: signal lost (vacuum in its place)"] = (
            (eta_d - 1.0) * excess)
    if share < 1.0:
        out["single-ended detection: half the signal to the combiner's unused port"] = (
            eta_d * (share - 1.0) * excess)
    n_add = chain.added_quanta  # from the noise temperature too (scenario.receiver)
    if "added." in chain_lines and n_add > 0:
        label = (f"amplifier added noise beyond heterodyne's half quantum (n_add − ½ = "
                 f"{n_add - 0.5:.4g})" if chain.receiver == "iq"
                 else f"amplifier added noise (n_add = {n_add:.4g} quanta)")
        out[label] = chain_lines["added."]
    if "electronics." in chain_lines:
        out["electronics current noise"] = chain_lines["electronics."]
    return {k: np.asarray(v, dtype=float) for k, v in out.items()
            if k == FLOOR or np.any(np.asarray(v) != 0.0)}


def _record_grid(system, fs):
    """Record frequencies resolving every resonance of the device, over the Nyquist band."""
    chain = system.chain
    nu = adaptive_grid(system.model)
    if chain.receiver == "iq":
        f = np.concatenate([nu, np.linspace(-fs / 2, fs / 2, BAND_POINTS)])
        return np.unique(f[np.abs(f) <= fs / 2])
    f = np.concatenate([record_frequency(system.scenario, chain, nu),
                        record_frequency(system.scenario, chain, -nu),
                        np.linspace(0.0, fs / 2, BAND_POINTS)])
    return np.unique(f[f <= fs / 2])


def record_sidebands(system, summaries, *, sample_rate_hz=None, aliases=ALIASES):
    """The sideband summary with each line's place, area and contrast at the digitiser.

    The area of a line at the record is η Im c (η = η_d·b of the receiver, c
    the pole residue of :mod:`simulator.linear.sidebands`) times the chain's
    gain at its record frequency, |L(f)|² sinc²(f/fs) (a line much narrower
    than the filter and the band); its peak is area·2/(π·FWHM), compared
    with the rest of the record's density there (the sampled total of
    :func:`sampled_density` minus the peak). The homodyne record mixes both
    sidebands into one line at |ν|: NaN there.
    """
    system = as_system(system, several_tones="detected")
    scenario, chain = system.scenario, system.chain
    fs = record_sample_rate(scenario, chain) if sample_rate_hz is None else sample_rate_hz
    out = []
    for s in summaries:
        sides = {}
        for key in ("stokes", "anti_stokes"):
            side = getattr(s, key)
            f = float(record_frequency(scenario, chain, side.frequency_hz))
            if chain.receiver == "homodyne" or not np.isfinite(f):
                sides[key] = side
                continue
            area = (chain.efficiency * side.area_above_floor / scenario.detection.efficiency
                    * float(chain_gain(scenario, f, fs)))
            peak = area * 2.0 / (np.pi * side.linewidth_hz)
            total = float(sampled_density(chain, np.array([f]), fs, aliases=aliases)[0][0])
            rest = total - peak
            if not rest > RESOLVED_REST * total:
                rest = uncoupled_density(system, f, fs, aliases)
            sides[key] = dataclasses.replace(side, record_frequency_hz=f, record_area=area,
                                             record_peak_to_background=peak / rest)
        out.append(dataclasses.replace(s, **sides))
    return tuple(out)


def uncoupled_density(system, frequency_hz, sample_rate_hz, aliases=ALIASES):
    """The record's density at ``frequency_hz`` with every optomechanical coupling zero.

    The floor a line sits on, where the line is so tall against it that the
    total minus the line's Lorentzian peak is lost in the peak's own rounding
    (:data:`RESOLVED_REST`): the same drive, cavity and detection chain, no
    mechanical line and no back-action.
    """
    from simulator.model.system import System

    scenario = system.scenario
    for i in range(len(scenario.mechanics)):
        scenario = scenario.replace(f"mechanics[{i}].coupling_hz", 0.0)
    for i in range(len(scenario.couplings)):
        scenario = scenario.replace(f"couplings[{i}].coupling_hz", 0.0)
    chain = as_system(System(scenario), several_tones="detected").chain
    return float(sampled_density(chain, np.array([frequency_hz]), sample_rate_hz,
                                 aliases=aliases)[0][0])
