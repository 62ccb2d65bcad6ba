"""Command line: ``noisechain VERB ...`` (also ``python -m simulator``).

Exit status 0 on success, 2 on bad input (a one-paragraph message, no
traceback), 3 on a physically unstable or invalid operating point. Heavy
libraries are imported inside the verbs that need them so that ``--help``,
``check`` and ``inspect`` start fast.
"""

import argparse
import json
import math
import sys
from pathlib import Path

from simulator.errors import InputError, OperatingPointError

EXIT_OK, EXIT_INPUT, EXIT_UNSTABLE = 0, 2, 3


def _json_default(value):
    import numpy as np

    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, np.ndarray):
        return value.tolist()
    raise TypeError(f"cannot write {type(value).__name__} as JSON")


def _clean(value):
    """Replace non-finite floats by None so the output is strict JSON."""
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_clean(v) for v in value]
    return value


def print_json(data):
    print(json.dumps(_clean(data), indent=2, default=_json_default))


def cmd_check(args):
    from simulator.scenario import load_scenario

    scenario = load_scenario(args.scenario)
    modes = ", ".join(m.name for m in scenario.mechanics)
    print(f"{args.scenario}: valid scenario {scenario.scenario.name!r} "
          f"({len(scenario.mechanics)} mechanical mode(s): {modes})")
    return EXIT_OK


def cmd_inspect(args):
    from simulator.inspection import inspect_scenario
    from simulator.scenario import load_scenario

    report = inspect_scenario(load_scenario(args.scenario))
    if args.json:
        print_json(report.to_dict())
    else:
        print(report.to_text())
    return EXIT_OK if report.stability.stable else EXIT_UNSTABLE


def cmd_sweep(args):
    from simulator.scenario import load_scenario
    from simulator.sweep import run_sweep

    scenario = load_scenario(args.scenario)
    dataset = run_sweep(scenario, args.out, workers=args.workers, dask=args.dask,
                        progress=not args.quiet)
    failed = int((dataset["error"] != "").sum())
    unstable = int((dataset["stable"] == 0).sum())
    summary = {"out": str(Path(args.out).resolve()), "dataset": "sweep.nc",
               "points": int(dataset["stable"].size), "unstable_points": unstable,
               "failed_points": failed, "dimensions": dict(dataset["stable"].sizes)}
    if args.json:
        print_json(summary)
    else:
        print(f"sweep of {summary['points']} points written to {summary['out']}/sweep.nc "
              f"({unstable} unstable, {failed} failed)")
    return EXIT_OK


def cmd_demo(args):
    from simulator.demo import run_demo

    out = Path(args.out)
    written = run_demo(out)
    print(f"demo outputs written to {out.resolve()}:")
    for path in written:
        print(f"  {path}")
    return EXIT_OK


def build_parser():
    parser = argparse.ArgumentParser(
        prog="noisechain",
        description="Quantum-noise simulator of the optomechanical displacement-"
                    "measurement chain: operating point, linear model, steady state.")
    from simulator import __version__

    parser.add_argument("--version", action="version", version=f"noisechain {__version__}")
    verbs = parser.add_subparsers(dest="verb", metavar="VERB")
    verbs.required = True

    p = verbs.add_parser("check", help="validate a scenario file and nothing else")
    p.add_argument("scenario", help="scenario TOML file")
    p.set_defaults(func=cmd_check)

    p = verbs.add_parser("inspect", help="operating point, stability and exact steady "
                         "state of a scenario")
    p.add_argument("scenario", help="scenario TOML file")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.set_defaults(func=cmd_inspect)

    p = verbs.add_parser("sweep", help="evaluate the scenario over its [sweep] grid; "
                         "resumable")
    p.add_argument("scenario", help="scenario TOML file with a [sweep] section")
    p.add_argument("--out", required=True, help="output folder (rerun with the same "
                   "folder to resume)")
    p.add_argument("--workers", type=int, default=None, help="local worker processes "
                   "(default: all cores)")
    p.add_argument("--dask", default=None, metavar="ADDR", help="run on Dask: 'local' "
                   "for a LocalCluster or a scheduler address tcp://host:port")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.add_argument("--json", action="store_true", help="print the summary as JSON")
    p.set_defaults(func=cmd_sweep)

    p = verbs.add_parser("demo", help="run the bundled demo scenario and write its "
                         "outputs to a folder")
    p.add_argument("--out", default="demo-output", help="output folder (default: "
                   "%(default)s)")
    p.set_defaults(func=cmd_demo)
    return parser


def main(argv=None):
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return args.func(args)
    except InputError as exc:
        print(f"noisechain {args.verb}: error: {exc}", file=sys.stderr)
        return EXIT_INPUT
    except OperatingPointError as exc:
        print(f"noisechain {args.verb}: {exc}", file=sys.stderr)
        return EXIT_UNSTABLE


def entry_point():
    sys.exit(main())
