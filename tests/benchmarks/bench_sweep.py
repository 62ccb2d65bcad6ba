"""Benchmark: a 1,000-point detuning sweep with 1 and 2 workers, against a plain loop.

Prints wall time per point for the plain loop (derive scenario, inspect it,
nothing stored), the sweep engine with 1 and 2 local workers (each point
stored atomically, NetCDF written at the end), and the ratios. Run with
`make bench` or `.venv/bin/python tests/benchmarks/bench_sweep.py [N]`.
"""

import dataclasses
import sys
import tempfile
import time
from pathlib import Path

from simulator.scenario.loader import parse_scenario
from simulator.workflows.inspection import inspect_scenario
from simulator.workflows.sweep import run_sweep, sweep_axes

TEXT = (Path(__file__).parent.parent / "data" / "sweep_base.toml").read_text() + """
[sweep]
[sweep.parameters]
"drive.detuning_hz" = { start = -2, stop = 2, num = NUM, unit = "mechanics[0].frequency_hz" }
"""


def main(n=1000):
    scenario = parse_scenario(TEXT.replace("NUM", str(n)))
    (axis,) = sweep_axes(scenario)
    base = dataclasses.replace(scenario, sweep=None)
    t0 = time.perf_counter()
    for value in axis.values:
        inspect_scenario(base.replace(axis.path, value))
    plain = (time.perf_counter() - t0) / n
    with tempfile.TemporaryDirectory() as out:  # one-time imports (xarray, NetCDF)
        run_sweep(parse_scenario(TEXT.replace("NUM", "2")), out, workers=1, progress=False)
    timings = {}
    for workers in (1, 2):
        with tempfile.TemporaryDirectory() as out:
            t0 = time.perf_counter()
            run_sweep(scenario, out, workers=workers, progress=False)
            timings[workers] = (time.perf_counter() - t0) / n
    print(f"{n}-point detuning sweep (steady state and diagnostics per point)")
    print(f"  plain loop, no storage : {plain * 1e3:8.3f} ms/point")
    for workers, t in timings.items():
        print(f"  sweep engine, {workers} worker(s): {t * 1e3:8.3f} ms/point   "
              f"ratio to plain loop {t / plain:5.2f}   overhead {(t - plain) * 1e3:+.3f} ms/point")
    print(f"  speed-up 2 workers vs 1: {timings[1] / timings[2]:.2f} (includes starting "
          "the worker processes; the machine has 2 cores)")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 1000)
