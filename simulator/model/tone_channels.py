"""Several detected tones in one record: one heterodyne demodulator per tone.

``detection.tones = ["red_probe", "blue_probe"]`` asks for a record with one
I/Q pair per listed tone, as a digitiser with several digital demodulators
delivers it: the receiver's reference for pair k sits at tone k's frequency,
and pair k holds tone k's output field in that tone's own frame
(docs/physics.md §13: one fluctuation field per tone). The pairs come from
one linear model: the same mechanical motion scatters every tone's
sidebands, so the channels are jointly Gaussian and correlated, and the
record is generated from that joint model (one state, 2K outputs), never
from K separate ones.

Each demodulator adds its own detection-loss vacuum, heterodyne (or
amplifier) added noise and current noise. Those noises belong to frequency
bands a tone spacing apart and are independent between the demodulators
(common practice: white noise in disjoint bands is uncorrelated); the
correlation between the channels comes from the device's states alone.

:func:`joint_spectral_matrix` is the analytic spectral matrix of the K
complex channels (each channel's density on the diagonal, the
cross-spectra off it, and their pseudo-spectra), at the cavity port or at
the digitiser, continuous or of the samples; the Fisher information of a
several-tone measurement can be built on it.
"""

import dataclasses

import numpy as np

from simulator.errors import InputError
from simulator.model.units import angular


def detected_tone_names(scenario):
    """The demodulated tones: ``detection.tones``, or the one ``detection.tone``."""
    det = scenario.detection
    return det.tones if det.tones is not None else (det.tone,)


def require_one_detected_tone(scenario, what):
    """Refuse ``detection.tones`` with several names for ``what``, which records one
    channel only (:class:`~simulator.errors.InputError` naming both)."""
    names = detected_tone_names(scenario)
    if len(names) > 1:
        raise InputError(f"{what} holds one detected tone; this scenario asks for "
                         f"{len(names)} (detection.tones = {list(names)!r}); expected "
                         "detection.tone = one of them, or the stationary record "
                         "(`noisechain record` without --averaged), which holds them all")


def tone_indices(point, names):
    """Index in ``point.tones`` of every name in ``names`` (0: the drive, with one tone)."""
    known = [tone.name for tone in point.tones]
    if not known:
        return [0 for _ in names]
    missing = [n for n in names if n not in known]
    if missing:
        raise InputError(f"detected tone(s) {', '.join(map(repr, missing))} name no drive "
                         f"tone; expected names among {', '.join(map(repr, known))}")
    return [known.index(n) for n in names]


def channels_chain(scenario, point, model):
    """The detection chain with one demodulator per tone of ``detection.tones``.

    ``point`` and ``model`` are the whole several-tone System's (every tone's
    output field). Returns None when one tone is demodulated (the one-tone
    chain of :attr:`simulator.model.system.System.chain` then serves). Called
    once per System by :attr:`simulator.model.system.System.channels`.
    """
    from simulator.model.detected_tone import require_quiet_detection, tone_point_of

    names = detected_tone_names(scenario)
    if len(names) < 2:
        return None
    require_quiet_detection(scenario)
    indices = tone_indices(point, names)
    points = [tone_point_of(scenario, point, k) for k in indices]
    rows = [(2 * k, 2 * k + 1) for k in indices]
    return tone_channels_chain(scenario, names, points, model, rows)


def tone_channels_chain(scenario, names, points, model, rows):
    """The heterodyne iq chain of several demodulators, one per detected tone.

    ``names`` are the detected tones, ``points`` each one's one-tone operating
    point (:func:`simulator.model.detected_tone.tone_point_of`), ``rows`` the
    index pair of its output field among ``model``'s outputs. Each
    demodulator mixes in its own loss vacuum, added noise and current noise
    (module doc). Outputs ``record.<tone>.I/Q``, in the order of ``names``;
    the scale fields of the chain are the first tone's, every tone's are in
    ``channel_scales``.
    """
    from simulator.model.chain import ChainBuilder, DetectionChain, demodulator, receiver_scales
    from simulator.scenario.receiver import amplifier_added_quanta

    det, el = scenario.detection, scenario.electronics
    share = 1.0 if det.balanced else 0.5
    eta = det.efficiency * share
    added = amplifier_added_quanta(scenario) or 0.5  # the heterodyne split without one
    side = 1.0 if det.local_oscillator_side == "above" else -1.0
    builder = ChainBuilder(model)
    channels, outputs, per_tone = [], [], []
    for tag, point, pair in zip(names, points, rows, strict=True):
        scales = receiver_scales(scenario, "iq", share, side, point.drive_frequency_hz)
        electronic = scales.pop("electronic")
        ch, nm = demodulator(builder, scenario, "iq", eta, added, electronic, rows=pair,
                             tag=tag)
        channels += ch
        outputs += nm
        per_tone.append(dict(scales, electronic_noise=electronic))
    chain_model = builder.finish(channels, tuple(outputs), el.bandwidth_hz, 0.0)
    first = {k: v for k, v in per_tone[0].items() if k != "electronic_noise"}
    return DetectionChain(model=chain_model, receiver="iq", carrier_rad_s=0.0, efficiency=eta,
                          added_quanta=added, electronic_noise=per_tone[0]["electronic_noise"],
                          tones=tuple(names), channel_scales=tuple(per_tone), **first)


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class JointSpectrum:
    """The spectral matrix of K detected tones' complex channels z_k = I_k + iQ_k.

    Attributes
    ----------
    frequency_hz : ndarray (F,)
        On the record's FFT axis (numpy.fft / scipy.signal.welch): f > 0 is
        anti-Stokes of each channel's own tone.
    tones : tuple of str
    real : ndarray (F, 2K, 2K) complex
        Spectral matrix of the real channels (I_1, Q_1, I_2, …), two-sided,
        per Hz: S_ab(f) = Σ_τ E[y_a(τ) y_b(0)] e^{−2πifτ}.
    """

    frequency_hz: np.ndarray
    tones: tuple
    real: np.ndarray

    def _vectors(self):
        k = len(self.tones)
        c = np.zeros((k, 2 * k), dtype=complex)
        c[np.arange(k), 2 * np.arange(k)] = 1.0
        c[np.arange(k), 2 * np.arange(k) + 1] = 1.0j
        return c

    def cross(self):
        """S_jk(f) = c_j S c_k†, shape (F, K, K): E[Z_j(f) Z_k(f)*]/(fs N) of long
        transforms; the densities of the channels on the diagonal (real)."""
        c = self._vectors()
        return np.einsum("ja,fab,kb->fjk", c, self.real, c.conj())

    def pseudo(self):
        """P_jk(f) = c_j S c_kᵀ, shape (F, K, K): E[Z_j(f) Z_k(−f)]/(fs N), the
        correlation of channel j at f with channel k at −f (the anti-Stokes line of
        one tone with the Stokes line of another: the same phonons)."""
        c = self._vectors()
        return np.einsum("ja,fab,kb->fjk", c, self.real, c)

    def coherence(self):
        """|S_jk|²/(S_jj S_kk), shape (F, K, K): 0 for independent channels, 1 on the diagonal."""
        s = self.cross()
        d = np.real(np.einsum("fjj->fj", s))
        return np.abs(s) ** 2 / (d[:, :, None] * d[:, None, :])


def joint_spectral_matrix(system, frequency_hz, *, at="record", sample_rate_hz=None):
    """Analytic spectral matrix of the detected tones' channels (:class:`JointSpectrum`).

    Parameters
    ----------
    system : simulator.model.system.System
        Or a scenario; its ``detection.tones`` (or ``detection.tone``) are the channels.
    frequency_hz : array_like
        The record's FFT axis (module doc of :class:`JointSpectrum`).
    at : {"record", "cavity"}
        ``"record"``: at the digitiser in shot-noise units (loss, added and
        current noise, filter included; with ``sample_rate_hz`` the density
        of the integrate-and-dump samples, aliased × sinc², exact).
        ``"cavity"``: the fields leaving the cavity ports, z_k = conj(a_k) as
        in the record (a_k = (X_k + iY_k)/√2 the field of tone k in its own
        frame), symmetrised: a vacuum field has density ½, the sidebands
        add ½·N_out (the record's floor 1 holds the heterodyne's added ½).

    Notes
    -----
    Z_k = c_k·y with c_k = (…, 1, i, …) on the pair of tone k, so
    S_jk = c_j S c_k† and P_jk = c_j S c_kᵀ from the real matrix S of the one
    model, whose outputs are evaluated at ω = −2πf (the model's kernel is
    e^{+iωt}, the FFT's e^{−iωt}; docs/architecture.md).
    """
    from simulator.model.system import as_system

    system = as_system(system, several_tones=True)
    names = detected_tone_names(system.scenario)
    f = np.asarray(frequency_hz, dtype=float).reshape(-1)
    if at == "record":
        chain = system.channels or system.chain
        if chain.receiver != "iq":
            raise InputError(f"the spectral matrix of detected tones needs the heterodyne iq "
                             f"receiver; this scenario's record is {chain.receiver!r}")
        if sample_rate_hz is None:
            real = chain.model.output_spectrum(-angular(f))
        else:
            real = chain.channel_form(sample_rate_hz).spectrum(-angular(f))[0]
    elif at == "cavity":
        if sample_rate_hz is not None:
            raise InputError("sample_rate_hz with at = 'cavity'; expected the samples only "
                             "at the digitiser (at = 'record')")
        rows = [r for k in tone_indices(system.point, names) for r in (2 * k, 2 * k + 1)]
        # (I, Q) = (X, −Y)/√2: the record's convention, z = conj(a) (docs/records.md)
        m = np.tile([np.sqrt(0.5), -np.sqrt(0.5)], len(names))
        s = system.model.output_spectrum(-angular(f))[:, rows][:, :, rows]
        real = m[:, None] * s * m[None, :]
    else:
        raise InputError(f"at = {at!r}; expected 'record' or 'cavity'")
    return JointSpectrum(frequency_hz=f, tones=tuple(names), real=real)
