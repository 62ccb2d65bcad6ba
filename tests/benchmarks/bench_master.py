"""Benchmark: master-equation steady state and spectrum against Hilbert-space size.

For the linearised model of an invented red-sideband scenario, with the Fock
cutoffs set by hand to sweep the Hilbert-space dimension d (Liouvillian
size d²), prints per size

* the steady state by the engine (preconditioned GMRES on the Lindblad
  equation, :class:`simulator.master.liouvillian.LindbladSolver`), with its
  GMRES steps and peak memory (tracemalloc on a second run: Python and NumPy
  allocations, not the BLAS work space);
* the same steady state by ``qutip.steadystate`` (direct sparse LU) and by the
  engine's own sparse-LU fallback, both measured in the same run up to the
  size where they take minutes, and the ratio to the engine;
* a 200-point output spectrum (one resolvent solve per frequency, warm
  started): timed in full up to :data:`FULL_SPECTRUM_MAX_D`, beyond that
  on 20 points and scaled to 200 (marked "est.").

The practical limit printed at the end is the largest d whose steady state
takes under a minute and whose 200-point spectrum takes under ten minutes on
this machine. Run: ``.venv/bin/python tests/benchmarks/bench_master.py``
(a few minutes; ``--quick`` for the small sizes only).
"""

import sys
import time
import tracemalloc
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # tests/ for conftest

from conftest import mode, scenario_with_coupling  # noqa: E402

from simulator.master.hilbert import build_model  # noqa: E402
from simulator.master.liouvillian import LindbladSolver  # noqa: E402
from simulator.master.spectra import output_flux_density  # noqa: E402
from simulator.master.steady import _read  # noqa: E402

SIZES = [(4, 10), (4, 20), (5, 32), (6, 40), (6, 60)]
QUICK = SIZES[:3]
QUTIP_MAX_D = 100  # qutip.steadystate (direct) beyond this takes minutes here
DIRECT_MAX_D = 160
FULL_SPECTRUM_MAX_D = 160


def scenario():
    """Red sideband, g/κ = 0.1, mechanical bath of 3 phonons (invented)."""
    return scenario_with_coupling(
        g_hz=0.1e6, detuning_hz=-4e6, cavity_bath_occupation=0.1,
        modes=[mode(frequency_hz=4e6, linewidth_hz=2e4, coupling_hz=1e3, bath_occupation=3.0)])


def timed(fn):
    start = time.perf_counter()
    out = fn()
    return out, time.perf_counter() - start


def peak_memory_mb(fn):
    """Peak traced allocation (MB) of a second, untimed run (tracemalloc slows it)."""
    tracemalloc.start()
    fn()
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return peak / 2**20


def run(sizes):
    import qutip
    from threadpoolctl import threadpool_limits

    sc = scenario()
    rows = []
    print(f"{'d':>5}{'L size':>9}{'engine s':>10}{'steps':>7}{'MB':>8}{'qutip s':>10}"
          f"{'ratio':>7}{'LU s':>8}{'ratio':>7}{'200-pt s':>11}{'MB':>8}  occupation")
    for cutoffs in sizes:
        model = build_model(sc, "linearised", cutoffs=list(cutoffs))
        d = model.dimension
        engine = lambda m=model: LindbladSolver(m.hamiltonian, m.collapse).steady_state()  # noqa: E731
        (rho, info), t_engine = timed(engine)
        mem = peak_memory_mb(engine)
        steady = _read(model, rho, info, 1.0, 1)
        t_qutip = t_lu = None
        if d <= QUTIP_MAX_D:
            with threadpool_limits(limits=1, user_api="blas"):
                ref, t_qutip = timed(lambda m=model: qutip.steadystate(
                    m.hamiltonian, list(m.collapse)).full())
            assert np.max(np.abs(ref - rho)) < 1e-8, "engine and qutip disagree"
        if d <= DIRECT_MAX_D:
            (lu, _), t_lu = timed(lambda m=model: LindbladSolver(
                m.hamiltonian, m.collapse, method="direct").steady_state())
            assert np.max(np.abs(lu - rho)) < 1e-8, "engine and sparse LU disagree"
        points = 200 if d <= FULL_SPECTRUM_MAX_D else 20
        f = np.linspace(-8e6, 8e6, points)
        _, t_spec = timed(lambda s=steady, f=f: output_flux_density(s, f))
        mem_spec = peak_memory_mb(lambda s=steady, f=f: output_flux_density(s, f[:3]))
        t_spec_200 = t_spec * 200 / points
        rows.append((d, t_engine, t_spec_200))
        fmt = lambda t: f"{t:10.3g}" if t is not None else f"{'-':>10}"  # noqa: E731
        ratio = lambda t, ref=t_engine: f"{t / ref:7.2g}" if t is not None else f"{'-':>7}"  # noqa: E731
        lu = f"{t_lu:8.3g}" if t_lu is not None else f"{'-':>8}"
        est = "" if points == 200 else " est."
        print(f"{d:5d}{d * d:9d}{t_engine:10.3g}{info.steps:7d}{mem:8.1f}{fmt(t_qutip)}"
              f"{ratio(t_qutip)}{lu}{ratio(t_lu)}{t_spec_200:11.3g}{mem_spec:8.1f}  "
              f"{steady.modes[0].occupation:.5f}{est}", flush=True)
    fits = [d for d, ts, tsp in rows if ts < 60 and tsp < 600]
    print(f"\npractical limit on this machine: d ≈ {max(fits) if fits else 'below the sizes tried'}"
          " (steady state under 1 min and a 200-point spectrum under 10 min;"
          f" largest tried {rows[-1][0]})")


if __name__ == "__main__":
    run(QUICK if "--quick" in sys.argv else SIZES)
