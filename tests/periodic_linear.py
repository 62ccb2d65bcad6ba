"""Exact periodic steady state of a linear system whose drift repeats with period T.

Used by the tests of several tones as an independent reference: the
linearised optomechanical equations written in one common rotating frame,
where each tone's mean field keeps its own rotation e^(−iνk t), so the
coefficients are periodic and nothing is dropped.

Method (Floquet theory of the covariance equation dV/dt = A(t)V + VA(t)ᵀ + D):
integrate over one period the transition matrix Φ and the covariance grown
from zero, Q; the periodic solution at t = 0 solves the discrete Lyapunov
equation V0 = Φ V0 Φᵀ + Q; one more period from V0 gives V(t) over the period,
whose average is the time-averaged covariance (Floquet, Ann. Sci. ENS 12, 47
(1883); for the covariance equation e.g. Bittanti & Colaneri, Periodic Systems,
Springer (2009), Ch. 3, periodic Lyapunov equation).
"""

import numpy as np
from scipy.integrate import solve_ivp
from scipy.linalg import solve_discrete_lyapunov

RTOL, ATOL = 1e-11, 1e-13


def periodic_covariance(drift, diffusion, period, n_states, samples=64, average=True):
    """Time-averaged covariance over one period of the periodic steady state.

    Parameters
    ----------
    drift : callable
        ``drift(t)`` → A(t), shape (n, n), periodic with ``period``.
    diffusion : ndarray (n, n) or callable
        D = B N Bᵀ, constant, or ``diffusion(t)`` periodic with ``period`` (an input
        that rotates in this frame, e.g. another tone's classical noise).
    period : float
    n_states : int
    samples : int
        Points of the trapezoid average over the period.
    average : bool
        False: return V(t) at the ``samples + 1`` times instead of the average.
    """
    n = n_states
    noise = diffusion if callable(diffusion) else (lambda t: diffusion)

    def rhs(t, y):
        a = drift(t)
        phi, v = y[:n * n].reshape(n, n), y[n * n:].reshape(n, n)
        dv = a @ v + v @ a.T + noise(t)
        return np.concatenate([(a @ phi).ravel(), dv.ravel()])

    y0 = np.concatenate([np.eye(n).ravel(), np.zeros(n * n)])
    end = solve_ivp(rhs, (0.0, period), y0, method="DOP853", rtol=RTOL, atol=ATOL).y[:, -1]
    phi, q = end[:n * n].reshape(n, n), end[n * n:].reshape(n, n)
    growth = np.max(np.abs(np.linalg.eigvals(phi)))
    if growth >= 1.0:  # an unstable periodic system has no periodic steady state
        raise ValueError(f"Floquet multiplier of modulus {growth:.6g} ≥ 1: unstable")
    v0 = solve_discrete_lyapunov(phi, 0.5 * (q + q.T))
    times = np.linspace(0.0, period, samples + 1)
    y1 = np.concatenate([np.eye(n).ravel(), v0.ravel()])
    path = solve_ivp(rhs, (0.0, period), y1, method="DOP853", rtol=RTOL, atol=ATOL,
                     t_eval=times).y[n * n:]
    vs = path.T.reshape(-1, n, n)
    if not average:
        return vs
    return np.trapezoid(vs, times, axis=0) / period


def optomechanical_drift(fields, mechanics):
    """A(t) of cavity fields and mechanical modes in one common rotating frame.

    Parameters
    ----------
    fields : list of dict
        Per cavity field: ``kappa``, ``detuning`` (reference frequency minus
        cavity, rad/s), ``tones``: list of (amplitude √n, offset ν = ω_tone −
        ω_reference in rad/s), ``g0``: single-photon coupling to each mode.
    mechanics : list of dict
        Per mode: ``frequency``, ``linewidth`` (rad/s).

    Notes
    -----
    H = Σf −Δf a†a + Σj Ωj b†b − Σf,j g0 (α*(t) a + α(t) a†)(b + b†), α(t) =
    Σk √nk e^(−iνk t); in the quadratures X = (a + a†)/√2, Y = (a − a†)/(i√2),
    q, p this gives Ẋ = −κ/2 X − ΔY − 2g0 Im α q, Ẏ = ΔX − κ/2 Y + 2g0 Re α q,
    ṗ = ... + 2g0 (Re α X + Im α Y) (Aspelmeyer, Kippenberg & Marquardt,
    Rev. Mod. Phys. 86, 1391 (2014), Sec. VII.A, with complex α).
    """
    nf, nm = len(fields), len(mechanics)
    n = 2 * nf + 2 * nm
    base = np.zeros((n, n))
    for f, fd in enumerate(fields):
        k, d = fd["kappa"], fd["detuning"]
        base[2 * f:2 * f + 2, 2 * f:2 * f + 2] = [[-k / 2, -d], [d, -k / 2]]
    for j, md in enumerate(mechanics):
        s = 2 * nf + 2 * j
        om, gm = md["frequency"], md["linewidth"]
        base[s:s + 2, s:s + 2] = [[-gm / 2, om], [-om, -gm / 2]]

    def drift(t):
        a = base.copy()
        for f, fd in enumerate(fields):
            alpha = sum(amp * np.exp(-1j * nu * t) for amp, nu in fd["tones"])
            for j, g0 in enumerate(fd["g0"]):
                s = 2 * nf + 2 * j
                a[2 * f, s] += -2 * g0 * alpha.imag
                a[2 * f + 1, s] += 2 * g0 * alpha.real
                a[s + 1, 2 * f] += 2 * g0 * alpha.real
                a[s + 1, 2 * f + 1] += 2 * g0 * alpha.imag
        return a

    return drift, n


def optomechanical_diffusion(fields, mechanics):
    """D = B N Bᵀ: vacuum at each external port, thermal internal loss, thermal baths."""
    d = []
    for fd in fields:
        level = fd["kappa_ex"] * 0.5 + (fd["kappa"] - fd["kappa_ex"]) * (fd["n_bath"] + 0.5)
        d += [level, level]
    for md in mechanics:
        d += [md["linewidth"] * (md["n_bath"] + 0.5)] * 2
    return np.diag(d)


def occupation(v, start):
    """(⟨q²⟩ + ⟨p²⟩ − 1)/2 of the pair at ``start``."""
    return (v[start, start] + v[start + 1, start + 1] - 1) / 2
