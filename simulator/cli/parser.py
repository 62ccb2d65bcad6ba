"""Command line: ``noisechain VERB ...`` (also ``python -m simulator``).

Exit status (a one-paragraph message, no traceback, for every failure):

- 0 success, also when the reader of the output goes away early
  (``noisechain inspect ... | head -1``);
- 1 work that could not be completed (a worker process died, every trial
  failed); what finished is kept;
- 2 bad input, or an output that cannot be written: a file that exists
  (without ``--force``), a missing or read-only folder, a full disk, a
  folder in use by another run;
- 3 a physically unstable or invalid operating point;
- 130 stopped by Ctrl-C (SIGINT), 143 stopped by SIGTERM (128 + the signal
  number); resumable verbs continue where they stopped on a rerun.

Heavy libraries are imported inside the verbs that need them so that
``--help``, ``check`` and ``inspect`` start fast.
"""

import argparse
import os
import sys

from simulator.cli.commands import (
    EXIT_FAILED,
    EXIT_INPUT,
    EXIT_OK,
    EXIT_UNSTABLE,
    cmd_check,
    cmd_demo,
    cmd_inspect,
    cmd_plan,
    cmd_record,
    cmd_run,
    cmd_spectrum,
    cmd_sweep,
    cmd_trial,
)
from simulator.errors import InputError, NoisechainError, OperatingPointError
from simulator.workflows.estimator import DEFAULT_TIMEOUT_S


def _execution_options(p, *, dask=True):
    """--workers, --dask, --quiet and --json, shared by the verbs that run many tasks."""
    p.add_argument("--workers", type=int, default=None, help="local worker processes "
                   "(default: all cores)")
    if dask:
        p.add_argument("--dask", default=None, metavar="ADDR", help="run on Dask: 'local' "
                       "for a LocalCluster or a scheduler address tcp://host:port")
    _quiet_option(p)
    p.add_argument("--json", action="store_true", help="print the summary as JSON")


def _quiet_option(p):
    """--quiet, the same on every verb: no progress bars; warnings and errors stay."""
    p.add_argument("--quiet", action="store_true", help="no progress bars (warnings, "
                   "errors and results are still printed)")


def _force_option(p):
    p.add_argument("--force", action="store_true", help="replace output files that "
                   "already exist (never read-only ones); without it an existing file is "
                   "an error")


def build_parser():
    """The argument parser of every ``noisechain`` verb."""
    parser = argparse.ArgumentParser(
        prog="noisechain",
        description="Quantum-noise simulator of the optomechanical displacement-"
                    "measurement chain: operating point and steady state, analytic "
                    "spectra, synthetic records with their ground truth, sweeps, and "
                    "validation of your own estimators.")
    from simulator import __version__

    parser.add_argument("--version", action="version", version=f"noisechain {__version__}")
    verbs = parser.add_subparsers(dest="verb", metavar="VERB")
    verbs.required = True

    p = verbs.add_parser("check", help="validate a scenario file and nothing else")
    p.add_argument("scenario", help="scenario TOML file")
    _quiet_option(p)
    p.set_defaults(func=cmd_check)

    p = verbs.add_parser("inspect", help="operating point, stability and exact steady "
                         "state of a scenario")
    p.add_argument("scenario", help="scenario TOML file")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.add_argument("--master", action="store_true", help="add the master-equation steady "
                   "state (QuTiP) beside the linear numbers; small occupations only")
    p.add_argument("--master-model", choices=("full", "linearised"), default="full",
                   help="master-equation model for --master (default: %(default)s)")
    p.add_argument("--no-feasibility", action="store_true", help="leave out the "
                   "measurement-time bounds (Fisher information), the slowest part for "
                   "scenarios with many modes")
    _quiet_option(p)
    p.set_defaults(func=cmd_inspect)

    p = verbs.add_parser("sweep", help="evaluate the scenario over its [sweep] grid; "
                         "resumable")
    p.add_argument("scenario", help="scenario TOML file with a [sweep] section")
    p.add_argument("--out", required=True, help="output folder (rerun with the same "
                   "folder to resume)")
    _execution_options(p)
    p.set_defaults(func=cmd_sweep)

    p = verbs.add_parser("plan", help="the best operating point under the scenario's "
                         "[plan]: objective, active constraints, flatness, a map")
    p.add_argument("scenario", help="scenario TOML file with a [plan] section")
    p.add_argument("--plot", default=None, help="write the map around the optimum: .png, "
                   ".pdf or .svg")
    _force_option(p)
    p.add_argument("--no-refine", action="store_true", help="stop after the coarse grid")
    p.add_argument("--workers", type=int, default=1, help="local worker processes for the "
                   "coarse grid (default: %(default)s, this process)")
    p.add_argument("--dask", default=None, metavar="ADDR", help="evaluate the coarse grid "
                   "on Dask: 'local' or a scheduler address tcp://host:port")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.set_defaults(func=cmd_plan)

    p = verbs.add_parser("spectrum", help="analytic spectrum of the record at the "
                         "digitiser (or at the cavity port) with its noise budget and "
                         "sideband summary")
    p.add_argument("scenario", help="scenario TOML file")
    p.add_argument("--at", choices=("record", "cavity"), default="record",
                   help="record: what the digitiser sees, detection chain and sampling "
                   "included (default); cavity: the field at the cavity port as an ideal "
                   "detector behind the detection efficiency sees it, before the amplifier, "
                   "filter and sampling")
    p.add_argument("--out", default=None, help="write the spectrum: .nc (NetCDF) or .csv")
    p.add_argument("--plot", default=None, help="write a figure: .png, .pdf or .svg")
    _force_option(p)
    p.add_argument("--angle-deg", type=float, default=None, help="homodyne quadrature angle "
                   "from the intracavity amplitude quadrature (default: the scenario's "
                   "detection.quadrature_angle_rad)")
    p.add_argument("--engine", choices=("linear", "master"), default="linear",
                   help="linear state-space model (default) or the master equation "
                   "(QuTiP; heterodyne only, small occupations; at the cavity port only, "
                   "so with --at cavity)")
    p.add_argument("--master-model", choices=("full", "linearised"), default="full",
                   help="master-equation model for --engine master (default: %(default)s)")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    _quiet_option(p)
    p.set_defaults(func=cmd_spectrum)

    p = verbs.add_parser("record", help="synthetic digitised record with its ground "
                         "truth, written to HDF5")
    p.add_argument("scenario", help="scenario TOML file")
    p.add_argument("--out", required=True, help="output file (.h5)")
    _force_option(p)
    p.add_argument("--duration", type=float, default=None, metavar="S",
                   help="record length in seconds (default: the scenario's "
                   "record.duration_s)")
    p.add_argument("--seed", type=int, default=None, metavar="N", help="random seed "
                   "(default: the scenario's scenario.seed)")
    p.add_argument("--form", choices=("auto", "full-state", "innovations"), default="auto",
                   help="exact generator (default: %(default)s: full state when the "
                   "mechanical quadratures are stored, else innovations)")
    p.add_argument("--engine", choices=("linear", "master"), default="linear",
                   help="linear model (default) or a stochastic-master-equation "
                   "trajectory (QuTiP; ideal iq heterodyne receiver, small systems, slow)")
    p.add_argument("--master-model", choices=("full", "linearised"), default="full",
                   help="master-equation model for --engine master (default: %(default)s)")
    p.add_argument("--threads", type=int, default=None, metavar="N",
                   help="threads drawing random numbers, digitising and compressing "
                   "beside the recursion (default: every available core; the record is "
                   "the same bits for any number)")
    p.add_argument("--averaged", type=int, default=None, metavar="N",
                   help="write instead the averaged periodogram of the record, segments of "
                   "N samples, drawn from its exact law (milliseconds for any duration)")
    p.add_argument("--window", default=None, metavar="NAME",
                   help="window of --averaged (a scipy.signal.get_window name; default "
                   "hann)")
    p.add_argument("--compress", action="store_true",
                   help="deflate the samples (HDF5 shuffle + gzip: about 11 %% smaller, "
                   "several times slower to write)")
    _quiet_option(p)
    p.add_argument("--json", action="store_true", help="print the summary as JSON")
    p.set_defaults(func=cmd_record)

    p = verbs.add_parser("trial", help="validate an estimator on many synthetic records "
                         "against the ground truth (bias, pulls, coverage)")
    p.add_argument("scenario", help="scenario TOML file")
    p.add_argument("--estimator", required=True, metavar="MODULE:FUNCTION",
                   help="function(record) -> {name: (value, uncertainty)}; a module path "
                   "or path/to/file.py:function. This runs that Python code, with your "
                   "privileges, in a child process per trial")
    p.add_argument("--timeout-s", type=float, default=DEFAULT_TIMEOUT_S, metavar="S",
                   help="seconds the estimator may take on one record before the trial "
                   "counts as failed (default: %(default)g)")
    p.add_argument("--trials", type=int, required=True, help="number of records")
    p.add_argument("--averaged", type=int, default=None, metavar="N",
                   help="give the estimator each record's averaged periodogram (segments "
                   "of N samples, drawn from its exact law) instead of the record")
    p.add_argument("--window", default="hann", metavar="NAME",
                   help="window of --averaged (default: %(default)s)")
    p.add_argument("--out", required=True, help="output folder (rerun to resume or extend)")
    p.add_argument("--duration", type=float, default=None, metavar="S",
                   help="record length in seconds (default: record.duration_s)")
    _execution_options(p)
    p.set_defaults(func=cmd_trial)

    p = verbs.add_parser("run", help="everything the scenario asks for (inspect, "
                         "spectrum, record, sweep, figures) and an HTML report")
    p.add_argument("scenario", help="scenario TOML file")
    p.add_argument("--out", required=True, help="output folder, new or of an earlier run "
                   "of the same scenario (whose files are replaced and sweep resumed)")
    _execution_options(p)
    p.set_defaults(func=cmd_run)

    p = verbs.add_parser("demo", help="run the bundled demo scenario and write its "
                         "outputs and report to a folder")
    p.add_argument("--out", default="demo-output", help="output folder (default: "
                   "%(default)s); running the demo again replaces what it wrote there")
    _execution_options(p, dask=False)
    p.set_defaults(func=cmd_demo)
    return parser


def main(argv=None):
    """Run one verb; return the exit status (0 ok, 2 bad input, 3 unstable)."""
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
    except NoisechainError as exc:
        print(f"noisechain {args.verb}: {exc}", file=sys.stderr)
        return EXIT_FAILED
    except BrokenPipeError:
        raise  # the reader went away: handled in entry_point, not a file error
    except (ArithmeticError, ValueError) as exc:
        # a numerical failure inside the engine (overflow, a singular matrix, a
        # non-finite array): the input is beyond what the model can represent
        print(f"noisechain {args.verb}: error: {getattr(args, 'scenario', 'the input')}: "
              f"the computation failed numerically ({type(exc).__name__}: {exc}); a value "
              "of the scenario is probably outside the range the model can represent; "
              "expected values within the limits of docs/scenario-reference.md",
              file=sys.stderr)
        return EXIT_INPUT
    except OSError as exc:  # a path that cannot be read or written
        where = exc.filename if exc.filename else "a file"
        print(f"noisechain {args.verb}: error: cannot use {where}: "
              f"{exc.strerror or exc}; check the path and its permissions",
              file=sys.stderr)
        return EXIT_INPUT


def entry_point():
    """Console-script entry: run :func:`main` and exit with its status."""
    from simulator.workflows import interrupt

    interrupt.install()
    try:
        status = main()
        sys.stdout.flush()
    except BrokenPipeError:
        # the reader (e.g. `| head`) closed the pipe: not an error of ours; later
        # writes (the interpreter's final flush) go nowhere instead of failing again
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        status = EXIT_OK
    except KeyboardInterrupt:
        print("noisechain: interrupted", file=sys.stderr)
        status = interrupt.exit_status()
    if interrupt.requested():
        # a stop that a library turned into another error (one raised while numba
        # loaded its cache, say) still ends the run as stopped: 128 + the signal
        status = interrupt.exit_status()
    sys.exit(status)
