"""Cramér–Rao error of a heating-rate measurement for a scheduled protocol.

The record of a ``[schedule]`` reads one mechanical mode through its
anti-Stokes sideband. Demodulated there, the sideband is the mode's complex
amplitude a(t) (× √G, G the line's block power per phonon,
:func:`simulator.analysis.heating.block_power_per_phonon`) on the white
floor S_b of the detection. In weak coupling a segment s obeys

    da = −(Γ_s/2) a dt + dW,   E|dW|² = G (H + h_s) dt,   Γ_s = Γm + Γopt,s,

with H = Γm n_th the heating rate by the bath (phonons/s) and h_s the
optical heating of the segment (Marquardt et al., PRL 99, 093902 (2007);
Aspelmeyer, Kippenberg & Marquardt, RMP 86, 1391 (2014), Sec. VII.A). The
mode's fluctuating force is what heats it: its spectrum at frequencies above
Γ_s, G(H + h_s)/ω², does not depend on the occupation the mode happens to
have, so a transient carries the same information on H as a stationary
stretch of the same length. The Fisher information of θ = (Γm, H) is
therefore, segment by segment, Whittle's form for a stationary Gaussian
record of length T_s (Whittle, J. R. Stat. Soc. B 15, 125 (1953);
Dahlhaus, Ann. Stat. 25, 1 (1997), for segments of a locally stationary
process; both from memory),

    I_ab = Σ_s T_s ∫ df ∂_a ln S_s(f) ∂_b ln S_s(f),
    S_s(f) = G_s (H + h_s)/((Γ_s/2)² + (2πf)²) + S_b,s,

two-sided in f (the complex amplitude, circular: no factor ½), over the
band |f| < fs/2. It leaves out what the segments' edges add (the initial
occupation of a transient, the correlations across a switch), which is
small when every segment lasts many correlation times of the increments
(the time 1/√(G H / S_b) over which the force noise climbs out of the
floor); :func:`gaussian_fisher` is the exact Gaussian information of the
same model for a short record, the check. Γopt,s and h_s are the segment's
own (Γ_eff − Γm and Γ_eff n_∞ − Γm n_th of its steady state), held fixed.
"""

import dataclasses

import numpy as np
import scipy.integrate

from simulator.errors import InputError

FREQUENCY_POINTS = 4000  # log-spaced frequencies of the Whittle integral (our choice)
RELATIVE_STEP = 1e-5  # step of the numerical derivatives in θ, relative


@dataclasses.dataclass(frozen=True, kw_only=True)
class SegmentModel:
    """Narrow-band model of one segment: what the record's anti-Stokes line sees."""

    name: str
    duration_s: float
    gain: float  # block power per phonon, shot-noise units
    floor: float  # two-sided white floor under the line, shot-noise units per Hz
    optical_damping: float  # Γopt,s, 1/s
    optical_heating: float  # h_s, phonons/s
    occupation: float  # n_∞ of the segment


@dataclasses.dataclass(frozen=True, kw_only=True)
class HeatingBound:
    """Cramér–Rao errors of H = Γm n_th (phonons/s) and of Γm (1/s) for a schedule."""

    heating_rate: float  # Γm n_th, phonons/s
    heating_rate_error: float
    damping_rate: float  # Γm, 1/s
    damping_rate_error: float
    cycles: int  # repetitions of the most repeated segment name
    duration_s: float

    def text(self):
        """One line: the heating rate's bound after the schedule's cycles."""
        cycles = f"{self.cycles} cycle{'' if self.cycles == 1 else 's'}"
        return (f"heating rate: {self.heating_rate:.4g} ± {self.heating_rate_error:.3g} "
                f"phonons/s after {cycles} ({self.duration_s:.4g} s of record; "
                "Cramér–Rao)")



def central_differences(function, theta):
    """∂function/∂θ_i for each parameter of θ = (Γm, H), by central differences of
    :data:`RELATIVE_STEP` × max(|θ_i|, |Γm|) (a list, one array per parameter).

    The floor Γm of the step (a heating of one phonon per relaxation time of the
    bare mode) serves a bath near zero temperature, where H = Γm·n_th vanishes; a
    step that would make H negative, outside the model, is taken forward only.
    """
    theta = np.asarray(theta, dtype=float)
    out = []
    for i in range(len(theta)):
        h = RELATIVE_STEP * max(abs(theta[i]), abs(theta[0]))
        up, down = theta.copy(), theta.copy()
        up[i] += h
        if i == 0 or theta[i] - h >= 0:
            down[i] -= h
            out.append((function(up) - function(down)) / (2 * h))
        else:
            out.append((function(up) - function(theta)) / h)
    return out


def segment_models(scenario, mode=0):
    """``(SegmentModel per segment, Γm, H)`` of a scheduled scenario's first mode."""
    from simulator.analysis.heating import block_power_per_phonon, segment_system_of
    from simulator.linear.sidebands import sideband_summary
    from simulator.linear.steady_state import steady_state
    from simulator.model.chain import automatic_sample_rate

    segments = scenario.schedule.segments
    systems = segment_system_of(scenario, {s.name for s in segments})
    fs = scenario.digitizer.sample_rate_hz or max(
        automatic_sample_rate(s.chain, scenario.detection.intermediate_frequency_hz)
        for s in systems.values())
    mp = next(iter(systems.values())).point.modes[mode]
    gamma_m = 2 * np.pi * mp.linewidth_hz
    heating = gamma_m * mp.bath_occupation
    per_name = {}
    for name, system in systems.items():
        ms = steady_state(system).modes[mode]
        line = sideband_summary(system)[mode].anti_stokes
        peak = 2.0 * line.record_area / (np.pi * line.linewidth_hz)  # Lorentzian peak
        rate = 2 * np.pi * ms.effective_linewidth_hz
        per_name[name] = dict(gain=block_power_per_phonon(system, fs, mode),
                              floor=peak / line.record_peak_to_background,
                              optical_damping=rate - gamma_m,
                              optical_heating=rate * ms.occupation - heating,
                              occupation=ms.occupation)
    models = tuple(SegmentModel(name=s.name, duration_s=s.duration_s, **per_name[s.name])
                   for s in segments)
    return models, gamma_m, heating, fs


def segment_spectrum(model, theta, frequency_hz):
    """S_s(f) of the demodulated line for θ = (Γm, H): Lorentzian force noise on the floor."""
    gamma_m, heating = theta
    rate = gamma_m + model.optical_damping
    force = model.gain * (heating + model.optical_heating)
    return force / ((rate / 2) ** 2 + (2 * np.pi * frequency_hz) ** 2) + model.floor


def whittle_fisher(models, theta, sample_rate_hz):
    """2 × 2 Fisher information of θ = (Γm, H), Σ_s T_s ∫ ∂ ln S ∂ ln S df (module notes)."""
    theta = np.asarray(theta, dtype=float)
    info = np.zeros((2, 2))
    cache = {}
    for m in models:
        if m.name not in cache:
            rate = theta[0] + m.optical_damping
            f = np.geomspace(rate * 1e-4 / (2 * np.pi), sample_rate_hz / 2, FREQUENCY_POINTS)
            grads = central_differences(
                lambda t, m=m, f=f: np.log(segment_spectrum(m, t, f)), theta)
            per_second = np.array([[2.0 * scipy.integrate.trapezoid(  # ±f: twice one side
                grads[i] * grads[j], f) for j in range(2)] for i in range(2)])
            cache[m.name] = per_second
        info += m.duration_s * cache[m.name]
    return info


def heating_rate_bound(scenario, mode=0):
    """:class:`HeatingBound` of a scheduled scenario (Whittle, module notes).

    Raises
    ------
    simulator.errors.InputError
        The scenario has no ``[schedule]``, or the schedule does not
        determine both Γm and H (an information matrix that is singular).
    """
    if getattr(scenario, "schedule", None) is None:
        raise InputError(f"scenario {scenario.scenario.name!r} has no [schedule]; the "
                         "heating-rate bound is for a scripted protocol")
    models, gamma_m, heating, fs = segment_models(scenario, mode)
    info = whittle_fisher(models, (gamma_m, heating), fs)
    try:
        cov = np.linalg.inv(info)
    except np.linalg.LinAlgError:
        cov = np.full((2, 2), np.inf)
    counts = {}
    for m in models:
        counts[m.name] = counts.get(m.name, 0) + 1
    return HeatingBound(heating_rate=float(heating),
                        heating_rate_error=float(np.sqrt(max(cov[1, 1], 0.0))),
                        damping_rate=float(gamma_m),
                        damping_rate_error=float(np.sqrt(max(cov[0, 0], 0.0))),
                        cycles=max(counts.values()),
                        duration_s=float(sum(m.duration_s for m in models)))


def record_covariance(models, theta, spacing_s, start_occupation):
    """Covariance of the line's samples every Δ for θ = (Γm, H) (E|u|² on the diagonal).

    The amplitude at t_k = kΔ is an AR(1) with ρ_k = e^{−Γ_s Δ/2} and
    variance G_s n(t_k), n following dn/dt = −Γ_s (n − n_s) exactly; each
    sample (a block mean of length Δ) adds white noise S_b/Δ.
    """
    gamma_m, heating = theta
    log_rho, var, gain, white = [], [], [], []
    n = start_occupation
    for m in models:
        rate = gamma_m + m.optical_damping
        n_inf = (heating + m.optical_heating) / rate
        for _ in range(max(1, int(round(m.duration_s / spacing_s)))):
            var.append(n)
            gain.append(m.gain)
            white.append(m.floor / spacing_s)
            log_rho.append(-0.5 * rate * spacing_s)
            decay = np.exp(-rate * spacing_s)
            n = decay * n + (1 - decay) * n_inf
    cum = np.concatenate([[0.0], np.cumsum(log_rho)[:-1]])
    var, root = np.array(var), np.sqrt(np.array(gain))
    index = np.arange(len(var))
    k = np.exp(-np.abs(np.subtract.outer(cum, cum))) * var[np.minimum.outer(index, index)]
    return np.outer(root, root) * k + np.diag(white)


def gaussian_fisher(models, theta, spacing_s, start_occupation):
    """Exact Gaussian Fisher information of θ for the same model, sampled every Δ (small N).

    With the covariance C(θ) of all samples (:func:`record_covariance`),
    I_ab = tr(C⁻¹ ∂_a C C⁻¹ ∂_b C) for circular complex Gaussian data (Kay,
    Fundamentals of Statistical Signal Processing: Estimation Theory
    (Prentice Hall, 1993), Eq. 15.60, from memory). Dense: for records of a
    few thousand samples.
    """
    theta = np.asarray(theta, dtype=float)
    c = record_covariance(models, theta, spacing_s, start_occupation)
    derivs = central_differences(
        lambda t: record_covariance(models, t, spacing_s, start_occupation), theta)
    solved = [np.linalg.solve(c, d) for d in derivs]
    return np.array([[np.trace(solved[i] @ solved[j]) for j in range(2)] for i in range(2)])
