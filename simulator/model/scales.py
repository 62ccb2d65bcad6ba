"""Scales of the record: volts at the digitiser per record (shot-noise) unit.

The detection chain (:mod:`simulator.model.chain`) gives the record in
shot-noise units; these functions give the factor to volts at the digitiser,
and the quantities a record's calibration states.

An optical receiver (``detection.receiver = "optical"``) turns a
record unit into photocurrent, e √(b Φ_LO), and into volts through the
transimpedance. A microwave receiver (``"microwave"``: a phase-preserving
amplifier chain of power gain G, then an ideal IQ mixer of unit conversion
gain, into a digitiser of input impedance Z) has no photocurrent: a field of
photon flux Φ = |z|² (z in √(photons/s)) arrives as the power G h f Φ at the
digitiser. With the IQ convention v(t) = I cos ωt + Q sin ωt, whose mean
power is (I² + Q²)/(2Z),

    iq:  I + iQ ↔ √(2 G Z h f) × record units,
    if:  v_IF = √(G Z h f / 2) × r   (r = 2 Re[e^{iθt} u]),

so that a white input-referred noise of n + ½ quanta (n added by the
amplifier, ½ the vacuum) gives the power P = G h f (n + ½) B in a band B
at the digitiser (Clerk et al., Rev. Mod. Phys. 82, 1155 (2010), Sec. V,
for added noise referred to the amplifier's input). f is the frequency of
the detected tone (``detection.tone``, the drive by default): the sidebands
lie within Ωm of it, a relative error of Ωm/ω in the scale, common practice
to neglect.

References
----------
Clerk, Devoret, Girvin, Marquardt, Schoelkopf, Rev. Mod. Phys. 82, 1155
(2010) (quantum limits of amplifiers, added noise referred to the input).
"""

import numpy as np
from scipy import constants


def optical_scales(scenario, share, side, frequency_hz=None):
    """Photocurrent and volts per record unit of an optical receiver.

    The photocurrent per record unit is e √(b Φ_LO), Φ_LO = η P_LO/(h f_LO)
    (see :func:`simulator.model.chain.detection_chain`); ``share`` is b,
    ``side`` ±1 for a local oscillator above or below the detected tone, whose
    carrier is ``frequency_hz`` (default: the drive's).

    Returns
    -------
    dict
        ``electronic`` (the current noise in record units) and the scale
        fields of :class:`simulator.model.chain.DetectionChain`.
    """
    det, el = scenario.detection, scenario.electronics
    f_lo = (frequency_hz or scenario.drive.carrier_frequency_hz) + side * \
        det.intermediate_frequency_hz
    flux = det.efficiency * det.local_oscillator_power_w / (constants.h * f_lo)
    amps = constants.e * np.sqrt(share * flux)
    return {"electronic": el.current_noise_a_per_sqrt_hz ** 2 / 2.0 / amps ** 2,
            "amperes_per_unit": float(amps),
            "volts_per_unit": float(amps * el.transimpedance_ohm),
            "lo_photocurrent_a": float(constants.e * flux)}


def microwave_scales(scenario, receiver, frequency_hz=None):
    """Volts per record unit of a microwave receiver (module doc): no photocurrent.

    ``receiver`` is ``"iq"`` or ``"if"``. Returns the scale fields of
    :class:`simulator.model.chain.DetectionChain` (photocurrents NaN) and
    ``electronic`` = 0 (later stages are in the amplifier's added noise).
    ``frequency_hz`` is the detected tone's carrier (default: the drive's).
    """
    el = scenario.electronics
    gain = 10.0 ** (el.amplifier_gain_db / 10.0)
    quantum = constants.h * (frequency_hz or scenario.drive.carrier_frequency_hz)
    volts = np.sqrt(2.0 * gain * el.impedance_ohm * quantum)
    if receiver == "if":  # v_IF = I cos θt − Q sin θt = (volts of iq) × r / 2
        volts /= 2.0
    return {"electronic": 0.0, "amperes_per_unit": float("nan"),
            "volts_per_unit": float(volts), "lo_photocurrent_a": float("nan"),
            "front_end": "microwave", "power_gain": float(gain),
            "impedance_ohm": float(el.impedance_ohm), "quantum_j": float(quantum),
            "scale_key": "electronics.amplifier_gain_db"}
