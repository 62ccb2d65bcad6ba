"""The verbs of the command line: each ``cmd_*`` takes the parsed arguments.

:mod:`simulator.cli.parser` builds the parser and turns errors into exit statuses;
the functions here do the work of one verb each and print its report. Heavy
libraries are imported inside the verbs that need them.
"""

import math
import sys
import warnings
from pathlib import Path

from simulator.cli.preflight import (
    check_summary,
    require_in_key_range,
    require_master_with_tones,
    require_no_duration_with_schedule,
    require_output_file,
    require_output_folder,
    require_record_options,
    require_workers,
)
from simulator.errors import InputError
from simulator.io import jsontext
from simulator.scenario.tone_sections import detected_tone_names

EXIT_OK, EXIT_FAILED, EXIT_INPUT, EXIT_UNSTABLE = 0, 1, 2, 3


def print_json(data):
    """Print ``data`` as strict, indented JSON (non-finite numbers become null)."""
    print(jsontext.dumps(data, indent=2))


def cmd_check(args):
    """``noisechain check SCENARIO``: validate the file and report its modes."""
    from simulator.scenario.loader import load_scenario

    scenario = load_scenario(args.scenario)
    points = None
    if scenario.sweep is not None:
        from simulator.workflows.sweep import sweep_axes, sweep_points

        points = len(sweep_points(scenario, sweep_axes(scenario)))  # every value, the size
    if scenario.plan is not None:
        from simulator.workflows.plan import check_plan, coordinates_of

        check_plan(scenario)
        coordinates_of(scenario)  # every bound value
    from simulator.errors import OperatingPointError
    from simulator.model.system import System

    try:  # the checks every other verb runs on the model (the spacing of tones, ...)
        _ = System(scenario).point
    except OperatingPointError:
        pass  # a valid scenario at an unstable operating point: `inspect` says why
    modes = ", ".join(m.name for m in scenario.mechanics)
    print(f"{args.scenario}: valid scenario {scenario.scenario.name!r} "
          f"({len(scenario.mechanics)} mechanical mode(s): {modes})")
    for line in check_summary(scenario, points):
        print(f"  {line}")
    from simulator.scenario.plausibility import plausibility_warnings

    _print_warnings(args, plausibility_warnings(scenario))
    return EXIT_OK


def _print_warnings(args, messages):
    """Warnings on stderr, one line each (also with ``--quiet``, which only hides progress)."""
    for message in messages:
        print(f"noisechain {args.verb}: warning: {message}", file=sys.stderr)


def cmd_inspect(args):
    """``noisechain inspect SCENARIO [--json] [--no-feasibility]``: exit 0 if stable, 3 if not."""
    from simulator.scenario.loader import load_scenario
    from simulator.workflows.inspection import inspect_scenario

    scenario = load_scenario(args.scenario)
    if args.master:
        require_master_with_tones(scenario, "--master", args.master_model, steady_only=True)
    report = inspect_scenario(scenario, feasibility=not args.no_feasibility)
    master = None
    if args.master and report.steady is not None:
        from simulator.master.report import master_comparison

        master = master_comparison(report, kind=args.master_model)
    if args.json:
        print_json(report.to_dict() | ({"master": master} if args.master else {}))
    else:
        print(report.to_text())
        if master is not None:
            from simulator.master.report import comparison_text

            print("\n" + comparison_text(master))
        elif args.master:
            print("\nmaster equation: not run, the operating point is unstable (no "
                  "steady state to compare)")
    return EXIT_OK if report.stability.stable else EXIT_UNSTABLE


def cmd_sweep(args):
    """``noisechain sweep``: run the scenario's parameter sweep."""
    require_output_folder(args.out)
    require_workers(args)
    from simulator.scenario.loader import load_scenario
    from simulator.workflows.sweep import run_sweep

    scenario = load_scenario(args.scenario)
    dataset = run_sweep(scenario, args.out, workers=args.workers, dask=args.dask,
                        progress=not args.quiet)
    failed = int((dataset["error"] != "").sum())
    unstable = int((dataset["stable"] == 0).sum())
    summary = {"out": str(Path(args.out).resolve()), "dataset": "sweep.nc",
               "points": int(dataset["stable"].size), "unstable_points": unstable,
               "failed_points": failed, "dimensions": dict(dataset["stable"].sizes)}
    from simulator.workflows.sweep_optimum import optima_lines, sweep_optima

    summary["optima"] = sweep_optima(dataset)
    if args.json:
        print_json(summary)
    else:
        print(f"sweep of {summary['points']} points written to {summary['out']}/sweep.nc "
              f"({unstable} unstable, {failed} failed)")
        print("\n".join(optima_lines(summary["optima"])))
    return EXIT_OK


def cmd_plan(args):
    """``noisechain plan``: the best operating point; exit 3 when none is feasible."""
    require_output_file(args.plot, (".png", ".pdf", ".svg"), "--plot", args.force)
    require_workers(args)
    from simulator.scenario.loader import load_scenario
    from simulator.workflows.plan import plan_scenario

    result = plan_scenario(load_scenario(args.scenario), workers=args.workers,
                           dask=args.dask, refine=not args.no_refine)
    data = result.to_dict()
    if args.plot:
        from simulator.report.plan_plots import plot_plan

        data["plot"] = str(plot_plan(data, args.plot, overwrite=args.force))
    if args.json:
        print_json(data)
    else:
        print(result.to_text())
        if args.plot:
            print(f"  map written to {args.plot}")
    return EXIT_OK if result.feasible else EXIT_UNSTABLE


def cmd_spectrum(args):
    """``noisechain spectrum``: the spectrum at the digitiser (default) or the cavity port."""
    require_output_file(args.out, (".nc", ".csv"), "--out", args.force)
    require_output_file(args.plot, (".png", ".pdf", ".svg"), "--plot", args.force)
    from simulator.model.system import System
    from simulator.scenario.loader import load_scenario
    from simulator.workflows.spectrum import (
        compute_spectrum,
        figure_title,
        report_data,
        report_text,
    )

    scenario = load_scenario(args.scenario)
    if args.engine == "master":
        require_master_with_tones(scenario, "--engine master", args.master_model,
                                  steady_only=False)
    if args.angle_deg is not None and scenario.detection.scheme != "homodyne":
        raise InputError(f"--angle-deg {args.angle_deg:g} with detection.scheme = "
                         f"{scenario.detection.scheme!r}: expected it only for homodyne "
                         "detection (a heterodyne record holds both quadratures)")
    angle = None if args.angle_deg is None else math.radians(args.angle_deg)
    if angle is not None and not abs(angle) <= 2 * math.pi:  # nan too
        raise InputError(f"--angle-deg {args.angle_deg:g}: expected a finite angle from "
                         "-360 to 360 degrees (one turn either way)")
    system = System(scenario)  # built once: spectrum, summary and referral share it
    result = compute_spectrum(system, at=args.at, engine=args.engine,
                              master_model=args.master_model, quadrature_angle=angle)
    spectrum = result.spectrum
    files = {}
    if args.out:
        files["data"] = str(spectrum.save(args.out, overwrite=args.force))
    if args.plot:
        from simulator.report.plots import plot_spectrum, titled

        displacement = None
        if result.at == "cavity" and args.engine == "linear":
            from simulator.linear.referral import to_displacement

            displacement = to_displacement(spectrum, system)
        plot_spectrum(spectrum, args.plot, displacement=displacement, summary=result.summary,
                      title=figure_title(result, titled(scenario)),
                      overwrite=args.force)
        files["plot"] = str(args.plot)
    if args.json:
        print_json(report_data(result, files))
    else:
        print(report_text(result, files))
    return EXIT_OK


def cmd_record(args):
    """``noisechain record``: synthesise a time-domain record with its ground truth."""
    from simulator.scenario.loader import load_scenario
    from simulator.workflows.record import master_records_to_files, simulate_record

    require_output_file(args.out, (".h5", ".hdf5"), "--out", args.force)
    require_record_options(args)
    scenario = load_scenario(args.scenario)
    if args.engine == "master":
        require_master_with_tones(scenario, "--engine master", args.master_model,
                                  steady_only=False)
    require_no_duration_with_schedule(args, scenario)
    if scenario.schedule is not None and (args.averaged is not None
                                          or args.engine == "master"):
        raise InputError("a scenario with a [schedule] makes a non-stationary record with "
                         "the linear engine only; expected no --averaged and --engine "
                         "linear (or remove the [schedule])")
    if args.averaged is not None:
        return _averaged_spectrum(args, scenario)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        if args.engine == "master":
            seed = scenario.scenario.seed if args.seed is None else args.seed
            record = master_records_to_files(scenario, [seed], [args.out],
                                             duration_s=args.duration, kind=args.master_model,
                                             overwrite=args.force)[0]
        else:
            record = simulate_record(scenario, seed=args.seed, duration_s=args.duration,
                                     out=args.out, form=args.form, progress=not args.quiet,
                                     overwrite=args.force, workers=args.threads,
                                     compression="deflate" if args.compress else "none")
    _print_warnings(args, [w.message for w in caught])
    truth = record.truth
    summary = {"out": str(Path(args.out).resolve()), "samples": record.n_samples,
               "sample_rate_hz": record.sample_rate_hz, "kind": record.kind,
               "seed": record.seed, "form": record.form,
               "clipped_samples": record.clipped_samples,
               "shot_noise_per_count": record.shot_noise_per_count,
               "volts_per_count": record.volts_per_count,
               "modes": [{"name": name, "occupation": n, "effective_frequency_hz": f,
                          "effective_linewidth_hz": w}
                         for name, n, f, w in zip(truth.mode_names, truth.occupation,
                                                  truth.effective_frequency_hz,
                                                  truth.effective_linewidth_hz, strict=True)],
               "cavity_occupation": truth.cavity_occupation}
    if scenario.schedule is not None:  # the truth above is the first segment's steady state
        summary["schedule"] = [seg.name for seg in scenario.schedule.segments]
    if record.tones:  # one I/Q pair per detected tone
        summary["tones"] = list(record.tones)
    if args.json:
        print_json(summary)
        return EXIT_OK
    print(f"record of {record.n_samples} samples ({record.kind}, "
          f"{record.sample_rate_hz:.6g} samples/s, seed {record.seed}, {record.form} form) "
          f"written to {summary['out']}")
    print(f"  clipped samples: {record.clipped_samples}")
    if record.tones:
        print(f"  detected tones, one I/Q pair each: {', '.join(record.tones)}")
    if scenario.schedule is not None:
        print(f"  schedule: {', '.join(summary['schedule'])}; the truth in time is in "
              "truth/timeline, the occupations below are the first segment's steady state")
    for mode in summary["modes"]:
        print(f"  true occupation of {mode['name']}: {mode['occupation']:.6g} "
              f"(at {mode['effective_frequency_hz']:.9g} Hz, linewidth "
              f"{mode['effective_linewidth_hz']:.4g} Hz)")
    # the steady state's cavity occupation is the [drive]'s field, not the detected tone's
    whose = (" (the drive's field)" if scenario.tones and not scenario.detection
             .backaction_evading and detected_tone_names(scenario) != ("drive",) else "")
    print(f"  cavity occupation: {truth.cavity_occupation:.4g}{whose}")
    return EXIT_OK


def _averaged_spectrum(args, scenario):
    """``noisechain record --averaged N``: the averaged periodogram drawn from its law."""
    from simulator.workflows.record import simulate_averaged_spectrum

    if args.engine != "linear":
        raise InputError(f"--averaged with --engine {args.engine}: expected the linear "
                         "engine (the law is that of a stationary Gaussian record)")
    spectrum = simulate_averaged_spectrum(scenario, segment_samples=args.averaged,
                                          window=args.window or "hann", seed=args.seed,
                                          duration_s=args.duration, out=args.out,
                                          overwrite=args.force)
    summary = {"out": str(Path(args.out).resolve()), "kind": spectrum.kind,
               "samples": spectrum.n_samples, "segment_samples": spectrum.segment_samples,
               "averages": spectrum.averages, "window": spectrum.window,
               "resolution_hz": spectrum.resolution_hz, "seed": spectrum.seed,
               "occupation": dict(zip(spectrum.truth.mode_names, spectrum.truth.occupation,
                                      strict=True))}
    if spectrum.tones:  # one channel per detected tone, with the cross-spectra
        summary["tones"] = list(spectrum.tones)
    if args.json:
        print_json(summary)
        return EXIT_OK
    print(f"averaged spectrum of {spectrum.n_samples / spectrum.sample_rate_hz:.6g} s of "
          f"record ({spectrum.n_samples:.4g} samples, {spectrum.kind}, "
          f"{spectrum.averages} segments of {spectrum.segment_samples}, {spectrum.window} "
          f"window, {spectrum.resolution_hz:.6g} Hz bins, seed {spectrum.seed}) written to "
          f"{summary['out']}")
    if spectrum.tones:
        print(f"  detected tones, spectra and cross-spectra: {', '.join(spectrum.tones)}")
    for name, n in summary["occupation"].items():
        print(f"  true occupation of {name}: {n:.6g}")
    return EXIT_OK


def cmd_trial(args):
    """``noisechain trial``: an estimator on many records, against the truth."""
    require_output_folder(args.out)
    require_workers(args)
    require_in_key_range("--duration", args.duration, "record", "duration_s")
    from simulator.scenario.loader import load_scenario
    from simulator.workflows.trial import run_trials

    scenario = load_scenario(args.scenario)
    require_no_duration_with_schedule(args, scenario)
    result = run_trials(scenario, args.estimator, args.trials, args.out,
                        duration_s=args.duration, workers=args.workers, dask=args.dask,
                        progress=not args.quiet, timeout_s=args.timeout_s,
                        averaged=None if args.averaged is None else (args.averaged,
                                                                     args.window))
    if args.json:
        print_json(result.to_dict())
        return EXIT_OK
    print(f"{result.dataset.sizes['trial']} trials of {args.estimator}; "
          f"{len(result.errors)} failed; results in {result.out.resolve()}")
    if result.errors:
        print(f"  first failure (trial {result.errors[0][0]}): {result.errors[0][1]}")
    for q in result.quantities:
        truth = "no truth" if q.truth is None else f"truth {q.truth:.6g}"
        line = f"  {q.name}: mean {q.mean:.6g} ({truth}), spread {q.spread:.3g}"
        if q.bias is not None:
            line += f", bias {q.bias:+.3g}"
        if q.bias_error is not None:  # two or more trials
            line += (f" ± {q.bias_error:.2g}, pull width {q.pull_width:.3g}, "
                     f"1σ coverage {q.coverage_1sigma:.0%}")
        print(line)
        print(f"      {q.verdict}")
    print(f"open {result.out / 'report.html'} for histograms and pulls")
    if len(result.errors) == result.dataset.sizes["trial"]:
        print("noisechain trial: every trial failed; see the first failure above",
              file=sys.stderr)
        return EXIT_FAILED
    return EXIT_OK


def _print_run(result, args):
    """Summary of a run (or the demo): the files written and the report."""
    if args.json:
        print_json({"out": str(result.out.resolve()), "report": str(result.report),
                    "stable": result.stable, "files": [str(p) for p in result.files]})
        return
    print(f"outputs written to {result.out.resolve()}:")
    for path in result.files:
        print(f"  {path}")
    print(f"open {result.report} in a browser for the report")


def cmd_run(args):
    """``noisechain run``: everything the scenario asks for, into a folder with a report."""
    require_output_folder(args.out)
    require_workers(args)
    from simulator.scenario.loader import load_scenario
    from simulator.workflows.run import run_scenario

    result = run_scenario(load_scenario(args.scenario), args.out, workers=args.workers,
                          dask=args.dask, progress=not args.quiet)
    _print_run(result, args)
    return EXIT_OK if result.stable else EXIT_UNSTABLE


def cmd_demo(args):
    """``noisechain demo``: run the bundled demo scenario into a folder."""
    require_output_folder(args.out)
    require_workers(args)
    from simulator.workflows.demo import demo_scenario
    from simulator.workflows.run import run_scenario

    result = run_scenario(demo_scenario(), args.out, workers=args.workers,
                          progress=not args.quiet)
    _print_run(result, args)
    return EXIT_OK
