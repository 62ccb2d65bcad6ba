"""The calibration tone: a phase modulation φ0 cos(Ωt) of the drive, by linearity.

The tone enters the model as the deterministic input ``laser.tone`` of
:mod:`simulator.model.laser_noise` (intensity 0 in N): δa_in = −iā_in φ_tone on
the drive path only, so the local oscillator never carries it. Being
deterministic, it is not part of any density: spectra show it as lines
(power, not density) and records add its exact steady-state response.

References
----------
Gorodetsky, Schliesser, Anetsberger, Deléglise, Kippenberg, Opt. Express 18,
23236 (2010).
"""

import numpy as np

from simulator.model.laser_noise import TONE_INPUT
from simulator.model.units import angular


def tone_response(model, scenario, sign=1.0):
    """φ0 H(±Ω) at the tone input: output quadratures per cos(Ωt) modulation (complex)."""
    tone = scenario.drive.calibration_tone
    k = model.index(TONE_INPUT, "inputs")
    omega = sign * float(angular(tone.frequency_hz))
    return tone.depth_rad * model.transfer(np.array([omega]))[0, :, k]


def tone_amplitude(chain, scenario):
    """Largest amplitude the tone reaches in any record channel (chain units); 0 without.

    An upper bound on |:func:`tone_signal`| (the sample averaging only lowers
    it, by sinc), for the digitiser's automatic full scale.
    """
    if scenario.drive.calibration_tone.depth_rad == 0:
        return 0.0
    big_y = tone_response(chain.model, scenario)
    if chain.receiver == "if":
        return float(abs(big_y[0] + 1j * big_y[1])
                     + abs(np.conj(big_y[0]) + 1j * np.conj(big_y[1])))
    return float(np.max(np.abs(big_y[:1] if chain.receiver == "homodyne" else big_y)))


def tone_signal(chain, scenario, sample_rate_hz):
    """The tone's exact contribution to the record samples, or None without a tone.

    Parameters
    ----------
    chain : simulator.model.chain.DetectionChain
    scenario : simulator.scenario.loader.Scenario
    sample_rate_hz : float

    Returns
    -------
    callable or None
        ``signal(first, count)`` → the samples ``first … first + count − 1``
        to add to the record (shot-noise units), shaped like the chain's
        samples: (count, 2) for iq, (count,) for if and homodyne.

    Notes
    -----
    By linearity the steady-state response of each chain output to φ0 cos Ωt
    is y(t) = Re[Y e^{−iΩt}], Y = φ0 H(Ω). Integrate-and-dump averages it
    over each interval [nT, (n + 1)T]: (1/T)∫ e^{−iΩt} dt =
    e^{−iΩ(n+½)T} sinc(ΩT/2π). For the if receiver the real photocurrent
    2 Re[e^{iθt}(y_re + i y_im)] holds the two frequencies θ ∓ Ω, each
    averaged the same way.
    """
    if scenario.drive.calibration_tone.depth_rad == 0:
        return None
    big_y = tone_response(chain.model, scenario)
    omega, t = float(angular(scenario.drive.calibration_tone.frequency_hz)), 1.0 / sample_rate_hz
    if chain.receiver == "if":
        theta = chain.carrier_rad_s
        terms = [(big_y[0] + 1j * big_y[1], theta - omega),
                 (np.conj(big_y[0]) + 1j * np.conj(big_y[1]), theta + omega)]
    else:
        terms = [(amp, -omega) for amp in big_y]

    def averaged(amp, w, first, count):
        cycles = w * t / (2 * np.pi)
        mid = np.arange(first, first + count, dtype=np.float64) + 0.5
        phase = 2 * np.pi * np.mod(mid * cycles, 1.0)
        return (amp * np.sinc(cycles) * np.exp(1j * phase)).real

    def signal(first, count):
        parts = [averaged(amp, w, first, count) for amp, w in terms]
        if chain.receiver == "if":
            return parts[0] + parts[1]
        return parts[0] if chain.receiver == "homodyne" else np.column_stack(parts)

    return signal
