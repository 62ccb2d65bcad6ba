"""The points of a sweep: its swept parameters, their values checked, and the grid or zip.

:func:`sweep_axes` reads ``[sweep.parameters]`` into one :class:`Axis` per
parameter (path, the numbers as written, the values set at the path, an
optional unit parameter), each value checked by building the scenario it
makes; :func:`parameter_axes` does the same for any table of that syntax
(the planner's ``[plan.parameters]``). :func:`sweep_points` lists the points
of the grid (every combination) or of the zip (the axes side by side). The
axes also name the dimensions of the sweep's Dataset
(:mod:`simulator.workflows.sweep`).
"""

import dataclasses
import itertools
import re

from simulator.errors import ScenarioError
from simulator.scenario.sweep_section import axis_numbers, grid_size_problems


@dataclasses.dataclass(frozen=True)
class Axis:
    """One swept parameter: its path, the numbers as given and the values applied."""

    path: str
    numbers: tuple  # as written in the scenario (in units of ``unit`` if given)
    values: tuple  # what is set at the path
    unit: str  # path of the unit parameter, or ""
    log: bool = False  # logarithmically spaced range

    @property
    def name(self):
        """Dimension name safe for NetCDF, e.g. ``mechanics0_bath_temperature_k``.

        An axis in units of another parameter is named for the ratio it holds,
        e.g. ``drive_detuning_over_mechanics0_frequency`` (Δ/Ωm); the values
        set at the path are then the variable :attr:`value_name`.
        """
        if self.unit:
            return f"{_without_units(self.path)}_over_{_without_units(self.unit)}"
        return self.value_name

    @property
    def value_name(self):
        """NetCDF name of the values set at the path, e.g. ``drive_detuning_hz``."""
        return _netcdf_name(self.path)


def _netcdf_name(path):
    return re.sub(r"[^A-Za-z0-9_]", "", path.replace(".", "_"))


def _without_units(path):
    """``drive.detuning_hz`` → ``drive_detuning`` (the unit suffix dropped)."""
    return re.sub(r"_(hz|w|dbm|k|m|kg|s)$", "", _netcdf_name(path))


def sweep_axes(scenario):
    """The swept parameters of ``scenario`` with every value checked.

    Raises
    ------
    ScenarioError
        If the scenario has no ``[sweep]`` or a value would make an invalid
        scenario (the message names the path and the value).
    """
    if scenario.sweep is None:
        raise ScenarioError("the scenario has no [sweep] section; expected [sweep] with "
                            "[sweep.parameters] to run a sweep", source=scenario.source,
                            key="sweep")
    return parameter_axes(scenario, scenario.sweep.parameters, "sweep")


def parameter_axes(scenario, parameters, section):
    """:class:`Axis` per entry of a ``[sweep.parameters]``-style table, values checked.

    ``section`` (``"sweep"`` or ``"plan"``) names the table in error messages.
    """
    base = dataclasses.replace(scenario, sweep=None, plan=None)
    axes = []
    for path, spec in parameters.items():
        numbers = axis_numbers(spec)
        unit = spec.get("unit", "") if not isinstance(spec, tuple) else ""
        scale = float(base.get(unit)) if unit else 1.0
        values = [x * scale if unit else x for x in numbers]
        for v in dict.fromkeys(values):  # each distinct value once, in order
            try:
                base.replace(path, v)
            except ScenarioError as exc:
                hint = (f"; a level in dBm? vary {path[:-2] + '_dbm'!r} instead"
                        if path.endswith("power_w") and v < 0 else "")
                raise ScenarioError(f"{'swept' if section == 'sweep' else 'bound'} value "
                                    f"{v!r} is invalid: {exc.detail}{hint}",
                                    source=scenario.source,
                                    key=f'{section}.parameters."{path}"') from None
        log = not isinstance(spec, tuple) and bool(spec.get("log", False))
        axes.append(Axis(path=path, numbers=tuple(numbers), values=tuple(values), unit=unit,
                         log=log))
    return tuple(axes)


def sweep_points(scenario, axes=None):
    """Every point as ``(index, assignments)``; index is a tuple per grid axis.

    For ``combine = "zip"`` the index has one entry, the point number.
    """
    axes = sweep_axes(scenario) if axes is None else axes
    for key, message in (grid_size_problems(scenario.sweep.parameters)
                         if scenario.sweep.combine == "grid" else ()):
        raise ScenarioError(message, source=scenario.source, key=f"sweep.{key}")
    if scenario.sweep.combine == "zip":
        return [((i,), tuple((a.path, a.values[i]) for a in axes))
                for i in range(len(axes[0].values))]
    ranges = [range(len(a.values)) for a in axes]
    return [(idx, tuple((a.path, a.values[i]) for a, i in zip(axes, idx, strict=True)))
            for idx in itertools.product(*ranges)]
