"""Benchmark: start-up time of the command line, beside a bare interpreter.

Runs each command several times in fresh subprocesses and prints the median
wall time and its ratio to ``python -c pass`` measured in the same run:

* ``python -m simulator --help``
* ``python -m simulator check <demo>``
* ``python -m simulator inspect <demo>``

Then reports (without asserting; tests/test_cli_foundation.py asserts it)
which heavy libraries are loaded after importing ``simulator.cli.parser`` and
running ``inspect``: qutip, numba and matplotlib must not be. Run:
``.venv/bin/python tests/benchmarks/bench_startup.py``.
"""

import statistics
import subprocess
import sys
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]
DEMO = REPO / "simulator" / "data" / "demo.toml"
REPEATS = 7
HEAVY = ("qutip", "numba", "matplotlib", "xarray", "h5py", "dask")


def wall_time(args):
    times = []
    for _ in range(REPEATS):
        t0 = time.perf_counter()
        subprocess.run([sys.executable, *args], cwd=REPO, capture_output=True, check=False)
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def heavy_modules_after_inspect():
    code = (
        "import sys, contextlib, io\n"
        "from simulator.cli.parser import main\n"
        "with contextlib.redirect_stdout(io.StringIO()):\n"
        f"    main(['inspect', {str(DEMO)!r}])\n"
        f"print(','.join(sorted({{m.split('.')[0] for m in sys.modules}} & set({HEAVY!r}))))\n")
    done = subprocess.run([sys.executable, "-c", code], cwd=REPO, capture_output=True,
                          text=True, check=False)
    return done.stdout.strip() or "none", done.returncode


def main():
    base = wall_time(["-c", "pass"])
    print(f"median of {REPEATS} runs, fresh interpreter each time")
    print(f"  {'python -c pass':<40}{1e3 * base:8.1f} ms   ratio  1.0")
    for label, args in (("python -m simulator --help", ["-m", "simulator", "--help"]),
                        ("python -m simulator check demo.toml",
                         ["-m", "simulator", "check", str(DEMO)]),
                        ("python -m simulator inspect demo.toml",
                         ["-m", "simulator", "inspect", str(DEMO)])):
        t = wall_time(args)
        print(f"  {label:<40}{1e3 * t:8.1f} ms   ratio {t / base:4.1f}")
    loaded, code = heavy_modules_after_inspect()
    print(f"heavy libraries loaded by import simulator.cli.parser + inspect: {loaded} "
          f"(exit status {code})")


if __name__ == "__main__":
    main()
