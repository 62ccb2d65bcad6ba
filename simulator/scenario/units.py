"""Units at the edge of a scenario file: powers in dBm, and keys in scaled units.

Every key that holds a power in watts, ``<name>_w`` (``drive.power_w``,
``detection.local_oscillator_power_w``, any ``*_power_w``), may be written as
``<name>_dbm`` instead, the unit microwave laboratories quote:

    P[W] = 1 mW · 10^(P[dBm]/10)

(the definition of dBm: decibels relative to one milliwatt; Pozar, Microwave
Engineering, 4th ed., Wiley (2012), its conventions for decibels; the
chapter is not cited, from memory). The loader turns the dBm key into its watt
key before any check, so a scenario holds watts only; ``Scenario.get`` and
``Scenario.replace`` (and with them sweeps) accept the dBm path too.

A key written with a scaled unit (``bath_temperature_mk``, ``frequency_mhz``,
``power_mw``) is refused with the conversion spelt out: the name of the SI key
and the value it should hold.
"""

import math

from simulator.errors import ScenarioError
from simulator.scenario import schema
from simulator.scenario.paths import join, split_path

MILLIWATT = 1e-3  # the reference of dBm
DBM = "_dbm"

# Scaled unit suffixes a user may write, lower case: (SI suffix, factor to SI, symbol).
# Lower-case "mhz" reads as megahertz (the common slip); "mHz" exactly is millihertz.
SCALED = {
    "thz": ("hz", 1e12, "THz"), "ghz": ("hz", 1e9, "GHz"), "mhz": ("hz", 1e6, "MHz"),
    "khz": ("hz", 1e3, "kHz"),
    "kw": ("w", 1e3, "kW"), "mw": ("w", 1e-3, "mW"), "uw": ("w", 1e-6, "µW"),
    "nw": ("w", 1e-9, "nW"), "pw": ("w", 1e-12, "pW"), "fw": ("w", 1e-15, "fW"),
    "mk": ("k", 1e-3, "mK"), "uk": ("k", 1e-6, "µK"),
    "km": ("m", 1e3, "km"), "cm": ("m", 1e-2, "cm"), "mm": ("m", 1e-3, "mm"),
    "um": ("m", 1e-6, "µm"), "nm": ("m", 1e-9, "nm"), "pm": ("m", 1e-12, "pm"),
    "ms": ("s", 1e-3, "ms"), "us": ("s", 1e-6, "µs"), "ns": ("s", 1e-9, "ns"),
    "ps": ("s", 1e-12, "ps"),
    "g": ("kg", 1e-3, "g"), "mg": ("kg", 1e-6, "mg"), "ug": ("kg", 1e-9, "µg"),
    "ng": ("kg", 1e-12, "ng"), "pg": ("kg", 1e-15, "pg"), "fg": ("kg", 1e-18, "fg"),
    "mv": ("v", 1e-3, "mV"), "uv": ("v", 1e-6, "µV"), "kv": ("v", 1e3, "kV"),
    "kohm": ("ohm", 1e3, "kΩ"), "mohm": ("ohm", 1e6, "MΩ"),
    "deg": ("rad", math.pi / 180, "degrees"), "mrad": ("rad", 1e-3, "mrad"),
}
EXACT_CASE = {"mHz": ("hz", 1e-3, "mHz"), "MW": ("w", 1e6, "MW")}
SI_NAMES = {"hz": "Hz", "w": "W", "k": "kelvin", "m": "metres", "s": "seconds",
            "kg": "kilograms", "v": "volts", "ohm": "ohms", "rad": "radians"}


def watts_from_dbm(dbm):
    """Power in W of ``dbm`` (dBm): 1 mW · 10^(dBm/10); an overflow gives infinity."""
    try:
        return MILLIWATT * 10.0 ** (float(dbm) / 10.0)
    except OverflowError:
        return math.inf


def dbm_from_watts(watts):
    """Power in dBm of ``watts`` (W): 10 log10(P / 1 mW); −inf for 0 W."""
    return 10.0 * math.log10(watts / MILLIWATT) if watts > 0 else -math.inf


def power_text(watts):
    """A power in both units, e.g. ``"2e-10 W (−67 dBm)"``."""
    if watts <= 0:
        return f"{watts:.6g} W (no power: −∞ dBm)"
    return f"{watts:.6g} W ({dbm_from_watts(watts):.4g} dBm)"


def power_alias(cls, name):
    """The watt key ``<name>_w`` that the key ``<name>_dbm`` of section ``cls`` stands for.

    ``None`` when ``name`` is not such an alias (no ``_dbm`` suffix, or no
    field of that stem with unit W).
    """
    if cls is None or not name.endswith(DBM):
        return None
    target = name[: -len(DBM)] + "_w"
    for f in schema.public_fields(cls):
        if f.name == target and f.metadata.get("unit") == "W":
            return target
    return None


def dbm_keys(cls):
    """The ``<name>_dbm`` keys section ``cls`` accepts beside its watt keys."""
    return [f.name[:-2] + DBM for f in schema.public_fields(cls)
            if f.metadata.get("unit") == "W" and f.name.endswith("_w")]


def dbm_value(value, key, source):
    """A dBm value checked to be a finite number, or the error naming ``key``."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ScenarioError(f"{value!r} has the wrong type ({type(value).__name__}); "
                            "expected a finite number in dBm", source=source, key=key)
    try:
        finite = math.isfinite(float(value))
    except OverflowError:
        finite = False
    if not finite:
        raise ScenarioError(f"{value!r} is not a finite number; expected a finite number "
                            "in dBm (0 W has no dBm value: give the watt key instead)",
                            source=source, key=key)
    return float(value)


def resolve_aliases(cls, data, path, source):
    """``data`` of section ``cls`` with every dBm key replaced by its watt key.

    Returns ``(data, aliases)``: a new dict (``data`` itself when nothing was
    replaced) and ``{watt key: (dBm key, dBm value)}`` for the keys given in dBm.
    Both units for one power is an error naming both.
    """
    aliases = {}
    for key in data:
        target = power_alias(cls, key)
        if target is not None:
            aliases[target] = key
    if not aliases:
        return data, aliases
    out = dict(data)
    for target, key in list(aliases.items()):
        where = f"{path}.{key}" if path else key
        if target in data:
            label = f"[{path}]" if path else "the top level"
            raise ScenarioError(f"give exactly one of {target} or {key} in {label}; found "
                                f"both: {target} = {data[target]!r}, {key} = {data[key]!r}",
                                source=source, key=where)
        dbm = dbm_value(out.pop(key), where, source)
        out[target], aliases[target] = watts_from_dbm(dbm), (key, dbm)
    return out, aliases


def unit_slip(cls, key, value):
    """Advice for a key written with a scaled unit (``bath_temperature_mk``), or ``None``.

    Returns the sentence naming the SI key of section ``cls`` and the value
    it should hold, e.g. ``"use bath_temperature_k = 0.012 (12 mK in kelvin)"``.
    """
    stem, _, suffix = key.rpartition("_")
    unit = EXACT_CASE.get(suffix) or SCALED.get(suffix.lower())
    if not stem or unit is None:
        return None
    si, factor, symbol = unit
    target = f"{stem}_{si}"
    if target not in {f.name for f in schema.public_fields(cls)}:
        return None
    numeric = isinstance(value, (int, float)) and not isinstance(value, bool)
    if not numeric or not math.isfinite(float(value)):
        return f"noisechain takes {SI_NAMES[si]}: use {target}, in {SI_NAMES[si]}"
    converted = float(value) * factor
    advice = f"use {target} = {converted:.6g} ({value!r} {symbol} in {SI_NAMES[si]})"
    if si == "w" and power_alias(cls, f"{stem}{DBM}") and converted > 0:
        advice += f" or {stem}{DBM} = {dbm_from_watts(converted):.6g}"
    return f"noisechain takes {SI_NAMES[si]}: {advice}"


def alias_path(root, path, source):
    """``(watt path, dBm key)`` for a power path given in dBm, else ``(path, None)``.

    ``root`` is the scenario class; ``"drive.power_dbm"`` gives
    ``("drive.power_w", "power_dbm")``.
    """
    parts = split_path(path, source)
    cls = root
    for name, _ in parts[:-1]:
        if name not in {f.name for f in schema.public_fields(cls)}:
            return path, None
        kind, cls, _ = schema.field_kind(cls, name)
        if kind == "scalar":
            return path, None
    leaf, index = parts[-1]
    target = power_alias(cls, leaf) if index is None else None
    if target is None:
        return path, None
    return ".".join(join(parts[:-1] + [(target, None)])), leaf


def given_in_dbm(exc, watts, alias, path):
    """``exc`` (about a watt key) restated for the dBm key the file gave.

    ``alias`` is ``(dBm key, dBm value)`` from :func:`resolve_aliases`, ``path``
    the section's path.
    """
    key = f"{path}.{alias[0]}" if path else alias[0]
    return ScenarioError(f"{alias[1]!r} dBm is {watts:.6g} W; {exc.detail}",
                         source=exc.source, key=key)
