"""The joint spectral matrix of several detected tones' channels.

A record of ``detection.tones`` holds one I/Q pair per tone
(:mod:`simulator.model.tone_channels`), all from one linear model: the same
mechanical motion scatters every tone's sidebands, so the channels are
correlated. :func:`joint_spectral_matrix` gives their analytic spectral
matrix (each channel's density on the diagonal, the cross-spectra off it,
and the pseudo-spectra that correlate one channel at f with another at −f),
at the cavity ports or at the digitiser, continuous or of the samples:
what a Welch estimate of the record converges to, and the matrix a
likelihood or Fisher information of a several-tone measurement takes.
"""

import dataclasses

import numpy as np

from simulator.errors import InputError
from simulator.model.units import angular


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
    from simulator.model.detected_tone import detected_tone_names
    from simulator.model.system import as_system
    from simulator.model.tone_channels import detected_fields

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
        fields = detected_fields(system.scenario, system.point, system.model)
        # (I, Q) = (X, −Y)/√2: the record's convention, z = conj(a) (docs/records.md)
        m = np.tile([np.sqrt(0.5), -np.sqrt(0.5)], len(names))
        s = fields.output_spectrum(-angular(f))
        real = m[:, None] * s * m[None, :]
    else:
        raise InputError(f"at = {at!r}; expected 'record' or 'cavity'")
    return JointSpectrum(frequency_hz=f, tones=tuple(names), real=real)
