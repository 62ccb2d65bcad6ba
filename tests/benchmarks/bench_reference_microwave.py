"""Benchmark: the reference thermometry on the resolved microwave drum.

tests/data/drum_microwave_trial.toml: 0.2 s IQ records at the automatic 60 MS/s. Prints

- seconds per record of the reference estimator beside a naive one (Hann
  periodogram, excess power summed over ±5 linewidths at +Ωm), measured on
  the same records in one run, and their ratio;
- a larger harness run than the unit test's (default 100 trials): per
  quantity the verdict, and the fitted frequency's spread over its rms
  reported error.
"""

import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from simulator.analysis.psd import averaged_periodogram
from simulator.analysis.reference import sideband_thermometry
from simulator.analysis.thermometry import Calibration
from simulator.scenario.loader import load_scenario
from simulator.workflows.estimator import public_view
from simulator.workflows.record import simulate_record
from simulator.workflows.trial import run_trials, truth_table

SCENARIO = Path(__file__).parent.parent / "data" / "drum_microwave_trial.toml"
ESTIMATOR = "simulator.analysis.reference:sideband_thermometry"


def naive_area(record):
    """Anti-Stokes occupation from the excess power near +Ωm (no fit, no model)."""
    cal = Calibration.from_scenario(record.scenario)
    width = truth_table(record.scenario)["effective_linewidth_hz"]
    psd = averaged_periodogram(record.samples, record.sample_rate_hz,
                               segment_samples=2 ** 16, window="hann")
    offset = psd.frequency_hz - cal.mechanical_frequency_hz
    line, side = np.abs(offset) < 5 * width, (np.abs(offset) > 10 * width) & (
        np.abs(offset) < 40 * width)
    excess = np.sum(psd.density[line] - np.median(psd.density[side])) * psd.resolution_hz
    return excess / cal.area_per_quantum()


def timings(scenario, records=5):
    """Wall and CPU seconds per record of the reference and the naive estimator.

    Same records for both; CPU time (all threads of this process) is the
    steadier figure on a shared machine.
    """
    views = [public_view(simulate_record(scenario, seed=s)) for s in range(records)]
    sideband_thermometry(views[0])  # warm-up: imports
    out = {}
    for name, func in (("reference", sideband_thermometry), ("naive", naive_area)):
        wall, cpu = time.perf_counter(), time.process_time()
        for view in views:
            func(view)
        out[name] = ((time.perf_counter() - wall) / records,
                     (time.process_time() - cpu) / records)
    return out


def main(n=100):
    scenario = load_scenario(SCENARIO)
    seconds = timings(scenario)
    for i, kind in enumerate(("wall", "CPU")):
        ref, naive = seconds["reference"][i], seconds["naive"][i]
        print(f"per 0.2 s record ({kind}): reference {ref:.3f} s, naive {naive:.3f} s, "
              f"ratio {ref / naive:.2f}")
    with tempfile.TemporaryDirectory() as out:
        result = run_trials(scenario, ESTIMATOR, n, out, workers=2, progress=False)
    print(f"{n} trials, {len(result.errors)} failed")
    for q in result.quantities:
        print(f"  {q.name}: {q.verdict}")
    ds = result.dataset
    est = ds["estimate"].sel(quantity="effective_frequency_hz").values
    unc = ds["uncertainty"].sel(quantity="effective_frequency_hz").values
    print(f"  fitted frequency: spread {np.std(est, ddof=1):.4g} Hz, rms reported error "
          f"{np.sqrt(np.mean(unc**2)):.4g} Hz, ratio "
          f"{np.std(est, ddof=1) / np.sqrt(np.mean(unc**2)):.3f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 100)
