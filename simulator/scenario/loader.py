"""Scenario: the device, drive and detection, loaded from TOML into frozen values.

A scenario file has one table per section (``[drive]``, ``[cavity]``, ...) and
one ``[[mechanics]]`` table per mechanical mode. Keys carry their unit as a
suffix and every frequency is an ordinary frequency in Hz. Loading checks
every key and value and raises :class:`~simulator.errors.ScenarioError` with
the file, the key path, the value and what was expected.

A :class:`Scenario` is immutable; :meth:`Scenario.replace` derives a new one
from a parameter path such as ``"mechanics[0].bath_temperature_k"``.
"""

import dataclasses
import difflib
import tomllib
from collections.abc import Mapping
from pathlib import Path

from simulator.errors import ScenarioError
from simulator.scenario import pair_paths, schema, units
from simulator.scenario.cross_checks import chain_problems, varied_path_problems
from simulator.scenario.local_oscillator import local_oscillator_problems
from simulator.scenario.paths import (
    assign,
    join,
    leaf_paths,
    objects_along,
    resolve_names,
    split_path,
)
from simulator.scenario.plan_section import Plan
from simulator.scenario.receiver import receiver_problems
from simulator.scenario.schedule_section import Schedule, segment_problems
from simulator.scenario.schema import (
    optional_section,
    optional_sections,
    required_section,
    section,
)
from simulator.scenario.sections import (  # noqa: F401 - re-exported for users of the loader
    CalibrationTone,
    Cavity,
    Detection,
    Digitizer,
    Drive,
    Electronics,
    IntensityNoise,
    Mechanics,
    PhaseNoise,
    RecordOptions,
    ScenarioInfo,
)
from simulator.scenario.sweep_section import Sweep
from simulator.scenario.tone_sections import (
    CavityMode,
    Coupling,
    Tone,
    pair_problems,
    tone_problems,
)

_frozen = dataclasses.dataclass(frozen=True, kw_only=True)

# A scenario is a few kB of text; a sweep listing its values may reach hundreds of
# kB. Anything beyond this is not a scenario (a record, an image, a device file),
# and reading it whole could exhaust the memory.
MAX_SCENARIO_BYTES = 16 * 2**20


@_frozen
class Scenario:
    """A complete, validated scenario. Build with :func:`load_scenario`."""

    scenario: ScenarioInfo = required_section("what this scenario is")
    drive: Drive = required_section("the coherent drive at the cavity input")
    cavity: Cavity = required_section("the optical or microwave mode")
    mechanics: tuple[Mechanics, ...] = required_section(
        "one table per mechanical mode")
    cavity_modes: tuple[CavityMode, ...] = optional_sections(
        "further cavity modes beside [cavity], one table each (see "
        "simulator.scenario.tone_sections)")
    tones: tuple[Tone, ...] = optional_sections(
        "further drive tones beside [drive], one table each, on any cavity mode")
    couplings: tuple[Coupling, ...] = optional_sections(
        "single-photon couplings of the [[cavity_modes]] to the mechanical modes, one "
        "table per coupled pair")
    detection: Detection = section(Detection, "how the output field is measured")
    electronics: Electronics = section(
        Electronics, "amplifier and photocurrent electronics before the digitiser")
    digitizer: Digitizer = section(Digitizer, "the analogue-to-digital converter")
    record: RecordOptions = section(RecordOptions, "the synthetic time-domain record")
    sweep: Sweep | None = optional_section(
        "parameters to vary, for `noisechain sweep` (see simulator.scenario.sweep_section)")
    plan: Plan | None = optional_section(
        "free parameters, objective and constraints of the best operating point, for "
        "`noisechain plan` (see simulator.scenario.plan_section)")
    schedule: Schedule | None = optional_section(
        "segments of a record in time, each with its own parameters: ring-downs, heating "
        "and cooling transients, stepped drives (see simulator.scenario.schedule_section)")
    source: str = dataclasses.field(default="<memory>", compare=False,
                                    metadata={"internal": True})

    def problems(self):
        """Cross-field checks: yields ``(key, message)`` for each inconsistency."""
        seen = set()
        for i, mode in enumerate(self.mechanics):
            if mode.name in seen:
                yield (f"mechanics[{i}].name",
                       f"{mode.name!r} is used by an earlier mode; expected unique names")
            seen.add(mode.name)
        yield from tone_problems(self)
        yield from pair_problems(self)
        yield from chain_problems(self)
        yield from local_oscillator_problems(self)
        yield from receiver_problems(self)
        yield from segment_problems(self)
        for name in ("sweep", "plan"):
            varied = getattr(self, name)
            for path, spec in varied.parameters.items() if varied is not None else ():
                for p in (path, *([spec["unit"]] if "unit" in spec else [])):
                    yield from varied_path_problems(self, p, path, name)
        if self.plan is not None and self.plan.mode >= len(self.mechanics):
            yield ("plan.mode", f"{self.plan.mode!r} names no mode; expected an index "
                   f"below {len(self.mechanics)}, the number of [[mechanics]] tables")

    def parameter_paths(self):
        """Every path naming a single parameter, e.g. ``"mechanics[0].frequency_hz"``."""
        paths = []
        for f in schema.public_fields(type(self)):
            kind, cls, _ = schema.field_kind(type(self), f.name)
            if f.name in ("sweep", "plan", "schedule") or kind == "scalar":
                continue
            prefixes = ([f"{f.name}[{i}]" for i in range(len(getattr(self, f.name)))]
                        if kind == "sections" else [f.name])
            for prefix in prefixes:
                paths += leaf_paths(cls, prefix)
        return paths

    def _canonical(self, path):
        return units.alias_path(type(self), resolve_names(self, path), self.source)

    def to_dict(self):
        """The scenario as nested plain data, as it would appear in TOML."""
        return _as_data(self)

    def to_toml(self):
        """The full scenario as TOML text (embedded in every output file)."""
        import tomli_w

        return tomli_w.dumps(self.to_dict())

    def get(self, path):
        """Value at a parameter path such as ``"mechanics[0].frequency_hz"``.

        A power may be asked for in dBm: ``"drive.power_dbm"``. A back-action-evading
        pair has its own paths (``"pair.power_w"``; :mod:`simulator.scenario.pair_paths`).
        """
        if pair_paths.is_pair_path(path):
            return pair_paths.get(self, path)
        canonical, alias = self._canonical(path)
        if alias:
            return units.dbm_from_watts(self.get(canonical))
        path = canonical  # an entry named in place of its index: tones.probe.power_w
        node = self
        for name, index in split_path(path, self.source):
            try:
                node = getattr(node, name)
                if index is not None:
                    node = node[index]
            except (AttributeError, IndexError, TypeError):
                raise ScenarioError(f"no parameter at path {path!r}",
                                    source=self.source, key=path) from None
        return node

    def replace(self, path, value):
        """New scenario with the parameter at ``path`` set to ``value``, re-validated.

        Setting one of two exclusive or alternative keys (for example
        ``bath_temperature_k``) clears the other one. A power may be set in
        dBm (``"drive.power_dbm"``); a pair's paths are :mod:`simulator.scenario.pair_paths`.
        """
        if pair_paths.is_pair_path(path):
            try:
                return scenario_from_dict(pair_paths.replaced_data(self, path, value),
                                          source=self.source)
            except ScenarioError as exc:
                if exc.key == path:
                    raise
                raise pair_paths.restated(exc, path, value) from None
        canonical, alias = self._canonical(path)
        if alias:
            watts = units.watts_from_dbm(units.dbm_value(value, path, self.source))
            try:
                return self.replace(canonical, watts)
            except ScenarioError as exc:
                raise ScenarioError(f"{value!r} dBm is {watts:.6g} W; {exc.detail}",
                                    source=self.source, key=path) from None
        path = canonical  # an entry named in place of its index: tones.probe.power_w
        parts = split_path(path, self.source)
        chain = objects_along(self, parts)
        if chain is not None:
            # a plain key: check it, rebuild the objects above it and run their
            # cross-field checks; the rest is valid already (same checks as a reload)
            leaf, owner = parts[-1][0], chain[-1]
            f = next(f for f in schema.public_fields(type(owner)) if f.name == leaf)
            _, tp, _ = schema.field_kind(type(owner), leaf)
            changes = {leaf: _scalar(f, tp, value, path, self.source)}
            for group in schema.alternative_groups(type(owner)):
                changes.update({k: type(owner).__dataclass_fields__[k].default
                                for k in group if k != leaf and leaf in group})
            new = dataclasses.replace(owner, **changes)
            for depth in range(len(parts) - 1, -1, -1):
                _require_no_problems(new, ".".join(join(parts[:depth])), self.source)
                if depth:
                    name, index = parts[depth - 1]
                    parent = chain[depth - 1]
                    if index is not None:
                        items = getattr(parent, name)
                        new = items[:index] + (new,) + items[index + 1:]
                    new = dataclasses.replace(parent, **{name: new})
            return new
        data = self.to_dict()
        assign(data, self, parts, value, path, self.source)
        return scenario_from_dict(data, source=self.source)


def _as_data(obj):
    """Plain data of ``obj``; a table nested in a section is left out while at its defaults."""
    if dataclasses.is_dataclass(obj):
        out = {}
        nested = not isinstance(obj, Scenario)
        for f in schema.public_fields(type(obj)):
            value = getattr(obj, f.name)
            if value is None or value == () or (nested and dataclasses.is_dataclass(value)
                                                and value == type(value)()):
                continue
            out[f.name] = _as_data(value)
        return out
    if isinstance(obj, tuple):
        return [_as_data(v) for v in obj]
    if isinstance(obj, Mapping):
        return {k: _as_data(v) for k, v in obj.items()}
    return obj


def load_scenario(path):
    """Load and validate a scenario file.

    Parameters
    ----------
    path : str or pathlib.Path
        TOML file.

    Returns
    -------
    Scenario

    Raises
    ------
    ScenarioError
        If the file is missing, malformed or describes an invalid scenario.
    """
    path = Path(path)
    if path.is_dir():
        raise ScenarioError("is a folder; expected a scenario TOML file", source=str(path))
    try:
        with path.open("rb") as f:  # bounded: a device file such as /dev/zero never ends
            raw = f.read(MAX_SCENARIO_BYTES + 1)
    except FileNotFoundError:
        raise ScenarioError("file not found; expected a scenario TOML file",
                            source=str(path)) from None
    except OSError as exc:
        raise ScenarioError(f"cannot read the file ({exc})", source=str(path)) from None
    if len(raw) > MAX_SCENARIO_BYTES:
        raise ScenarioError(f"the file is larger than {MAX_SCENARIO_BYTES // 2**20} MiB; "
                            "expected a scenario TOML file (a few kB of text)",
                            source=str(path))
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ScenarioError(f"cannot read the file as text: byte {raw[exc.start]:#04x} at "
                            f"offset {exc.start} is not UTF-8; expected a scenario TOML "
                            "file (UTF-8 text)",
                            source=str(path)) from None
    return parse_scenario(text.removeprefix("\ufeff"), source=str(path))  # byte-order mark


def parse_scenario(text, *, source="<string>"):
    """Validate a scenario given as TOML text; see :func:`load_scenario`."""
    if not text.strip():
        raise ScenarioError("the file is empty; expected a scenario TOML file with "
                            "[scenario], [drive], [cavity] and [[mechanics]] tables",
                            source=source)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ScenarioError(f"malformed TOML: {exc}", source=source) from None
    except RecursionError:  # the TOML parser recurses once per level of nesting
        raise ScenarioError("malformed TOML: tables or arrays nested too deeply for the "
                            "parser; expected the sections of a scenario, nested at most "
                            "a few levels", source=source) from None
    return scenario_from_dict(data, source=source)


def scenario_from_dict(data, *, source="<memory>"):
    """Validate nested plain data (as parsed from TOML) into a :class:`Scenario`."""
    built = _build(Scenario, data, "", source)
    return dataclasses.replace(built, source=source)


def _build(cls, data, path, source):
    label = f"[{path}]" if path else "the top level"
    if not isinstance(data, dict):
        raise ScenarioError(f"{data!r} is not a table; expected a TOML table",
                            source=source, key=path or None)
    fields = {f.name: f for f in schema.public_fields(cls)}
    data, aliases = units.resolve_aliases(cls, data, path, source)
    for key in data:
        if key not in fields:
            slip = units.unit_slip(cls, key, data[key])
            if slip:
                raise ScenarioError(f"unknown key {key!r} in {label}; {slip}",
                                    source=source, key=_key(path, key))
            close = difflib.get_close_matches(key, [*fields, *units.dbm_keys(cls)], n=1,
                                              cutoff=0.5)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            valid = ", ".join(fields)
            raise ScenarioError(f"unknown key {key!r} in {label}{hint} "
                                f"(valid keys: {valid})",
                                source=source, key=_key(path, key))
    values = {}
    for name, f in fields.items():
        key = _key(path, name)
        kind, tp, optional = schema.field_kind(cls, name)
        if name not in data:
            if f.default is dataclasses.MISSING and f.default_factory is dataclasses.MISSING:
                what = "table" if kind == "section" else (
                    "array of tables" if kind == "sections" else "key")
                accepts = ("" if kind != "scalar"
                           else f" as {schema.expectation(f, tp)}")
                if f.metadata.get("unit") == "W":
                    accepts += f", or {name.removesuffix('_w')}{units.DBM} in dBm"
                raise ScenarioError(f"missing required {what} {name!r} in {label}; "
                                    f"expected {f.metadata.get('doc', name)}{accepts}",
                                    source=source, key=key)
            continue
        value = data[name]
        if kind == "section":
            values[name] = _build(tp, value, key, source)
        elif kind == "sections":
            if not isinstance(value, list) or not value:
                raise ScenarioError(f"expected one or more [[{name}]] tables, got {value!r}",
                                    source=source, key=key)
            values[name] = tuple(_build(tp, item, f"{key}[{i}]", source)
                                 for i, item in enumerate(value))
        else:
            if f.metadata.get("parser"):
                values[name] = f.metadata["parser"](value, key, source)
                continue
            try:
                values[name] = _scalar(f, tp, value, key, source)
            except ScenarioError as exc:
                if name not in aliases:
                    raise
                raise units.given_in_dbm(exc, data[name], aliases[name], path) from None
    for group in getattr(cls, "EXCLUSIVE", ()):
        given = [k for k in group if k in values and values[k] is not None]
        if len(given) != 1:
            found = ("none" if not given else "both: " + ", ".join(
                f"{k} = {values[k]!r}" for k in given))
            raise ScenarioError(f"give exactly one of {' or '.join(group)} in {label}; "
                                f"found {found}", source=source, key=_key(path, group[0]))
    obj = cls(**values)
    try:
        _require_no_problems(obj, path, source)
    except ScenarioError as exc:
        leaf = (exc.key or "").rpartition(".")[2]
        if leaf not in aliases:
            raise
        raise units.given_in_dbm(exc, data[leaf], aliases[leaf], path) from None
    return obj


def _scalar(f, tp, value, key, source):
    """``value`` converted to the type of field ``f``, or the error naming ``key``."""
    ok, converted = schema.convert_scalar(value, tp)
    if not ok:
        raise ScenarioError(f"{value!r} has the wrong type ({type(value).__name__}); "
                            f"expected {schema.expectation(f, tp)}", source=source, key=key)
    problem = schema.range_problem(f, tp, converted)
    if problem:
        raise ScenarioError(problem, source=source, key=key)
    return converted


def _require_no_problems(obj, path, source):
    """Raise the first cross-field problem of a built section (or scenario), if any."""
    for key, message in getattr(obj, "problems", lambda: ())():
        raise ScenarioError(message, source=source, key=_key(path, key))


def _key(path, name):
    return f"{path}.{name}" if path else name
