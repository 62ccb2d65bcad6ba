"""Benchmark: heterodyne spectrum with its noise budget, one mode and five modes.

Prints points per second of

* the engine: :func:`simulator.linear.spectra.heterodyne_spectrum` on 10⁶ frequency
  points (chunked, batched eigen-decomposition products, every budget term), and
* a plain reference measured in the same run: a Python loop over frequencies
  with one ``numpy.linalg.solve`` per point for H(ω) = C(−iω − A)⁻¹B + D and
  the total 1 + η(u H N H† u† − ½) only (no budget), on a subset of points,

and the ratio engine/reference (> 1: the engine is faster, although it also
computes the budget). The totals are compared on the subset as a correctness
check. Run: ``.venv/bin/python tests/benchmarks/bench_spectra.py``.
"""

import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # tests/ for conftest
sys.path.insert(0, str(Path(__file__).resolve().parent))  # the same scenarios as there

from bench_steady_state import five_modes, one_mode  # noqa: E402

from simulator.linear.spectra import heterodyne_spectrum  # noqa: E402
from simulator.model.system import System  # noqa: E402
from simulator.model.units import angular  # noqa: E402

POINTS = 1_000_000
LOOP_POINTS = 20_000


def reference_loop(model, f, eta):
    """One linear solve per frequency, written the plain way."""
    u = np.array([1.0, 1.0j]) / np.sqrt(2.0)
    eye = np.eye(len(model.states))
    out = np.empty(f.size)
    for k, w in enumerate(angular(f)):
        h = model.C @ np.linalg.solve(-1j * w * eye - model.A, model.B) + model.D
        row = u @ h
        out[k] = 1.0 + eta * ((row @ model.N @ row.conj()).real - 0.5)
    return out


def run(label, scenario):
    system = System(scenario).require_stable()
    model = system.model
    f = np.linspace(-8e6, 8e6, POINTS)
    t0 = time.perf_counter()
    spec = heterodyne_spectrum(system, f)
    engine = time.perf_counter() - t0
    sub = f[:: POINTS // LOOP_POINTS]
    t0 = time.perf_counter()
    ref = reference_loop(model, sub, scenario.detection.efficiency)
    loop = time.perf_counter() - t0
    err = np.max(np.abs(ref - spec.total[:: POINTS // LOOP_POINTS])) / np.max(np.abs(ref))
    rate_engine, rate_loop = POINTS / engine, sub.size / loop
    print(f"{label:<10} states {len(model.states):>2}  engine {rate_engine:12,.0f} points/s "
          f"({len(spec.contributions)} budget terms)   per-point solve loop "
          f"{rate_loop:10,.0f} points/s   ratio {rate_engine / rate_loop:6.1f}   "
          f"max difference / peak {err:.1e}")


if __name__ == "__main__":
    print(f"heterodyne spectrum on {POINTS:,} points (loop timed on {LOOP_POINTS:,})")
    run("one mode", one_mode())
    run("five modes", five_modes())
