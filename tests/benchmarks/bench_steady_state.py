"""Benchmark: exact steady state over 1,000 detunings, one mode and five modes.

Prints, for each scenario, the time per detuning point and points per second of

* the whole engine path a sweep takes per point (derive the scenario by path,
  operating point, linear model, stability, Lyapunov steady state), and
* the Lyapunov solve alone (scipy's Bartels–Stewart solver, as the engine
  uses) beside a plain reference solve measured in the same run: the
  vectorised equation (I ⊗ A + A ⊗ I) vec V = −vec(B N Bᵀ) by np.linalg.solve.

The ratio reference/engine > 1 means the engine's solver is faster. The two
covariances are compared as a correctness check. Run:
``.venv/bin/python tests/benchmarks/bench_steady_state.py``.
"""

import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # tests/ for conftest

from conftest import mode, scenario_with_coupling  # noqa: E402

from simulator.linear.steady_state import steady_state  # noqa: E402
from simulator.model.operating_point import operating_point  # noqa: E402
from simulator.model.optomechanics import linear_model  # noqa: E402

POINTS = 1000


def kronecker_covariance(model):
    """Reference: solve A V + V Aᵀ = −D as one n²×n² linear system."""
    a, d = model.A, model.diffusion
    n = len(a)
    eye = np.eye(n)
    big = np.kron(eye, a) + np.kron(a, eye)
    v = np.linalg.solve(big, -d.reshape(-1, order="F")).reshape(n, n, order="F")
    return 0.5 * (v + v.T)


def one_mode():
    return scenario_with_coupling(g_hz=2e4, linewidth_hz=1e6, detuning_hz=-5e6, modes=[
        mode("drum", frequency_hz=5e6, linewidth_hz=20.0, bath_occupation=300.0)])


def five_modes():
    freqs = (1.0e6, 1.3e6, 1.7e6, 2.2e6, 2.8e6)
    modes = [mode(f"m{j}", frequency_hz=f, linewidth_hz=5.0 + j, coupling_hz=80.0 + 10 * j,
                  bath_occupation=1e3 * (j + 1)) for j, f in enumerate(freqs)]
    return scenario_with_coupling(g_hz=1e4, linewidth_hz=1e6, detuning_hz=-2e6, modes=modes)


def run(label, base, detunings):
    scenarios = [base.replace("drive.detuning_hz", float(d)) for d in detunings]
    models = [linear_model(s, operating_point(s)) for s in scenarios]

    t0 = time.perf_counter()
    occupations = [steady_state(s.replace("drive.detuning_hz", s.drive.detuning_hz)).modes[0]
                   .occupation for s in scenarios]
    t_full = time.perf_counter() - t0

    t0 = time.perf_counter()
    engine = [m.covariance() for m in models]
    t_engine = time.perf_counter() - t0

    t0 = time.perf_counter()
    reference = [kronecker_covariance(m) for m in models]
    t_ref = time.perf_counter() - t0

    worst = max(np.abs(e - r).max() / np.abs(r).max() for e, r in zip(engine, reference,
                                                                      strict=True))
    n_states = len(models[0].states)
    print(f"\n{label}: {len(scenarios)} detunings, {n_states} states")
    print(f"  whole path per point   {1e6 * t_full / POINTS:9.1f} µs   "
          f"{POINTS / t_full:10.0f} points/s")
    print(f"  Lyapunov (engine)      {1e6 * t_engine / POINTS:9.1f} µs   "
          f"{POINTS / t_engine:10.0f} points/s")
    print(f"  Kronecker reference    {1e6 * t_ref / POINTS:9.1f} µs   "
          f"{POINTS / t_ref:10.0f} points/s")
    print(f"  ratio reference/engine {t_ref / t_engine:9.2f}")
    print(f"  max relative difference of the covariances {worst:.2e}")
    print(f"  occupation of the first mode from {min(occupations):.4g} to "
          f"{max(occupations):.4g}")


def main():
    run("one mode", one_mode(), np.linspace(-15e6, -0.5e6, POINTS))
    run("five modes", five_modes(), np.linspace(-6e6, -0.3e6, POINTS))


if __name__ == "__main__":
    main()
