"""The noise-budget engine: projected transfer paths and per-source pieces of a spectrum.

Used by :mod:`simulator.linear.spectra`; see its module notes for the split of each
source's transfer H_k = H_k⁰ + H_kᵐ into the direct path (imprecision) and the
path through the mechanics (back-action or thermal motion), and the cross term
between them.
"""

import numpy as np

from simulator.model.laser_noise import vacuum_intensity
from simulator.model.statespace import Resolvent

FLOOR = "shot noise (vacuum floor)"
CHUNK = 1 << 14


def detected_budget(model, omega, u, factor, efficiency):
    """Detected spectrum 1 + η·factor·(u S u† − ½) and its budget, chunked over ω."""
    groups = source_groups(model)
    paths = Paths(model, u)
    n = omega.size
    total = np.empty(n)
    parts = {}
    scale = efficiency * factor
    for start in range(0, n, CHUNK):
        w = omega[start:start + CHUNK]
        h, pieces = budget_pieces(paths, w, groups)
        total[start:start + w.size] = 1.0 + scale * (quadratic(h, model.N, h) - 0.5)
        for name, value in pieces.items():
            if name not in parts:
                parts[name] = np.zeros(n)
            parts[name][start:start + w.size] = scale * value
    parts[FLOOR] += 1.0
    parts = {k: v for k, v in parts.items() if k == FLOOR or np.any(v != 0.0)}
    return total, parts


def budget_pieces(paths, w, groups, vacuum=None):
    """Projected transfer u·H at angular frequencies ``w`` and the budget pieces of u S u†.

    The pieces, in units of u S u†, are the deviation of the direct-path
    vacuum from ½ (zero by unitarity, under the key FLOOR) and per source its
    normal-ordered imprecision, motion and cross term; their sum is u S u† − ½,
    computed without subtracting ½ from a number near ½.

    ``vacuum`` gives the vacuum part of each input's intensity (default: ½
    per quantum input, 0 for classical laser noise); the detection chain
    passes its own, in which electronics noise is classical.
    """
    model = paths.model
    h0, hm = paths(w)
    h = h0 + hm
    if vacuum is None:  # ½ per quantum input, 0 for classical laser noise
        vacuum = vacuum_intensity(model)
    pieces = {FLOOR: 0.5 * np.sum(np.abs(h0[:, vacuum > 0]) ** 2, axis=1) - 0.5}
    for name, idx, mechanical in groups:
        nk = model.N[np.ix_(idx, idx)]
        h0k, hmk = h0[:, idx], hm[:, idx]
        if not mechanical:
            pieces[f"{name}: imprecision"] = quadratic(h0k, nk - np.diag(vacuum[idx]), h0k)
        pieces[f"{name}: {'thermal' if mechanical else 'back-action'} motion"] = quadratic(
            hmk, nk, hmk)
        if not mechanical:
            pieces[f"{name}: imprecision × back-action"] = 2.0 * quadratic(h0k, nk, hmk)
    for (name_a, ia, _), (name_b, ib, _) in correlated_pairs(model, groups):
        pieces[f"{name_a} × {name_b} correlation"] = 2.0 * quadratic(
            h[:, ia], model.N[np.ix_(ia, ib)], h[:, ib])
    return h, pieces


class Paths:
    """u·H⁰(ω) and u·Hᵐ(ω): the direct path and the path through the mechanics.

    With R = (−iω − A)⁻¹, R⁰ the same for A − K (K = coupling), the resolvent
    identity R − R⁰ = R K R⁰ gives

        u H⁰ = u C R⁰ B + u D,     u Hᵐ = u C R K R⁰ B,

    so Hᵐ is never formed as the small difference of two nearly equal
    matrices, and a sideband far below the direct path keeps its relative
    precision. Only row vectors are propagated: O(n² + nm) work per frequency.
    """

    def __init__(self, model, u):
        self.model = model
        self.uc = u @ model.C
        self.ud = u @ model.D
        self.full = Resolvent(model.A)
        self.bare = Resolvent(model.A - model.coupling)
        self.fast = self.full.well_conditioned and self.bare.well_conditioned
        if self.fast:  # fold the constant matrices once: V⁻¹KV⁰ and V⁰⁻¹B
            self.left_full = self.uc @ self.full.vec
            self.left_bare = self.uc @ self.bare.vec
            self.middle = self.full.inv @ model.coupling @ self.bare.vec
            self.right = self.bare.inv @ model.B

    def __call__(self, w):
        b, k = self.model.B, self.model.coupling
        if not self.fast:
            h0 = self.bare.solve_rows(self.uc, w) @ b + self.ud
            return h0, self.bare.solve_rows(self.full.solve_rows(self.uc, w) @ k, w) @ b
        r_bare = self.bare.factor(w)
        h0 = (self.left_bare * r_bare) @ self.right + self.ud
        hm = (((self.left_full * self.full.factor(w)) @ self.middle) * r_bare) @ self.right
        return h0, hm


def quadratic(left, n, right):
    """Re(l N r†) for every row of ``left`` and ``right`` (shape (w, k))."""
    if np.count_nonzero(n - np.diag(np.diag(n))) == 0:  # the usual, uncorrelated case
        return (left.real * right.real + left.imag * right.imag) @ np.diag(n)
    return np.einsum("wi,ij,wj->w", left, n, right.conj()).real


def source_groups(model):
    """(name, input indices, is_mechanical) per source; unnamed inputs grouped last."""
    groups, covered = [], set()
    for name, idx in model.sources:
        idx = list(idx)
        covered.update(idx)
        mechanical = all(".bath." in model.inputs[i] for i in idx)
        groups.append((name, idx, mechanical))
    rest = [i for i in range(len(model.inputs)) if i not in covered]
    if rest:
        groups.append(("other inputs", rest, False))
    return groups


def correlated_pairs(model, groups):
    """Pairs of sources whose inputs N correlates (cross terms of the budget)."""
    return [(a, b) for i, a in enumerate(groups) for b in groups[i + 1:]
            if np.any(model.N[np.ix_(a[1], b[1])] != 0.0)]
