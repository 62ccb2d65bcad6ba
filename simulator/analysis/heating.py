"""Heating rate in phonons per second from a calibrated sideband (transients of a schedule).

When cooling is switched off, the mode re-thermalises by the weak-coupling
rate equation dn/dt = −Γ_eff (n − n_∞) (Marquardt et al., PRL 99, 093902
(2007); Aspelmeyer, Kippenberg & Marquardt, RMP 86, 1391 (2014), Sec. VII.A),
so its initial slope, the heating rate in phonons/s, is

    ṅ(0) = Γ_eff (n_∞ − n₀) = Γm n_th − Γm n₀   (tone off or on resonance),

which is Γm·n_th for a mode cooled well below its bath. A heterodyne record
reads n through the anti-Stokes sideband: the demodulated block power is
P(t) = G n(t) + B, G the line's area per phonon (its block mean passes a
narrow line whole), B the floor. The slope in phonons/s is therefore
Γ (P∞ − P₀)/G, the floor cancelling. G is the nominal calibration of the
segment's operating point (the thermometry's: :meth:`simulator.analysis.
thermometry.Calibration.area_per_quantum`, η (κ_ex/κ)·4g²/κ per phonon,
times the cavity's power response at the anti-Stokes frequency and the
integrate-and-dump sinc²), i.e. g₀, the photon number and the detection
efficiency known from calibration measurements (Gorodetsky et al., Opt.
Express 18, 23236 (2010), for g₀; common practice).

The truth of the same quantity, :func:`initial_heating_rates`, is the weak-
coupling slope Γ_eff (n_∞ − n(t_s)) at every segment start t_s, with n(t_s)
from the exact covariance flow of the record's plan
(:func:`simulator.records.protocol.segment_starts`) and Γ_eff, n_∞ the
segment's steady values; segments of one name are averaged, as the estimator
averages their cycles.
"""

import numpy as np

from simulator.analysis.thermometry import Calibration, cavity_filter


def block_power_per_phonon(system, sample_rate_hz, mode=0):
    """G: mean demodulated block power of the anti-Stokes line per phonon (shot-noise units).

    A line narrow against the block bandwidth fs/L passes a block mean whole,
    so its block power is its area: η (κ_ex/κ)(4g²/κ) n times the cavity's
    power response at +f_m and sinc²(f_m/fs) (the record's integrate-and-dump
    samples), the model of :func:`simulator.analysis.thermometry.sideband_model`.
    """
    cal = Calibration.from_scenario(system, mode)
    f = cal.mechanical_frequency_hz
    return float(cal.area_per_quantum()
                 * cavity_filter(f, cal.cavity_linewidth_hz, cal.detuning_hz)
                 * np.sinc(f / sample_rate_hz) ** 2)


def nominal_damping_rate(system, mode=0):
    """Γ_eff = Γm + A₋ − A₊ (1/s) from the nominal calibration (weak coupling).

    A∓ = g²κ/(κ²/4 + (Δ ± Ω)²) (Marquardt et al., PRL 99, 093902 (2007)), Γm
    as measured by a ring-down: what the experimenter knows of a segment's
    relaxation rate.
    """
    cal = Calibration.from_scenario(system, mode)
    k, g = cal.cavity_linewidth_hz, cal.coupling_rate_hz
    a_minus = g**2 * k / (k**2 / 4 + (cal.detuning_hz + cal.mechanical_frequency_hz) ** 2)
    return float(2 * np.pi * (cal.mechanical_linewidth_hz + a_minus - cal.stokes_rate_hz()))


def segment_system_of(scenario, names, *, require_stable=True):
    """``{name: System}`` of the first segment of each name (changes applied, checked
    stable unless ``require_stable`` is false)."""
    import dataclasses

    from simulator.errors import OperatingPointError
    from simulator.model.system import System

    base = System(dataclasses.replace(scenario, schedule=None))
    out = {}
    for segment in scenario.schedule.segments:
        if segment.name in names and segment.name not in out:
            system = base
            for path, value in (segment.changes or {}).items():
                system = system.replace(path, value)
            if require_stable and not system.stable:
                raise OperatingPointError(f"schedule segment {segment.name!r} is unstable "
                                          f"({system.stability.cause})")
            out[segment.name] = system
    return out


def initial_heating_rates(scenario):
    """Truth: ``{segment name: mean Γ_eff (n_∞ − n(t_s)) over its cycles}`` (phonons/s).

    First mode; every segment but the first (the first has no switch at its
    start) and every kicked one. n(t_s) is the exact occupation at the
    segment's first sample: the covariance carried from the record's start
    state (:func:`simulator.records.protocol.start_state`) through every
    segment by the closed-form flow
    (:func:`simulator.records.protocol.covariance_flow`) over its whole
    samples, as the record's plan does, with each name's model built once.
    """
    from types import SimpleNamespace

    from simulator.linear.steady_state import steady_state
    from simulator.model.chain import automatic_sample_rate
    from simulator.records.protocol import segment_flow, start_state

    segments = scenario.schedule.segments
    # an unstable segment (a growing pulse) has no n_∞ and no rate; segment_flow
    # carries the state through it by Van Loan's block exponential
    systems = segment_system_of(scenario, {seg.name for seg in segments}, require_stable=False)
    parts = {name: SimpleNamespace(  # what the record's plan holds of each segment
        system=system, chain=system.chain, discrete=SimpleNamespace(
            state_covariance=system.chain.model.covariance() if system.stable else None))
        for name, system in systems.items()}
    fs = scenario.digitizer.sample_rate_hz or max(
        automatic_sample_rate(p.chain, scenario.detection.intermediate_frequency_hz)
        for p in parts.values())
    first = parts[segments[0].name]
    _, cov = start_state(scenario.schedule, first)
    mode = first.system.point.modes[0].name
    iq, ip = first.chain.model.index(f"{mode}.q"), first.chain.model.index(f"{mode}.p")
    rates = {}
    for k, seg in enumerate(segments):
        if k > 0 and seg.excite_phonons == 0 and systems[seg.name].stable:
            ms = steady_state(systems[seg.name]).modes[0]
            n_start = 0.5 * (cov[iq, iq] + cov[ip, ip] - 1.0)
            rates.setdefault(seg.name, []).append(
                2 * np.pi * ms.effective_linewidth_hz * (ms.occupation - n_start))
        cov = segment_flow(parts[seg.name], cov, round(seg.duration_s * fs) / fs)[0]
    return {name: float(np.mean(values)) for name, values in rates.items()}


def nominal_relaxations(scenario, names):
    """``{name: (n₀, n_∞, Γ_eff)}``: the nominal transient of each named segment.

    The weak-coupling rate equation dn/dt = −Γ_eff (n − n_∞) carried through
    the schedule with every segment's nominal Γ_eff
    (:func:`nominal_damping_rate`) and steady occupation, from the first
    segment's steady state; n₀ is the mean over the segment's cycles of n at
    their start. What the experimenter expects before looking at the record:
    it sets fit weights, never a result. An unstable segment (no n_∞) leaves n
    as it was.
    """
    from simulator.linear.steady_state import steady_state

    segments = scenario.schedule.segments
    systems = segment_system_of(scenario, {s.name for s in segments}, require_stable=False)
    steady = {name: (steady_state(s).modes[0].occupation, nominal_damping_rate(s))
              for name, s in systems.items() if s.stable}
    n = steady.get(segments[0].name, (0.0, 0.0))[0]
    starts = {}
    for seg in segments:
        starts.setdefault(seg.name, []).append(n)
        if seg.name in steady:
            n_inf, rate = steady[seg.name]
            n = n_inf + (n - n_inf) * np.exp(-rate * seg.duration_s)
    return {name: (float(np.mean(starts[name])), *steady[name]) for name in names}
