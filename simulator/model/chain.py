"""The detection chain as extra inputs, states and outputs of the one linear model.

:func:`detection_chain` takes the scenario's linear model (cavity and
mechanics, outputs ``output.X/Y`` = the field leaving the port) and appends
everything linear that lies between that field and the digitiser: detection
loss, the heterodyne or homodyne receiver, an optional phase-preserving
amplifier, the input-referred current noise of the electronics and a
single-pole low-pass filter. The result is again one
:class:`~simulator.model.statespace.StateSpace`, whose outputs are the record in
shot-noise units; the analytic spectra, the stationary covariance and the
time-domain records are all computed from it.

Receivers (quadratures X, Y with vacuum variance ½; z = (X + iY)/√2):

- ``iq`` heterodyne: z_d = √η z_out + √(1−η) z_v is mixed with a second,
  independent noise z_a of density ½ (the vacuum of the 50:50 split, Caves
  1982) or n_add (a phase-preserving amplifier with that added noise); the
  record is w = I + iQ = (z_d + z_a)* plus current noise on each channel. The
  complex conjugate, taken here and nowhere else, puts the anti-Stokes
  sideband at positive frequency in an FFT or scipy.signal.welch.
- ``if`` heterodyne: one real photocurrent r(t) = 2 Re[e^{iθt} u(t)],
  u = z_d + z_a + current noise, θ = ±2π f_IF (local oscillator above/below
  the drive). The model's outputs are Re u and Im u; θ enters the filter and
  the sampling (:mod:`simulator.records.discretize`) and the rotation of each sample.
- homodyne: r = 2 Re[e^{−iφ}(z_d + z_a)] + current noise = √2 X_φ for an ideal
  detector, X_φ = cos φ X + sin φ Y.

In every case the record's two-sided vacuum density is 1 per Hz (the unit
``shot_noise_per_count`` refers to) when the electronics add nothing.

Scales (volts at the digitiser per record unit, optical or microwave) are in
:mod:`simulator.model.scales`; the builder and the demodulator of one receiver
in :mod:`simulator.model.chain_builder`.

References
----------
Caves, Phys. Rev. D 26, 1817 (1982) (added noise of phase-preserving
amplifiers and of heterodyne detection).
Yuen and Chan, Opt. Lett. 8, 177 (1983) (balanced homodyne detection).
"""

import dataclasses

import numpy as np

from simulator.errors import InputError
from simulator.model.chain_builder import (  # noqa: F401 (part of this module's API)
    ChainBuilder,
    demodulator,
    receiver_scales,
)
from simulator.model.sample_rate import (  # noqa: F401 (the rate's rule, imported from here too)
    LINE_SINC2,
    OVERSAMPLING,
    automatic_sample_rate,
    record_sample_rate,
)
from simulator.model.statespace import StateSpace
from simulator.model.units import angular
from simulator.scenario.receiver import amplifier_added_quanta


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class DetectionChain:
    """The scenario's model with the detection chain appended, and its scales.

    Attributes
    ----------
    model : StateSpace
        Outputs in shot-noise units: ``record.I, record.Q`` (iq),
        ``record.envelope.re, record.envelope.im`` (if) or ``record`` (homodyne).
    receiver : str
        ``"iq"``, ``"if"`` or ``"homodyne"``.
    carrier_rad_s : float
        θ (rad/s) of r = 2 Re[e^{iθt} u] for the if receiver; 0 otherwise.
    efficiency : float
        Signal efficiency of the receiver (detection efficiency, halved for
        single-ended detection).
    added_quanta : float
        Density of the extra circular noise z_a (½ for heterodyne without an
        amplifier, n_add with one, 0 otherwise).
    electronic_noise : float
        Two-sided density of the current noise in record units, per real channel.
    amperes_per_unit : float
        Photocurrent (A) per record unit (per channel for iq); NaN for a
        microwave receiver, which has no photocurrent.
    volts_per_unit : float
        Voltage at the digitiser (V) per record unit.
    lo_photocurrent_a : float
        Mean photocurrent of the optical local oscillator (A); NaN for a
        microwave receiver.
    front_end : str
        ``"optical"`` or ``"microwave"`` (``detection.receiver``).
    power_gain : float
        Power gain G of the microwave amplifier chain (NaN for optical).
    impedance_ohm : float
        Impedance Z of the microwave line and digitiser (NaN for optical).
    quantum_j : float
        h f, the energy of one quantum at the drive frequency (J); NaN for
        optical, whose scale is the local oscillator's.
    scale_key : str
        The scenario key that sets the volts per record unit (named when the
        record clips).
    tones : tuple of str
        With several demodulated tones (``detection.tones``, or the tones of a
        joint bound: :mod:`simulator.model.tone_channels`), their names: the
        outputs are ``record.<tone>.I/Q`` (``record.<tone>`` for homodyne) in
        this order and the scale fields above are the first tone's; empty for
        the one-tone chain.
    channel_scales : tuple of dict
        Per tone of ``tones``: its scale fields and ``electronic_noise`` (the
        scale follows each tone's frequency, h f for microwave, the local
        oscillator's for optical).
    """

    model: StateSpace
    receiver: str
    carrier_rad_s: float
    efficiency: float
    added_quanta: float
    electronic_noise: float
    amperes_per_unit: float
    volts_per_unit: float
    lo_photocurrent_a: float
    front_end: str = "optical"
    power_gain: float = float("nan")
    impedance_ohm: float = float("nan")
    quantum_j: float = float("nan")
    scale_key: str = "electronics.transimpedance_ohm"
    tones: tuple = ()
    channel_scales: tuple = ()

    @property
    def record_kind(self):
        """``"iq"`` (complex, shape (N, 2)) or ``"if"`` (real, shape (N,))."""
        return "iq" if self.receiver == "iq" else "if"

    def integrator_drift(self):
        """Drift R of the integrate-and-dump integrator dρ = (R ρ + y) dt.

        Zero (a plain integrator) except for the if receiver, where ρ rotates
        at −θ so that e^{iθT} ρ(T) = ∫₀ᵀ e^{iθs} u ds.
        """
        p = len(self.model.outputs)
        if self.receiver != "if":
            return np.zeros((p, p))
        t = self.carrier_rad_s
        return np.array([[0.0, t], [-t, 0.0]])

    def record_spectrum(self, frequency_hz):
        """Two-sided density (shot-noise units per Hz) of the continuous record.

        On the axis of an FFT or ``scipy.signal.welch(..., return_onesided=False)``
        of the stored record: for iq, f > 0 is anti-Stokes; for if and homodyne
        the record is real and the density even in f. For if it is the time
        average of the cyclostationary photocurrent.

        Notes
        -----
        The model's spectrum S(ω) = H N H† uses the kernel e^{+iωt}
        (x(t) = ∫dω/2π e^{−iωt} x(ω)), the FFT the kernel e^{−iωt}, so the
        record's density at f is the model's at ω = −2πf. For if,
        r = e^{iθt}u + e^{−iθt}u* gives S_r(f) = S_u(θ − 2πf) + S_u(θ + 2πf).
        """
        f = np.asarray(frequency_hz, dtype=float)
        if self.receiver == "homodyne":
            return self.model.output_spectrum(-angular(f))[..., 0, 0].real
        c = np.array([1.0, 1.0j])
        if self.receiver == "iq":
            return _project(self.model.output_spectrum(-angular(f)), c)
        w, t = angular(f), self.carrier_rad_s
        return (_project(self.model.output_spectrum(t - w), c)
                + _project(self.model.output_spectrum(t + w), c))

    def sampled_spectrum(self, frequency_hz, sample_rate_hz, aliases=400):
        """Density of the integrate-and-dump samples: aliased continuous × sinc².

        S_n(f) = Σ_k S(f + k fs) sinc²((f + k fs)/fs), the exact density of
        samples that average the continuous record over each interval
        1/fs. The white part of S (its limit at high frequency) is summed in
        closed form (Σ_k sinc²(x + k) = 1); the rest falls at least as 1/f³
        after the sinc² and is summed over |k| ≤ ``aliases``, symmetrically so
        that its part odd in f (∝ 1/f) cancels between k and −k.
        """
        f = np.asarray(frequency_hz, dtype=float)
        fs = float(sample_rate_hz)
        white = self._white_density()
        k = np.arange(-aliases, aliases + 1)
        total = np.full(f.shape, white)
        for chunk in np.array_split(k, max(1, k.size // 64)):
            g = f[..., None] + chunk * fs
            total += ((self.record_spectrum(g) - white) * np.sinc(g / fs) ** 2).sum(axis=-1)
        return total

    def white_density(self):
        """The record's two-sided density at high frequency (white noise; 0 behind a low-pass)."""
        return self._white_density()

    def channel_form(self, sample_rate_hz=None, groups=None):
        """:class:`~simulator.model.poles.PoleForm` of the record's real channels.

        iq: the 2×2 matrix of I and Q; homodyne: the one channel; if: the one
        real photocurrent r = e^{iθt}u + c.c. (time-averaged, image band
        included). With ``sample_rate_hz``, the integrate-and-dump samples
        (aliased × sinc², exact). Evaluate on the model's axis ω; the record's
        FFT axis is f = −ω/2π (:meth:`record_spectrum`). ``groups`` (input
        indices per budget term) splits it by source.
        """
        from simulator.model.poles import channel_form

        return channel_form(self.model, groups=groups, sample_rate_hz=sample_rate_hz,
                            carrier_rad_s=self.carrier_rad_s if self.receiver == "if" else None)

    def sampled_channel_matrix(self, frequency_hz, sample_rate_hz):
        """Spectral matrix of the stored samples' real channels on the record's FFT axis.

        Shape ``(len(f), p, p)``, p = 2 (I, Q) for iq and 1 otherwise (times
        the number of ``tones`` of a chain of several, their channels
        stacked: the joint matrix); |f| < fs/2. Amplifier added noise,
        electronics and filter included; for iq the off-diagonal is the I–Q
        cross density (the pseudo-spectrum of I + iQ), for if the density of
        the one real photocurrent. See
        :meth:`channel_form`; c S c† with c = (1, i) is :meth:`sampled_spectrum`.
        """
        f = np.asarray(frequency_hz, dtype=float).reshape(-1)
        return self.channel_form(sample_rate_hz).spectrum(-angular(f))[0]

    def _white_density(self):
        d = self.model.D @ self.model.N @ self.model.D.T
        if self.receiver == "homodyne":
            return float(d[0, 0])
        if self.receiver == "iq":
            return float(d[0, 0] + d[1, 1])
        return 2.0 * float(d[0, 0] + d[1, 1])

    @staticmethod
    def sample_covariance(discrete):
        """Covariance of one sample of the outputs, in chain units (Γ V Γᵀ + output noise).

        ``discrete`` is the sampled chain model (:func:`simulator.records.discretize.discretize`).
        """
        return (discrete.output @ discrete.state_covariance @ discrete.output.T
                + discrete.output_noise)

    def channels_of(self, tone):
        """Output indices of ``tone``'s channels in :attr:`model` (a chain with ``tones``)."""
        if tone not in self.tones:
            raise InputError(f"tone {tone!r} is not demodulated by this chain; expected one "
                             f"of {', '.join(map(repr, self.tones))}")
        p = len(self.model.outputs) // len(self.tones)
        k = self.tones.index(tone)
        return tuple(range(k * p, (k + 1) * p))

    def output_volts_per_unit(self):
        """Volts at the digitiser per record unit of each output channel, shape (p,)."""
        p = len(self.model.outputs)
        if not self.tones:
            return np.full(p, self.volts_per_unit)
        return np.repeat([s["volts_per_unit"] for s in self.channel_scales],
                         p // len(self.tones))

    def record_std(self, discrete):
        """Largest standard deviation (V) of a sample, over channels and carrier phases.

        For if records r = 2(cos φ Re ρ − sin φ Im ρ), whose variance is at
        most 4 times the largest eigenvalue of the covariance of (Re ρ, Im ρ).
        """
        cov = self.sample_covariance(discrete)
        if self.tones:  # several demodulators: the largest channel in volts
            return float(np.max(np.sqrt(np.diag(cov)) * self.output_volts_per_unit()))
        if self.receiver == "if":
            var = 4.0 * float(np.linalg.eigvalsh(cov).max())
        else:
            var = float(np.max(np.diag(cov)))
        return np.sqrt(var) * self.volts_per_unit

    def calibration(self):
        """Conversion factors with their units in the key names.

        Optical: the photocurrent scale and the local oscillator's mean
        photocurrent. Microwave: volts at the digitiser per record unit, the
        power at the digitiser per hertz of bandwidth per quantum referred to
        the amplifier's input (G h f), the gain and the impedance; no
        photocurrent. ``added_noise_quanta`` is referred to the amplifier's
        input (the detector's, for optical).
        """
        common = {"detection_efficiency": self.efficiency,
                  "added_noise_quanta": self.added_quanta,
                  "volts_per_shot_noise_unit": self.volts_per_unit}
        if self.front_end == "microwave":
            return common | {
                "digitiser_watts_per_hz_per_quantum": self.power_gain * self.quantum_j,
                "amplifier_power_gain": self.power_gain,
                "amplifier_gain_db": float(10.0 * np.log10(self.power_gain)),
                "impedance_ohm": self.impedance_ohm}
        return common | {"electronic_noise_shot_noise_units": self.electronic_noise,
                         "amperes_per_shot_noise_unit": self.amperes_per_unit,
                         "local_oscillator_photocurrent_a": self.lo_photocurrent_a}


def _project(s, c):
    """c S c† for a projection vector c over the last two axes."""
    return np.einsum("i,...ij,j->...", c, s, c.conj()).real


def receiver_of(scenario):
    """``"iq"``, ``"if"`` or ``"homodyne"`` from the scenario's detection and record."""
    if scenario.detection.scheme == "homodyne":
        return "homodyne"
    return scenario.record.kind or "iq"


def detection_chain(scenario, point, model):
    """The scenario's linear model with its detection chain appended.

    Built once per :class:`simulator.model.system.System` (its ``chain``); call
    that rather than this.

    Parameters
    ----------
    scenario : simulator.scenario.loader.Scenario
    point : simulator.model.operating_point.OperatingPoint
    model : simulator.model.statespace.StateSpace
        The model of :func:`simulator.model.optomechanics.linear_model`; with
        several tones the detected view of both
        (:func:`simulator.model.detected_tone.detected_parts`): the receiver
        demodulates the outputs ``output.X/Y`` at ``point.drive_frequency_hz``.

    Returns
    -------
    DetectionChain

    Notes
    -----
    New inputs (symmetrised intensities): ``loss.X/Y`` (½, the vacuum mixed in
    by the efficiency η < 1), ``added.X/Y`` (n_a, the heterodyne split or the
    amplifier), ``electronics.*`` (the current noise). With a low-pass of
    corner ω_c each record channel s gets a state f, df = ω_c (s − f) dt; for
    the if receiver the pair (Re f, Im f) also rotates at θ, the
    baseband-equivalent of a real low-pass acting on the real photocurrent.
    The photocurrent per record unit is e √(b Φ_LO), Φ_LO = η P_LO/(h f_LO)
    the local oscillator's photoelectron flux (the local oscillator is taken
    to see the same detector efficiency as the signal) and b = 1 (balanced)
    or ½ (single-ended: one port of a 50:50 combiner, which also halves η).
    """
    det, el = scenario.detection, scenario.electronics
    receiver = receiver_of(scenario)
    share = 1.0 if det.balanced else 0.5
    eta = det.efficiency * share
    added = amplifier_added_quanta(scenario)
    if receiver == "iq" and added == 0.0:
        added = 0.5
    side = 1.0 if det.local_oscillator_side == "above" else -1.0
    f_tone = point.drive_frequency_hz  # the detected tone's carrier (detection.tone)
    scales = receiver_scales(scenario, receiver, share, side, f_tone)
    electronic = scales.pop("electronic")

    builder = ChainBuilder(model)
    channels, names = demodulator(builder, scenario, receiver, eta, added, electronic)
    theta = float(angular(side * det.intermediate_frequency_hz)) if receiver == "if" else 0.0
    chain_model = builder.finish(channels, names, el.bandwidth_hz, theta)
    return DetectionChain(model=chain_model, receiver=receiver, carrier_rad_s=theta,
                          efficiency=eta, added_quanta=added, electronic_noise=electronic,
                          **scales)
