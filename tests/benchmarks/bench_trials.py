"""Benchmark: validation trials per second, 1 and 2 workers, realistic record length.

Each trial generates a 2 s IQ record at 250 kS/s of the fast thermometry
scenario (tests/data/fast_thermometry.toml) and runs the reference
sideband-thermometry estimator on it. Prints trials per second for each
worker count and the speed-up.
"""

import sys
import tempfile
import time
from pathlib import Path

from simulator.scenario.loader import load_scenario
from simulator.workflows.trial import run_trials

SCENARIO = Path(__file__).parent.parent / "data" / "fast_thermometry.toml"
ESTIMATOR = "simulator.analysis.reference:sideband_thermometry"


def main(n=16):
    scenario = load_scenario(SCENARIO)
    with tempfile.TemporaryDirectory() as out:  # warm-up: imports and numba compilation
        run_trials(scenario, ESTIMATOR, 2, out, duration_s=0.05, workers=1, progress=False)
    rates = {}
    for workers in (1, 2):
        with tempfile.TemporaryDirectory() as out:
            t0 = time.perf_counter()
            run_trials(scenario, ESTIMATOR, n, out, workers=workers, progress=False)
            rates[workers] = n / (time.perf_counter() - t0)
    samples = scenario.record.duration_s * scenario.digitizer.sample_rate_hz
    print(f"{n} trials, each a {scenario.record.duration_s:g} s record "
          f"({samples:.3g} samples) + reference thermometry")
    for workers, rate in rates.items():
        print(f"  {workers} worker(s): {rate:6.2f} trials/s")
    print(f"  speed-up 2 vs 1 worker: {rates[2] / rates[1]:.2f} (2 cores; includes "
          "starting the worker processes)")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 16)
