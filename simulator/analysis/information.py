"""Whittle Fisher information of a record's spectral matrix, for many parameters at once.

The record's symmetrised spectral matrix is S(ω) = H N H†, with
H(ω) = C (−iω − A)⁻¹ B + D the transfer matrix of the detection chain's
state-space model. A parameter θ changes the model matrices; to first order

    ∂H = ∂C R B + C R ∂A R B + C R ∂B + ∂D,      R = (−iω − A)⁻¹,
    ∂S = ∂H N H† + (∂H N H†)† + H ∂N H†,

so with the products C R, R B N H† and N H† formed once per frequency, the
change of S for any θ costs only as much as the entries θ moves. The matrix
changes ∂A, ∂B, ... come from central differences of the model rebuilt a
small step either side of θ (the operating point re-solved), so every
dependence is included. The Fisher information per unit time is then

    F_ij = ½ ∫ df tr[S⁻¹ ∂_i S S⁻¹ ∂_j S]

(Whittle, Ark. Mat. 2, 423 (1953)), integrated by the trapezoidal rule over
the grid. A parameter that changes the model's shape (an efficiency moving
off 1 adds the loss inputs) falls back to differences of whole spectra.
"""

import numpy as np

from simulator.errors import InputError, ScenarioError

_CHUNK = 2048  # frequencies per pass: bounds memory at chunk × states × outputs


def steps(scenario, path):
    """Scenarios a small step above and below the parameter at ``path``, and the span.

    The step is 10⁻⁴ of the value (10⁻⁶ at 0, or where 10⁻⁴ of the value is
    below the smallest normal float and would be lost). At a boundary of the
    admissible range (an occupation of 0, an efficiency of 1) the scenario
    itself stands in for the side that is not allowed (a one-sided step).
    """
    value = scenario.get(path)
    if not isinstance(value, (int, float)) or isinstance(value, bool):
        raise InputError(f"{path} = {value!r}: the Fisher information needs a numeric "
                         "parameter that is set in the scenario")
    h = 1e-4 * abs(value)
    if h < np.finfo(float).tiny:
        h = 1e-6
    try:
        up, hi = scenario.replace(path, value + h), h
    except ScenarioError:
        up, hi = scenario, 0.0
    try:
        down, lo = scenario.replace(path, value - h), h
    except ScenarioError:
        down, lo = scenario, 0.0
    return up, down, hi + lo


def derivative(evaluate, scenario, path):
    """d evaluate(scenario)/d(parameter at path) by the difference of :func:`steps`."""
    up, down, span = steps(scenario, path)
    return (evaluate(up) - evaluate(down)) / span


def fisher_blocks(model_of, scenario, groups, omega, *, carrier_rad_s=None):
    """Fisher information per unit time for each group of parameter paths.

    Parameters
    ----------
    model_of : callable
        ``model_of(scenario)`` → the record's :class:`~simulator.model.statespace.StateSpace`.
    scenario : Scenario
    groups : sequence of sequences of str
        Parameter paths estimated jointly; a path shared by several groups is
        differentiated once.
    omega : ndarray
        Two-sided angular-frequency grid (rad/s) of the model's outputs; with
        ``carrier_rad_s``, the record's positive angular frequencies.
    carrier_rad_s : float, optional
        For a real record at an intermediate frequency θ (the "if" receiver):
        the model's two outputs are the envelope u of r = e^{iθt}u + e^{−iθt}u*,
        whose density is S_r(ω) = c S_u(θ − ω) c† + c S_u(θ + ω) c†,
        c = (1, i) (:meth:`simulator.model.chain.DetectionChain.record_spectrum`).
        The information is then that of the one real record,
        ½∫(∂S_r/S_r)² df over both signs of f = ∫ over f > 0: the envelope's
        two channels are not both observed, and the image band's noise counts.

    Returns
    -------
    list of ndarray
        One (k, k) matrix per group, in 1/(s · unit_i · unit_j).
    """
    from simulator.model.statespace import Resolvent

    base = model_of(scenario)
    paths = list(dict.fromkeys(p for group in groups for p in group))
    changes = [_model_change(model_of, base, scenario, p) for p in paths]
    res = Resolvent(base.A)
    entries = _Entries(changes) if res.well_conditioned else None
    f = omega / (2 * np.pi)
    weights = np.zeros_like(f)  # trapezoidal rule as a weighted sum, chunk by chunk
    weights[1:] += np.diff(f) / 2
    weights[:-1] += np.diff(f) / 2
    where = {p: k for k, p in enumerate(paths)}
    out = [np.zeros((len(g), len(g))) for g in groups]
    for start in range(0, omega.size, _CHUNK):
        w = omega[start:start + _CHUNK]
        weight = weights[start:start + _CHUNK]
        if carrier_rad_s is not None:
            x = _real_record_changes(base, res, entries, changes, carrier_rad_s, w)
            for matrix, group in zip(out, groups, strict=True):
                xs = x[[where[p] for p in group]]
                # ∫_{f>0} (∂S_r/S_r)_i (∂S_r/S_r)_j df = ½ over both signs of f
                matrix += np.einsum("iw,jw,w->ij", xs, xs, weight)
            continue
        pieces = _Pieces(base, res, w) if entries else None
        s = pieces.s if pieces else base.output_spectrum(w)
        x = np.linalg.inv(s) @ _spectral_changes(pieces, entries, changes, w,
                                                 len(base.outputs))
        for matrix, group in zip(out, groups, strict=True):
            xs = x[[where[p] for p in group]]
            # ½ Σ_w weight · tr(X_i X_j), X = S⁻¹ ∂S
            matrix += 0.5 * np.einsum("iwab,jwba,w->ij", xs, xs, weight, optimize=True).real
    return out


def _real_record_changes(base, res, entries, changes, carrier, w):
    """∂S_r/S_r of the real "if" record at angular frequencies ``w``, (parameters, w)."""
    c = np.array([1.0, 1.0j])
    s_r, ds_r = 0.0, 0.0
    for band in (carrier - w, carrier + w):
        pieces = _Pieces(base, res, band) if entries else None
        s = pieces.s if pieces else base.output_spectrum(band)
        ds = _spectral_changes(pieces, entries, changes, band, len(base.outputs))
        s_r = s_r + np.einsum("i,wij,j->w", c, s, c.conj()).real
        ds_r = ds_r + np.einsum("i,kwij,j->kw", c, ds, c.conj()).real
    return ds_r / s_r


class _Pieces:
    """S and the per-frequency products the first-order change of S is made of."""

    def __init__(self, model, res, w):
        f = res.factor(w)
        left = (model.C @ res.vec) * f[:, None, :]  # C V diag(f)
        right = res.inv @ model.B  # V⁻¹ B
        self.h = left @ right + model.D
        self.cr = left @ res.inv  # C R
        self.y = _left_multiply(model.N, np.swapaxes(self.h.conj(), 1, 2))  # N H†
        self.x = _left_multiply(res.vec, f[:, :, None] * _left_multiply(right, self.y))
        self.s = self.h @ self.y  # x above: R B N H†


def _left_multiply(matrix, batch):
    """matrix @ batch[w] for every w, as one matrix product (batch: (w, rows, columns))."""
    return np.swapaxes(np.tensordot(batch, matrix, axes=([1], [1])), 1, 2)


def _model_change(model_of, base, scenario, path):
    """``(differences, up, down, span)``: matrix differences when the shapes agree."""
    up_s, down_s, span = steps(scenario, path)
    up, down = model_of(up_s), model_of(down_s)
    names = ("A", "B", "C", "D", "N")
    if all(getattr(up, k).shape == getattr(base, k).shape == getattr(down, k).shape
           for k in names):
        return {k: (getattr(up, k) - getattr(down, k)) / span for k in names}, up, down, span
    return None, up, down, span


class _Entries:
    """The model entries any parameter moves, and how much each parameter moves them.

    ``a_b``: entries (state, state) of A and (state, input) of B, whose changes
    enter ∂H N H† through C R[:, i] and (R B N H†)[j] or (N H†)[j];
    ``n``: entries of N, which enter through H[:, i] H[:, j]*. The weights
    are one row per parameter, so ∂S for every parameter is one matrix
    product per frequency chunk.
    """

    def __init__(self, changes):
        self.a_b, self.n = {}, {}
        for diff, *_ in changes:
            if diff is None:
                continue
            for key in ("A", "B"):
                for r, c in zip(*np.nonzero(diff[key]), strict=True):
                    self.a_b.setdefault((key, int(r), int(c)), len(self.a_b))
            for r, c in zip(*np.nonzero(diff["N"]), strict=True):
                self.n.setdefault((int(r), int(c)), len(self.n))
        self.weights_a_b = np.array([[0.0 if d is None else d[k][r, c]
                                      for (k, r, c) in self.a_b] for d, *_ in changes])
        self.weights_n = np.array([[0.0 if d is None else d["N"][r, c] for (r, c) in self.n]
                                   for d, *_ in changes])


def _spectral_changes(pieces, entries, changes, w, outputs):
    """∂S on the frequencies ``w`` for every parameter, shape (parameters, w, p, p)."""
    out = np.empty((len(changes), w.size, outputs, outputs), dtype=complex)
    if pieces is not None:
        t = _combine(entries.weights_a_b, [
            (pieces.cr[:, :, r], (pieces.x if k == "A" else pieces.y)[:, c, :])
            for (k, r, c) in entries.a_b], out.shape[1:])
        hn = _combine(entries.weights_n, [(pieces.h[:, :, r], pieces.h[:, :, c].conj())
                                          for (r, c) in entries.n], out.shape[1:])
        for k, (diff, *_) in enumerate(changes):
            # only the detection parameters (efficiency, ...) move C and D
            if diff is not None and diff["C"].any():
                t[k] += diff["C"] @ pieces.x
            if diff is not None and diff["D"].any():
                t[k] += diff["D"] @ pieces.y
        out[:] = t + np.swapaxes(t.conj(), -1, -2) + hn
    for k, (diff, up, down, span) in enumerate(changes):
        if pieces is None or diff is None:
            out[k] = (up.output_spectrum(w) - down.output_spectrum(w)) / span
    return out


def _combine(weights, factors, shape):
    """Σ_u weights[k, u] · left_u ⊗ right_u for every k: one product over the entries u.

    ``factors`` holds per entry u a column ``left_u`` (w, p) and a row
    ``right_u`` (w, p); the outer product per frequency is an elementary
    change of the spectral matrix.
    """
    if not factors:
        return np.zeros((len(weights),) + shape, dtype=complex)
    left = np.stack([f[0] for f in factors])  # (u, w, p)
    right = np.stack([f[1] for f in factors])  # (u, w, p)
    outer = (left[..., :, None] * right[..., None, :]).reshape(len(factors), -1)
    return (weights @ outer.real + 1j * (weights @ outer.imag)).reshape(
        (len(weights),) + shape)
