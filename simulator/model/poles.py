"""Spectra as sums over the model's poles: continuous, integrate-and-dump sampled, projected.

For the stable model dx = A x dt + B dW, y dt = C x dt + D dW (E dW dWᵀ = N dt)
with A = V Λ V⁻¹, the stationary covariance of the outputs is, for τ > 0,

    K(τ) = C e^{Aτ} (Σ Cᵀ + B N Dᵀ) = Σ_k R_k e^{λ_k τ},
    R_k = L_k ⊗ r_k,   L = C V,   r = Σ̃ L† + Q N Dᵀ,   Q = V⁻¹ B,

with K(−τ) = K(τ)† and a white part D N Dᵀ δ(τ); Σ̃_kl = (Q N Q†)_kl/(−λ_k − λ_l*)
is the Lyapunov solution in modal coordinates (Σ = V Σ̃ V†). Every spectrum
the engine needs follows from (λ_k, R_k, D N Dᵀ) in closed form:

- continuous, S(ω) = D N Dᵀ + Σ_k [R_k/(−iω − λ_k) + h.c.] (model convention
  x(t) = ∫dω/2π e^{−iωt} x(ω); the partial fractions of H N H†);
- sampled by integrate-and-dump at interval T (each sample the mean of y over
  its interval), the lag-j covariance is K_j = Σ_k R_k β_k e^{λ_k jT} for
  j ≥ 1, β = (e^{λT} − 1)(1 − e^{−λT})/(λT)², and the geometric series over
  j gives, with w_k = e^{λ_k T}, x_k = λ_k T and u = e^{−iωT},

      S_T(ω) = T K_0 + Σ_k [T (w_k − 1)²/x_k² · R_k/(u − w_k) + h.c.],
      T K_0 = D N Dᵀ + T Σ_k [R_k α_k + h.c.],  α = (e^x − 1 − x)/x²,

  on |ω| < π/T: exactly the continuous spectrum aliased and multiplied by
  sinc²(ωT/2π), summed over every alias in closed form;
- a projection c S c† (one channel or I + iQ), and the real photocurrent
  r = e^{iθt}u + c.c. of an envelope u = c·y, whose time-averaged covariance
  2 Re[e^{iθτ} c K(τ) c†] has the poles λ_k + iθ and λ_k* − iθ.

Each is "a constant plus Σ_k [R'_k/(a(ω) − b_k) + h.c.]", so one kernel
evaluates all of them; per budget term (a group of inputs) only the residues
change. The eigenvectors are verified before use: where their condition
number exceeds ``POLE_MAX_CONDITION`` or V Λ V⁻¹ misses A by more than
``POLE_RECONSTRUCTION_RTOL`` (repeated poles close to an exceptional point),
the form falls back to the resolvent (batched solves; sampled through the
discrete-time resolvent, or for a carried if record by the alias sum to
``FALLBACK_ALIASES``) and says so in ``method``.

References
----------
Van Kampen, Stochastic Processes in Physics and Chemistry (3rd ed., 2007),
Ch. VIII (linear Langevin equations: covariance and spectrum); the sampled
sum is the z-transform of the sampled covariance, Oppenheim and Schafer,
Discrete-Time Signal Processing (3rd ed., 2010), Sec. 4.2 (aliasing).
"""

import dataclasses
import functools

import numpy as np

from simulator.model.pole_fallback import (
    aliased_spectra,
    block_of,
    columns_of,
    resolvent_spectra,
    sampled_resolvent_spectra,
)

POLE_MAX_CONDITION = 1e5  # eigenvector condition above which the residues lose 1e-10
POLE_RECONSTRUCTION_RTOL = 1e-12  # largest accepted error of V Λ V⁻¹ against A, relative
FALLBACK_ALIASES = 400  # aliases summed either side by the resolvent fallback
COMPILED_FROM_POINTS = 1 << 17  # above this many points the numba kernel pays its import
_CHUNK = 1024  # points per numpy pass: keeps the (points × poles) factors in cache


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class PoleForm:
    """A spectral matrix as a constant plus a sum of first-order poles, per budget term.

    ``spectrum(ω) = white[g] + Σ_k [factor_k(ω) residues[g, k] + h.c.]`` with
    factor 1/(−iω − b_k) (continuous) or 1/(e^{−iωT} − b_k) (``period`` T:
    sampled). ``method`` says how the spectra are evaluated: ``"pole-residue"``
    or the reason for the resolvent fallback; ``fallback`` then holds the
    callable used instead.
    """

    poles: np.ndarray  # (n,) λ_k of the covariance e^{λτ}, τ > 0
    residues: np.ndarray  # (g, n, p, p)
    white: np.ndarray  # (g, p, p) Hermitian
    period: float | None = None  # T of integrate-and-dump samples; None: continuous
    method: str = "pole-residue"
    fallback: object = None  # f(omega) → (g, W, p, p) when the eigenvectors failed
    source: tuple | None = None  # (model, groups) of a fallback not yet projected or carried

    @property
    def exact(self):
        """True when the spectra come from the poles (no resolvent fallback)."""
        return self.fallback is None

    def spectrum(self, omega):
        """Spectral matrices (g, len(omega), p, p), complex Hermitian, per unit ω/2π."""
        omega = np.asarray(omega, dtype=float).reshape(-1)
        if self.fallback is not None:
            return self.fallback(omega)
        if self.period is None:
            a = -1j * omega
        else:
            a = np.exp(-1j * omega * self.period)
        g, n, p, _ = self.residues.shape
        if n and omega.size >= COMPILED_FROM_POINTS:
            from simulator.model.pole_kernel import pole_sum_hermitian

            out = np.empty((g, omega.size, p, p), dtype=complex)
            upper = _upper(p)
            pole_sum_hermitian(np.ascontiguousarray(a.real), np.ascontiguousarray(a.imag),
                               np.ascontiguousarray(self.poles.real),
                               np.ascontiguousarray(self.poles.imag), self._coefficients,
                               self._white_packed, upper[0], upper[1], out.view(float).reshape(
                                   out.shape + (2,)))
            return out
        packed = evaluate(a, self.poles, self._coefficients) if n else np.zeros(
            (omega.size, g * p * p))
        packed += self._white_packed
        return _unpack(packed.reshape(omega.size, g, p * p), p)

    @functools.cached_property
    def _coefficients(self):
        return np.ascontiguousarray(_hermitian_coefficients(self.residues))  # (2n, g · p²)

    @functools.cached_property
    def _white_packed(self):
        return _pack(self.white).reshape(-1)

    def sampled(self, sample_rate_hz, aliases=FALLBACK_ALIASES):
        """The form of the integrate-and-dump samples at ``sample_rate_hz`` (see module).

        ``aliases``: how many the resolvent fallback sums either side (its
        truncation error falls as aliases⁻³; the pole form sums all exactly).
        """
        if self.period is not None:
            raise ValueError("this form is already sampled")
        t = 1.0 / float(sample_rate_hz)
        if self.fallback is not None:  # the poles kept only to lay grids (:meth:`lines`)
            exact = self.source is not None  # the model's own outputs: sampled exactly
            spectrum = (sampled_resolvent_spectra(*self.source, t) if exact
                        else aliased_spectra(self.fallback, self.white, t, aliases))
            return dataclasses.replace(self, poles=np.exp(self.poles * t), period=t,
                                       fallback=spectrum, source=None)
        x = self.poles * t
        w = np.exp(x)
        small = np.abs(x) < _SERIES_BELOW
        safe = np.where(small, 1.0, x)
        # α = (e^x − 1 − x)/x² by its series where the difference cancels
        alpha = np.where(small, np.polyval(_ALPHA_SERIES, x), (_expm1(x) - x) / safe**2)
        weight = t * (_expm1(x) / np.where(x == 0, 1.0, x)) ** 2  # T (w − 1)²/x²
        r = self.residues
        k0 = np.einsum("k,gkij->gij", alpha, r) * t
        white = self.white + k0 + np.conj(np.swapaxes(k0, -1, -2))
        return PoleForm(poles=w, residues=r * weight[None, :, None, None], white=white,
                        period=t, method=self.method)

    def project(self, c):
        """The form of the scalar c·y (``c`` a vector over the outputs): c S c†."""
        c = np.asarray(c, dtype=complex)
        scalar = lambda m: np.einsum("i,...ij,j->...", c, m, c.conj())[..., None, None]  # noqa: E731
        projected = dataclasses.replace(self, residues=scalar(self.residues),
                                        white=scalar(self.white), source=None)
        if self.fallback is None:
            return projected
        base = self.fallback
        return dataclasses.replace(projected, fallback=lambda w: scalar(base(w)))

    def real_carrier(self, theta_rad_s):
        """Scalar form of r = e^{iθt}u + c.c. for this (scalar) envelope u, time-averaged.

        S_r(ω) = S_u(θ + ω) + S_u(θ − ω): poles λ + iθ with residues ρ and
        λ* − iθ with ρ*; white part doubled.
        """
        if self.residues.shape[-1] != 1 or self.period is not None:
            raise ValueError("real_carrier needs a continuous scalar form (project first)")
        t = float(theta_rad_s)
        carried = dataclasses.replace(
            self, poles=np.concatenate([self.poles + 1j * t, self.poles.conj() - 1j * t]),
            residues=np.concatenate([self.residues, self.residues.conj()], axis=1),
            white=2 * self.white.real + 0j, source=None)
        if self.fallback is None:
            return carried
        base = self.fallback
        return dataclasses.replace(carried,
                                   fallback=lambda w: (base(t + w) + base(t - w)).real + 0j)

    def lines(self):
        """Centres and half-widths (rad/s) of the spectrum's lines, on its own axis.

        Continuous: the pole λ is a line at ω = −Im λ of half-width |Re λ|.
        Sampled: the pole w = e^{λT} is a line at ω = −arg w / T (folded into
        the band |ω| < π/T) of half-width −ln|w| / T.
        """
        if self.period is None:
            return -self.poles.imag, np.abs(self.poles.real)
        t = self.period
        with np.errstate(divide="ignore"):  # w = 0 (a pole gone within a sample): flat
            return -np.angle(self.poles) / t, np.abs(np.log(np.abs(self.poles))) / t


def pole_form(model, groups=None):
    """The continuous :class:`PoleForm` of a stable StateSpace's outputs.

    Parameters
    ----------
    model : simulator.model.statespace.StateSpace
    groups : sequence of sequences of int, optional
        Input indices of each budget term (the inputs of different groups are
        taken as uncorrelated); default one group of every input.
    """
    groups = [tuple(range(len(model.inputs)))] if groups is None else [tuple(g) for g in groups]
    white = np.array([columns_of(model.D, g) @ block_of(model.N, g) @ columns_of(model.D, g).T
                      for g in groups]).astype(complex)
    lam, vec, inv, problem = verified_eigenbasis(model.A)
    if problem:
        return PoleForm(poles=lam, residues=np.zeros((len(groups), 0, len(model.outputs),
                                                      len(model.outputs)), complex),
                        white=white, method=f"resolvent ({problem})",
                        fallback=resolvent_spectra(model, groups), source=(model, groups))
    left = model.C @ vec  # (p, n)
    gap = -(lam[:, None] + lam.conj()[None, :])  # −λ_k − λ_l*, Re > 0 when stable
    residues = []
    for g in groups:
        q, n_g, d_g = inv @ columns_of(model.B, g), block_of(model.N, g), columns_of(model.D, g)
        qn = q @ n_g
        sigma = (qn @ q.conj().T) / gap  # modal stationary covariance
        r = sigma @ left.conj().T + qn @ d_g.T  # (n, p)
        residues.append(left.T[:, :, None] * r[:, None, :])  # R_k = L_k ⊗ r_k
    return PoleForm(poles=lam, residues=np.array(residues), white=white)


def channel_form(model, *, carrier_rad_s=None, sample_rate_hz=None, groups=None,
                 aliases=FALLBACK_ALIASES):
    """:func:`pole_form` of a record's channels: as given, or one real photocurrent.

    With ``carrier_rad_s`` θ the model's two outputs are the envelope u of
    r = e^{iθt}u + c.c. and the form is that of r (:meth:`PoleForm.real_carrier`);
    with ``sample_rate_hz``, that of the integrate-and-dump samples (``aliases``
    for the resolvent fallback only).
    """
    form = pole_form(model, groups)
    if carrier_rad_s is not None:
        form = form.project(np.array([1.0, 1.0j])).real_carrier(carrier_rad_s)
    return form if sample_rate_hz is None else form.sampled(sample_rate_hz, aliases)


def verified_eigenbasis(a):
    """(λ, V, V⁻¹, problem): eigen-decomposition of ``a`` and why it cannot be used.

    ``a`` is first balanced by a diagonal similarity of powers of two (LAPACK
    gebal through scipy.linalg.matrix_balance; exact in binary floating
    point), so states of very different scale (a laser phase in radians
    beside a cavity quadrature) do not make the eigenvectors look
    ill-conditioned. ``problem`` is "" when the balanced eigenvectors have a
    1-norm condition number below ``POLE_MAX_CONDITION`` and rebuild the balanced
    matrix to ``POLE_RECONSTRUCTION_RTOL`` of its largest entry; otherwise a
    sentence for the caller to report.
    """
    import scipy.linalg

    a = np.asarray(a, dtype=float)
    if a.size == 0:
        return np.zeros(0, complex), np.zeros((0, 0), complex), np.zeros((0, 0), complex), ""
    balanced, (scale, _) = scipy.linalg.matrix_balance(a, permute=False, separate=True)
    lam, vec = np.linalg.eig(balanced)
    if not np.all(np.isfinite(lam)):
        return lam, vec, None, "eigenvalues not finite"
    try:
        inv = np.linalg.inv(vec)
    except np.linalg.LinAlgError:
        return lam, vec, None, "singular eigenvector matrix: at an exceptional point"
    # 1-norm condition number ‖V‖₁‖V⁻¹‖₁ (within a factor n of the 2-norm one, and no SVD)
    cond = float(np.abs(vec).sum(axis=0).max() * np.abs(inv).sum(axis=0).max())
    if not cond < POLE_MAX_CONDITION:
        return lam, vec, None, (f"eigenvector condition number {cond:.2g}: "
                                "close to an exceptional point")
    size = max(float(np.abs(balanced).max()), np.finfo(float).tiny)
    error = float(np.abs((vec * lam) @ inv - balanced).max()) / size
    if not error <= POLE_RECONSTRUCTION_RTOL:
        return lam, vec, None, f"V Λ V⁻¹ misses A by {error:.2g} of its largest entry"
    return lam, scale[:, None] * vec, inv / scale[None, :], ""


_SERIES_BELOW = 1e-2  # |x| below which α comes from its series (error x⁶/5040 < 1e-15)
_ALPHA_SERIES = [1 / 5040, 1 / 720, 1 / 120, 1 / 24, 1 / 6, 1 / 2]  # Σ xⁿ/(n + 2)!, for polyval


def _expm1(z):
    """e^z − 1 for complex z without cancellation at small |z|."""
    a, b = z.real, z.imag
    return (np.expm1(a) * np.cos(b) - 2 * np.sin(b / 2) ** 2) + 1j * np.exp(a) * np.sin(b)


def _hermitian_coefficients(residues):
    """Real coefficients of fr and fi for f R + f* R† in the packed real layout of :func:`_unpack`.

    f R + f* R† = fr (R + R†) + fi · i(R − R†); both brackets are Hermitian and
    are packed as p² reals (diagonal, then real and imaginary parts above it).
    """
    rh = np.conj(np.swapaxes(residues, -1, -2))
    even, odd = _pack(residues + rh), _pack(1j * (residues - rh))  # (g, n, p²)
    g, n = residues.shape[:2]
    return np.concatenate([even.transpose(1, 0, 2).reshape(n, -1),
                           odd.transpose(1, 0, 2).reshape(n, -1)], axis=0)


def _pack(h):
    """Hermitian (..., p, p) → (..., p²) reals: diagonal, Re and Im of the upper triangle."""
    iu = _upper(h.shape[-1])
    return np.concatenate([np.diagonal(h, axis1=-2, axis2=-1).real,
                           h[..., iu[0], iu[1]].real, h[..., iu[0], iu[1]].imag], axis=-1)


@functools.cache
def _upper(p):
    """Indices of the strict upper triangle of a p × p matrix."""
    return np.triu_indices(p, 1)


def _unpack(packed, p):
    """Inverse of :func:`_pack` for (W, g, p²) reals → Hermitian (g, W, p, p)."""
    w, g = packed.shape[:2]
    out = np.empty((g, w, p, p), dtype=complex)
    columns = packed.transpose(1, 2, 0)  # (g, p², W): one row per packed entry
    for i in range(p):
        out[:, :, i, i] = columns[:, i]
    iu = _upper(p)
    k = iu[0].size
    for u, (i, j) in enumerate(zip(*iu, strict=True)):
        out[:, :, i, j].real = columns[:, p + u]
        out[:, :, i, j].imag = columns[:, p + k + u]
        out[:, :, j, i].real = columns[:, p + u]
        out[:, :, j, i].imag = -columns[:, p + k + u]
    return out


def evaluate(a, poles, coef):
    """Σ_k [Re f_k · coef[k] + Im f_k · coef[n + k]], f_k = 1/(a − poles_k), for every a.

    ``a`` (W,) complex, ``poles`` (n,), ``coef`` (2n, M) real; returns (W, M).
    numpy in chunks, or the compiled kernel of :mod:`simulator.model.pole_kernel`
    from ``COMPILED_FROM_POINTS`` points on (its import and first call then
    cost less than they save).
    """
    a = np.asarray(a, dtype=complex)
    if a.size >= COMPILED_FROM_POINTS:
        from simulator.model.pole_kernel import pole_sum

        out = np.empty((a.size, coef.shape[1]))
        pole_sum(np.ascontiguousarray(a.real), np.ascontiguousarray(a.imag),
                 np.ascontiguousarray(poles.real), np.ascontiguousarray(poles.imag),
                 np.ascontiguousarray(coef), out)
        return out
    n = poles.size
    out = np.empty((a.size, coef.shape[1]))
    for start in range(0, a.size, _CHUNK):
        f = 1.0 / (a[start:start + _CHUNK, None] - poles)
        out[start:start + _CHUNK] = f.real @ coef[:n] + f.imag @ coef[n:]
    return out
