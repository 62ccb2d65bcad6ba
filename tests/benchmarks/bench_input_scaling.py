"""Benchmark: `check` against the number of swept values, `inspect` against the number of modes.

Prints, side by side in one run:

- the time `noisechain check` takes on the demo scenario with 10^4 and 10^5
  swept detunings (a list, every value distinct) and the ratio of the two:
  about 10 when the check is linear in the number of values (it was about
  100 when distinct values were found by a quadratic search);
- the time `noisechain inspect --json` takes with 5, 10 and 20 mechanical
  modes (50 with `--modes 50`), with and without the feasibility bounds,
  and the ratio of consecutive sizes.

Run with `make bench` or `.venv/bin/python tests/benchmarks/bench_input_scaling.py`.
"""

import argparse
import contextlib
import io
import tempfile
import time
import tomllib
from pathlib import Path

import tomli_w

from simulator.cli.parser import main

DEMO = Path(__file__).resolve().parents[2] / "simulator" / "data" / "demo.toml"


def _seconds(argv):
    t0 = time.perf_counter()
    with contextlib.redirect_stdout(io.StringIO()):
        status = main(argv)
    assert status == 0, f"{argv}: exit status {status}"
    return time.perf_counter() - t0


def _demo(folder, name, edit):
    data = tomllib.loads(DEMO.read_text(encoding="utf-8"))
    edit(data)
    path = Path(folder) / name
    path.write_text(tomli_w.dumps(data), encoding="utf-8")
    return str(path)


def check_versus_values(folder, counts=(10_000, 100_000)):
    def swept(n):
        def edit(data):
            data["sweep"] = {"parameters": {"drive.detuning_hz": [
                -2e6 + 4e6 * i / n for i in range(n)]}}
        return edit

    _seconds(["check", _demo(folder, "warm.toml", swept(10))])  # imports
    times = [_seconds(["check", _demo(folder, f"sweep{n}.toml", swept(n))]) for n in counts]
    print("check with a swept list of distinct values")
    for n, t in zip(counts, times, strict=True):
        print(f"  {n:>8} values: {t:7.2f} s   ({t / n * 1e6:6.1f} µs per value)")
    print(f"  ratio {counts[1] // counts[0]}× the values: {times[1] / times[0]:.1f}× the time "
          "(linear: about the same factor)")


def inspect_versus_modes(folder, sizes):
    def modes(n):
        def edit(data):
            data.pop("sweep", None)
            first = data["mechanics"][0]
            data["mechanics"] = [dict(first, name=f"m{j}",
                                      frequency_hz=first["frequency_hz"] * (1 + 0.37 * j))
                                 for j in range(n)]
        return edit

    print("inspect --json against the number of mechanical modes")
    previous = None
    for n in sizes:
        path = _demo(folder, f"modes{n}.toml", modes(n))
        full = _seconds(["inspect", "--json", path])
        quick = _seconds(["inspect", "--json", "--no-feasibility", path])
        ratio = ("" if previous is None
                 else f"   ratio to {previous[0]} modes {full / previous[1]:5.1f}")
        print(f"  {n:>3} modes: {full:7.2f} s with feasibility, {quick:6.3f} s without{ratio}")
        previous = (n, full)


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--modes", type=int, nargs="*", default=[5, 10, 20])
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        check_versus_values(folder)
        inspect_versus_modes(folder, args.modes)
