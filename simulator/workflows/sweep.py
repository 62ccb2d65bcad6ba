"""Sweeps: evaluate a scenario over a grid (or zip) of parameter values.

Each point is an independent scenario derived from the base one by parameter
paths (nothing is mutated). A point is evaluated by :func:`evaluate_point`,
a pure function of the scenario text and the point's values, so the results
are bit for bit the same whichever executor runs it and however many workers
there are. Finished points are stored one file each, atomically, under
``OUT/points/``; an interrupted sweep rerun with the same output folder skips
them, and a folder holding a different scenario is refused. The assembled
result is one :class:`xarray.Dataset` with a dimension per swept parameter
(``grid``) or one ``point`` dimension (``zip``), saved as NetCDF.
"""

import dataclasses
import functools
from pathlib import Path

import numpy as np

from simulator.io.files import OutputError, write_netcdf
from simulator.workflows import tasks
from simulator.workflows.sweep_grid import (  # noqa: F401 (part of this module's API)
    Axis,
    parameter_axes,
    sweep_axes,
    sweep_points,
)

FORMAT = "noisechain-sweep"
FORMAT_VERSION = 2  # 2: a unit axis is named for the ratio it holds

# Per-point scalar results, with units (NaN where the point has no steady state).
POINT_QUANTITIES = {
    "photon_number": "",
    "branch_count": "",
    "bistable": "",
    "stable": "",
    "growth_rate_hz": "Hz",
    "detuning_effective_hz": "Hz",
    "cavity_occupation": "",
}
# Per-point, per-mode results.
MODE_QUANTITIES = {
    "occupation": "",
    "weak_coupling_occupation": "",
    "bath_occupation": "",
    "g_hz": "Hz",
    "cooperativity": "",
    "optical_damping_hz": "Hz",
    "optical_spring_hz": "Hz",
    "effective_frequency_hz": "Hz",
    "effective_linewidth_hz": "Hz",
    "sideband_ratio": "",
    "occupation_from_ratio": "",
    "asymmetry_time_s": "s",
}
# Per-point, per-mode results that exist only for some scenarios: name → (units,
# description). The joint bound of the tones recorded together when the scenario has
# [[tones]] recorded by an iq or homodyne receiver (the tones of the planner's
# recorded_tones_time); a back-action-evading pair's own quantities when it declares one.
# A scenario without them has no such variables (not NaN-filled ones).
TONE_QUANTITIES = {
    "recorded_tones_time_s": ("s", "joint Whittle bound: time for the tones recorded "
                              "together to tell the sideband ratio n/(n+1) from 1 at 5 "
                              "standard deviations (simulator.analysis.joint_feasibility)"),
    "recorded_tones_error_1s": ("", "Cramér–Rao error of the occupation after 1 s of the "
                                "tones recorded together (joint Whittle bound)"),
}
PAIR_QUANTITIES = {
    "thermal_variance_error_1s": ("", "back-action-evading pair: Cramér–Rao error of the "
                                  "bath occupation n_th, and so of X1's thermal variance "
                                  "n_th + 1/2, after 1 s of the record, n_th the only "
                                  "unknown (simulator.analysis.bae_feasibility)"),
    "x2_backaction_heating": ("", "back-action-evading pair: variance the cavity's noise "
                              "drives into the conjugate quadrature X2, in quanta"),
    "x1_counter_rotating": ("", "back-action-evading pair: variance the counter-rotating "
                            "terms, of relative size (kappa/4 Omega_m)^2, add to the "
                            "measured quadrature X1, in quanta"),
}


@functools.lru_cache(maxsize=8)
def _base_from_text(text):
    from simulator.scenario.loader import parse_scenario

    return dataclasses.replace(parse_scenario(text, source="<sweep>"), sweep=None)


def evaluate_point(scenario_text, assignments, outputs=None):
    """Evaluate one sweep point: operating point, stability, steady state.

    Parameters
    ----------
    scenario_text : str
        The base scenario as TOML (its ``[sweep]`` is ignored).
    assignments : sequence of (path, value)
    outputs : PointOutputs, optional
        Where and whether to write this point's record and spectrum files.

    Returns
    -------
    dict
        ``POINT_QUANTITIES`` and ``MODE_QUANTITIES`` (lists per mode) as plain
        floats, and ``error``: empty, or the message of an error raised by this
        point (the sweep records it and goes on).
    """
    from simulator.workflows.inspection import inspect_scenario

    nan = float("nan")
    result = {k: nan for k in POINT_QUANTITIES}
    try:
        scenario = _base_from_text(scenario_text)
        n_modes = len(scenario.mechanics)
        result.update({k: [nan] * n_modes for k in MODE_QUANTITIES})
        for path, value in assignments:
            scenario = scenario.replace(path, value)
        report = inspect_scenario(scenario, feasibility=False).to_dict()
    except Exception as exc:  # noqa: BLE001 - one failing point must not stop a sweep
        result["error"] = f"{type(exc).__name__}: {exc}"
        return result
    result["photon_number"] = report["photon_number"]
    result["branch_count"] = len(report["photon_number_branches"])
    result["bistable"] = float(report["bistable"])
    result["stable"] = float(report["stable"])
    result["growth_rate_hz"] = report["growth_rate_hz"]
    result["detuning_effective_hz"] = report["detuning_effective_hz"]
    if report["cavity_occupation"] is not None:
        result["cavity_occupation"] = report["cavity_occupation"]
    for k in MODE_QUANTITIES:
        result[k] = [nan if m.get(k) is None else float(m[k]) for m in report["modes"]]
    result["files"] = []
    try:
        if report["stable"]:
            _add_sidebands(scenario, result)
            _add_scheme_quantities(scenario, result)
            if outputs is not None:
                result["files"] = outputs.write(scenario)
    except OutputError:
        raise  # a full disk is not a property of the point: stop the sweep, keep what is done
    except Exception as exc:  # noqa: BLE001 - recorded with the point
        result["error"] = f"{type(exc).__name__}: {exc}"
        return result
    result["error"] = ""
    return result


@dataclasses.dataclass(frozen=True)
class PointOutputs:
    """The files a sweep point writes beside the dataset (records, spectra)."""

    folder: str
    key: str
    seed: int
    records: bool
    spectra: bool

    def write(self, scenario):
        """Write the requested files for ``scenario``; return their paths relative to the folder."""
        written = []
        if self.records:
            import warnings

            from simulator.workflows.record import simulate_record

            path = Path(self.folder) / "records" / f"{self.key}.h5"
            path.parent.mkdir(parents=True, exist_ok=True)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")  # clipping is counted in the file
                simulate_record(scenario, seed=self.seed, out=path, overwrite=True)
            written.append(f"records/{self.key}.h5")
        if self.spectra:  # at the cavity port: milliseconds a point (the digitiser's takes ~1 s)
            from simulator.linear.spectra import measured_spectrum

            path = Path(self.folder) / "spectra" / f"{self.key}.nc"
            path.parent.mkdir(parents=True, exist_ok=True)
            measured_spectrum(scenario).save(path, overwrite=True)
            written.append(f"spectra/{self.key}.nc")
        return written


def _add_sidebands(scenario, result):
    """Sideband ratio, the occupation it implies, and the asymmetry integration time."""
    from simulator.analysis.feasibility import ASYMMETRY_SIGNIFICANCE, asymmetry_time
    from simulator.linear.sidebands import sideband_summary
    from simulator.model.system import System

    if scenario.detection.backaction_evading:
        return  # one quadrature measured: no sideband pair, the three stay NaN
    system = System(scenario)  # built once for the summary and every mode's bound
    for j, s in enumerate(sideband_summary(system)):
        result["sideband_ratio"][j] = s.ratio
        result["occupation_from_ratio"][j] = s.occupation_from_ratio
        if scenario.detection.scheme == "heterodyne":
            result["asymmetry_time_s"][j] = asymmetry_time(
                system, j, ASYMMETRY_SIGNIFICANCE).duration_s


def scheme_quantities(scenario):
    """The entries of :data:`TONE_QUANTITIES` or :data:`PAIR_QUANTITIES` that
    ``scenario`` has (an empty dict for one drive tone)."""
    from simulator.analysis.joint_feasibility import detected_tone_sets

    if scenario.detection.backaction_evading:
        return PAIR_QUANTITIES
    return TONE_QUANTITIES if detected_tone_sets(scenario) else {}


def _add_scheme_quantities(scenario, result):
    """The joint bound of the recorded tones, or a pair's resolution and quadratures."""
    from simulator.model.system import System

    names = scheme_quantities(scenario)
    if not names:
        return
    system = System(scenario)
    result.update({k: [float("nan")] * len(scenario.mechanics) for k in names})
    if names is PAIR_QUANTITIES:
        from simulator.analysis.bae_feasibility import bath_error_one_second, pair_quantities

        result["thermal_variance_error_1s"][0] = bath_error_one_second(system, 0)
        for name, value in pair_quantities(system).items():
            result[name][0] = value
        return
    from simulator.analysis.joint_feasibility import detected_tone_sets, joint_bound

    tones = detected_tone_sets(scenario)[-1]  # all of them together, as the planner's
    for j in range(len(scenario.mechanics)):
        bound = joint_bound(system, tones, j)
        result["recorded_tones_time_s"][j] = bound.duration_s
        result["recorded_tones_error_1s"][j] = bound.error_one_second


def _point_task(common, payload):
    # evaluate_point is looked up at call time so that tests can substitute it
    scenario_text, folder, records, spectra = common
    assignments, key, seed = payload
    outputs = PointOutputs(folder, key, seed, records, spectra) if records or spectra else None
    return evaluate_point(scenario_text, assignments, outputs)


def _point_key(index):
    return "-".join(f"{i:05d}" for i in index)


def run_sweep(scenario, out, *, workers=None, dask=None, progress=True):
    """Run (or resume) the sweep of ``scenario``, storing results under ``out``.

    Parameters
    ----------
    scenario : Scenario
        With a ``[sweep]`` section.
    out : path
        Output folder: ``sweep.json`` (manifest), ``points/`` (one JSON file
        per finished point) and ``sweep.nc`` (the assembled Dataset).
    workers : int, optional
        Local worker processes (default: all cores); 1 runs in this process.
    dask : str, optional
        ``"local"`` for a Dask LocalCluster, or a scheduler address
        ``tcp://host:port``; overrides ``workers``.
    progress : bool
        Show a progress bar with rate and time remaining.

    Returns
    -------
    xarray.Dataset
    """
    out = Path(out)
    text = scenario.to_toml()
    axes = sweep_axes(scenario)
    points = sweep_points(scenario, axes)
    with tasks.claim_folder(out, "sweep.json", {
            "format": FORMAT, "format_version": FORMAT_VERSION,
            "sha256": tasks.digest(text), "scenario_toml": text}, "sweep"):
        seeds = np.random.SeedSequence(scenario.scenario.seed).spawn(len(points))
        common = (text, str(out.resolve()), scenario.sweep.records, scenario.sweep.spectra)
        results = tasks.run_tasks(out / "points", _point_task, common,
                                  [(_point_key(index), (a, _point_key(index),
                                                        int(seed.generate_state(1)[0])))
                                   for (index, a), seed in zip(points, seeds, strict=True)],
                                  workers=workers, dask=dask, progress=progress, desc="sweep",
                                  unit="pt", keep=functools.partial(
                                      point_is_whole, len(scenario.mechanics)))
        dataset = assemble(scenario, axes, points, results)
        from simulator.workflows.sweep_optimum import optima_json

        dataset.attrs["optima"] = optima_json(dataset)  # best point per figure of merit
        write_dataset(dataset, out / "sweep.nc")
    return dataset


def point_is_whole(n_modes, result):
    """Whether a point's stored result has the layout :func:`evaluate_point` writes.

    A point file edited or damaged into other valid JSON (a list, a text where a
    number belongs, a mode list of the wrong length) is computed again, like a
    file that no longer parses, rather than assembled into the dataset or
    failing the whole sweep as if the scenario were at fault.
    """
    def number(x):
        return x is None or (isinstance(x, (int, float)) and not isinstance(x, bool))

    if not isinstance(result, dict) or not isinstance(result.get("error"), str):
        return False
    return (all(number(result[k]) for k in POINT_QUANTITIES if k in result)
            and all(isinstance(result[k], list) and len(result[k]) == n_modes
                    and all(map(number, result[k])) for k in MODE_QUANTITIES if k in result)
            and all(isinstance(f, str) for f in result.get("files", [])))


def assemble(scenario, axes, points, results):
    """Build the sweep Dataset from per-point results (dimension per swept axis)."""
    import xarray as xr

    from simulator import __version__

    modes = [m.name for m in scenario.mechanics]
    if scenario.sweep.combine == "zip":
        shape, dims = (len(points),), ("point",)
        coords = {"point": np.arange(len(points))}
        for a in axes:
            coords[a.name] = ("point", np.asarray(a.numbers), _axis_attrs(a))
    else:
        shape = tuple(len(a.values) for a in axes)
        dims = tuple(a.name for a in axes)
        coords = {a.name: (a.name, np.asarray(a.numbers), _axis_attrs(a)) for a in axes}
    coords["mode"] = np.asarray(modes, dtype=object)
    data = {k: np.full(shape, np.nan) for k in POINT_QUANTITIES}
    extra = scheme_quantities(scenario)
    data.update({k: np.full(shape + (len(modes),), np.nan) for k in (*MODE_QUANTITIES,
                                                                     *extra)})
    errors = np.full(shape, "", dtype=object)
    files = np.full(shape, "", dtype=object)
    for index, _ in points:
        r = results[_point_key(index)]
        for k in POINT_QUANTITIES:
            data[k][index] = r.get(k, np.nan)  # absent when the point failed early
        for k in (*MODE_QUANTITIES, *extra):
            data[k][index] = r.get(k, np.nan)  # absent when the point failed early
        errors[index] = r["error"]
        files[index] = " ".join(r.get("files", []))
    variables = {k: (dims, v, {"units": POINT_QUANTITIES[k]}) for k, v in
                 ((k, data[k]) for k in POINT_QUANTITIES)}
    variables.update({k: (dims + ("mode",), data[k], {"units": MODE_QUANTITIES[k]})
                      for k in MODE_QUANTITIES})
    variables.update({k: (dims + ("mode",), data[k], {"units": units, "description": words})
                      for k, (units, words) in extra.items()})
    variables["error"] = (dims, errors.astype(str), {"long_name": "error raised at the point"})
    if scenario.sweep.records or scenario.sweep.spectra:
        variables["files"] = (dims, files.astype(str),
                              {"long_name": "files written for the point, relative to the "
                                            "sweep folder"})
    for a in axes:
        if a.unit:
            values = np.asarray(a.values)
            attrs = {"path": a.path, "units": _axis_attrs(
                dataclasses.replace(a, unit=""))["units"]}
            dim = a.name if scenario.sweep.combine == "grid" else "point"
            coords[a.value_name] = (dim, values, attrs)
    attrs = {"format": FORMAT, "format_version": FORMAT_VERSION,
             "scenario_toml": scenario.to_toml(), "combine": scenario.sweep.combine,
             "software_version": __version__, "scenario_name": scenario.scenario.name}
    return xr.Dataset(variables, coords=coords, attrs=attrs)


def _axis_attrs(axis):
    attrs = {"path": axis.path, "spacing": "log" if axis.log else "linear"}
    if axis.unit:
        attrs["units"] = f"in units of {axis.unit}"
    else:
        suffix = axis.path.rsplit("_", 1)[-1]
        attrs["units"] = {"hz": "Hz", "w": "W", "dbm": "dBm", "k": "K", "m": "m", "kg": "kg",
                          "s": "s"}.get(suffix, "")
    return attrs


def write_dataset(dataset, path, *, overwrite=True):
    """Write a sweep or trial Dataset with :func:`simulator.io.files.write_netcdf`.

    ``overwrite`` defaults to true: the sweep and trial folders own their
    datasets (the folder lock and manifest make sure of it).
    """
    ds = dataset.copy()
    if "mode" in ds.coords:
        ds = ds.assign_coords(mode=ds["mode"].values.astype(str))
    write_netcdf(ds, path, overwrite=overwrite)
