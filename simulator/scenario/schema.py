"""Declarative description of scenario parameters, shared by loader and docs.

Every scenario section is a frozen, keyword-only dataclass whose fields carry
a :func:`param` specification: a one-line meaning, the unit, the admissible
range and, for strings, the allowed choices. The loader
(:mod:`simulator.scenario.loader`) walks these specifications generically, so a new
section or key needs no new loader code, and the scenario reference in
``docs/`` is generated from the same source.
"""

import dataclasses
import functools
import math
import types
import typing

# Longest name accepted for a scenario or a mode (it becomes part of file names).
MAX_NAME_LENGTH = 100


def _is_label(text):
    """A name fit for reports and file names: one printable line, not blank."""
    return bool(text.strip()) and len(text) <= MAX_NAME_LENGTH and text.isprintable()


# Range checks a parameter can declare, with the words used in error messages.
CHECKS = {
    "positive": (lambda v: v > 0, "a positive number (> 0)"),
    "nonnegative": (lambda v: v >= 0, "a non-negative number (≥ 0)"),
    "fraction": (lambda v: 0 < v <= 1, "a fraction in (0, 1]"),
    "unit_interval": (lambda v: 0 <= v <= 1, "a number in [0, 1]"),
    "real": (lambda v: True, "a finite number"),
    "label": (_is_label, f"text of 1 to {MAX_NAME_LENGTH} printable characters on one "
                         "line, not blank"),
}


def param(doc, *, unit="", check=None, choices=None, default=dataclasses.MISSING,
          parser=None, accepts=None, low=None, high=None, why=None):
    """Field of a scenario section with its documentation and admissible values.

    Parameters
    ----------
    doc : str
        One line saying what the parameter is, in the physicist's words.
    unit : str
        Unit symbol (SI); empty for dimensionless numbers and text.
    check : str, optional
        Name of a range check in :data:`CHECKS`.
    choices : tuple of str, optional
        The allowed values of a text parameter.
    default : optional
        Default value; a parameter without one is required.
    parser : callable, optional
        ``parser(value, key, source)`` for a structured value (a table or an
        array) that the plain type checks cannot describe; it returns the
        converted value or raises :class:`~simulator.errors.ScenarioError`.
    accepts : str, optional
        Words describing what a ``parser`` parameter accepts, for the reference.
    low, high : float, optional
        Physical limits of a number, inclusive, beyond the sign of ``check``:
        the span of real devices, which also keeps the engine's arithmetic
        finite. A value outside is refused with ``why``.
    why : str, optional
        Short reason for ``low``/``high``, quoted in errors and the reference.
    """
    if check is not None and check not in CHECKS:
        raise ValueError(f"unknown check {check!r}; expected one of {sorted(CHECKS)}")
    meta = {"doc": doc, "unit": unit, "check": check, "choices": choices,
            "parser": parser, "accepts": accepts, "low": low, "high": high, "why": why}
    return dataclasses.field(default=default, metadata=meta)


def section(default_factory, doc):
    """Field of :class:`~simulator.scenario.loader.Scenario` holding a whole section."""
    return dataclasses.field(default_factory=default_factory, metadata={"doc": doc})


def optional_section(doc):
    """Field of :class:`~simulator.scenario.loader.Scenario` for a section that may be absent."""
    return dataclasses.field(default=None, metadata={"doc": doc})


def optional_sections(doc):
    """Field of :class:`~simulator.scenario.loader.Scenario` for an array of tables that may be
    absent (then empty)."""
    return dataclasses.field(default=(), metadata={"doc": doc})


def required_section(doc):
    """Field of :class:`~simulator.scenario.loader.Scenario` for a section that must be given."""
    return dataclasses.field(metadata={"doc": doc})


def alternative_groups(cls):
    """Groups of keys of section ``cls`` that stand for one quantity.

    ``EXCLUSIVE`` (exactly one must be given) and ``ALTERNATIVES`` (at most one
    may be given, the section's ``problems()`` says so); setting one key of a
    group by path clears the others to their defaults.
    """
    return getattr(cls, "EXCLUSIVE", ()) + getattr(cls, "ALTERNATIVES", ())


def is_section(tp):
    """True for a dataclass type used as a scenario section."""
    return isinstance(tp, type) and dataclasses.is_dataclass(tp)


@functools.cache
def field_kind(cls, name):
    """Resolved annotation of field ``name`` of dataclass ``cls``.

    Returns a tuple ``(kind, inner, optional)``: ``kind`` is ``"section"``,
    ``"sections"`` (an array of tables) or ``"scalar"``; ``inner`` is the
    section class or scalar type; ``optional`` says whether ``None`` is allowed.
    """
    tp = typing.get_type_hints(cls)[name]
    optional = False
    if isinstance(tp, types.UnionType) or typing.get_origin(tp) is typing.Union:
        args = [a for a in typing.get_args(tp) if a is not type(None)]
        optional = len(args) < len(typing.get_args(tp))
        tp = args[0]
    if typing.get_origin(tp) is tuple:
        return "sections", typing.get_args(tp)[0], optional
    if is_section(tp):
        return "section", tp, optional
    return "scalar", tp, optional


@functools.cache
def public_fields(cls):
    """The dataclass fields of ``cls`` that belong in a scenario file (a tuple)."""
    return tuple(f for f in dataclasses.fields(cls) if not f.metadata.get("internal"))


def expectation(f, tp):
    """Words describing what a parameter accepts, for errors and the reference."""
    meta = f.metadata
    if meta.get("accepts"):
        return meta["accepts"]
    if meta.get("choices"):
        return "one of " + ", ".join(f'"{c}"' for c in meta["choices"])
    if meta.get("check"):
        text = CHECKS[meta["check"]][1]
    else:
        text = {str: "text", bool: "true or false", int: "an integer", float: "a number"}[tp]
    if tp is int and meta.get("check"):
        text = text.replace("number", "integer")
    if meta.get("unit"):
        text += f" in {meta['unit']}"
    low, high = meta.get("low"), meta.get("high")
    if low is not None and high is not None:
        text += f", from {_limit(low)} to {_limit(high)}"
    elif low is not None:
        text += f", at least {_limit(low)}"
    elif high is not None:
        text += f", at most {_limit(high)}"
    if meta.get("why"):
        text += f" ({meta['why']})"
    return text


def convert_scalar(value, tp):
    """Check the TOML type of ``value`` against ``tp``; return it converted.

    Returns ``(ok, value)``: integers are accepted where a float is expected
    (one too large for a float becomes an infinity, refused as not finite);
    booleans are never taken for numbers.
    """
    if isinstance(value, bool):
        return (tp is bool), value
    if tp is float and isinstance(value, (int, float)):
        try:
            return True, float(value)
        except OverflowError:
            return True, (math.inf if value > 0 else -math.inf)
    if tp is int and isinstance(value, int):
        return True, value
    if tp is str and isinstance(value, str):
        return True, value
    return False, value


def range_problem(f, tp, value):
    """Return why ``value`` is not admissible for field ``f``, or ``None``."""
    meta = f.metadata
    if tp in (int, float):
        if isinstance(value, float) and not math.isfinite(value):
            return f"{value!r} is not a finite number; expected {expectation(f, tp)}"
        check = meta.get("check")
        low, high = meta.get("low"), meta.get("high")
        if ((check and not CHECKS[check][0](value)) or (low is not None and value < low)
                or (high is not None and value > high)):
            return f"{value!r} is out of range; expected {expectation(f, tp)}"
    if tp is str and meta.get("check") and not CHECKS[meta["check"]][0](value):
        return f"{_short(value)} is not allowed; expected {expectation(f, tp)}"
    if meta.get("choices") and value not in meta["choices"]:
        return f"{value!r} is not allowed; expected {expectation(f, tp)}"
    return None


def _limit(x):
    """A limit as written in the reference: integers in full, floats compactly."""
    if isinstance(x, int):
        return str(x)
    return f"{x:g}".replace("e+0", "e").replace("e-0", "e-").replace("e+", "e")


def _short(text, limit=40):
    """``repr`` of a text value, cut short for an error message."""
    return repr(text) if len(text) <= limit else repr(text[:limit]) + f"… ({len(text)} characters)"


def reference_markdown(root):
    """Scenario reference as Markdown, generated from the section classes.

    ``docs/scenario-reference.md`` is this text; ``tests/test_docs.py`` keeps
    them equal.

    Parameters
    ----------
    root : type
        The top-level scenario dataclass (:class:`simulator.scenario.loader.Scenario`).

    Returns
    -------
    str
        Markdown: an introduction, then one table of keys per section.
    """
    fields = public_fields(root)
    lines = [
        "# Scenario file reference",
        "",
        "<!-- Generated: do not edit. Regenerate with",
        "     .venv/bin/python -m simulator.scenario > docs/scenario-reference.md -->",
        "",
        "This page is generated from the loader's own schema, so it lists exactly",
        "what `noisechain check` accepts; `tests/test_docs.py` fails if the two",
        "disagree. To change a key, edit its `param(...)` field in",
        "`simulator/scenario/loader.py` and regenerate this page.",
        "",
        "A scenario is a TOML file with the sections below. Keys carry their unit",
        "as a suffix (`_hz`, `_w`, `_m`, `_kg`, `_k`); every frequency or rate is an",
        "ordinary frequency in Hz, the value of ω/2π. Every power key `<name>_w`",
        "may be given as `<name>_dbm` instead (exactly one of the two; P[W] =",
        "1 mW · 10^(P[dBm]/10)), and its dBm path works in sweeps too. A key written",
        "in a scaled unit (`bath_temperature_mk`, `frequency_mhz`, `power_mw`) is",
        "refused with the SI key and the converted value. Numbers must be finite;",
        "integers are accepted where a number is expected. Many keys also have",
        "physical limits, listed beside them: the span of real devices, which also",
        "keeps every number the engine derives finite; a value outside them is",
        "refused with the limit and its reason. Names are one line of printable",
        "text. Unknown keys are errors and the message suggests the closest valid",
        "key. A key is named by its path, `section.key`, with an index for",
        "repeated tables: `mechanics[0].frequency_hz` is the first `[[mechanics]]`",
        "table. Only numeric keys can be swept. Error",
        "messages and `Scenario.get` / `Scenario.replace` use the same paths.",
        "",
        "Sections: " + ", ".join(f"`{_table_header(root, f)}`" for f in fields) + ".",
        "",
    ]
    for f in fields:
        kind, cls, _ = field_kind(root, f.name)
        required = f.default is dataclasses.MISSING and f.default_factory is dataclasses.MISSING
        status = "required" if required else "optional"
        lines += [f"## `{_table_header(root, f)}` ({status})", "",
                  _sentence(f.metadata.get("doc", ""))]
        if kind == "sections":
            lines.append(f"Repeat the `[[{f.name}]]` table once per item"
                         + ("; at least one is required." if required else "."))
        if f.default_factory is not dataclasses.MISSING:
            lines.append("Every key takes its default when the section is left out.")
        elif not required:
            lines.append("The whole section may be left out.")
        lines.append("")
        lines += _key_table(cls, _table_header(root, f).strip("[]"))
    return "\n".join(lines)


def _key_table(cls, path):
    """Reference lines for the keys of section ``cls``, then its nested tables."""
    lines, nested = [], []
    exclusive = {k for group in getattr(cls, "EXCLUSIVE", ()) for k in group}
    for group in getattr(cls, "EXCLUSIVE", ()):
        lines += ["Give exactly one of " + " or ".join(f"`{k}`" for k in group)
                  + ".", ""]
    lines += ["| key | meaning | accepts | default |", "|---|---|---|---|"]
    for sub in public_fields(cls):
        kind, tp, _ = field_kind(cls, sub.name)
        if kind in ("section", "sections"):
            header = (f"[[{path}.{sub.name}]]" if kind == "sections"
                      else f"[{path}.{sub.name}]")
            nested.append((sub, tp, header))
            cells = (f"`{sub.name}`", _sentence(sub.metadata.get("doc", "")),
                     f"{'tables' if kind == 'sections' else 'a table'}, `{header}` below",
                     "none" if kind == "sections" else "defaults")
            lines.append("| " + " | ".join(cells) + " |")
            continue
        if sub.default is dataclasses.MISSING:
            default = "required"
        elif sub.name in exclusive:
            default = "one of a pair"
        elif sub.default is None:
            default = "not set"
        else:
            default = f"`{_toml_literal(sub.default)}`"
        meaning = _sentence(sub.metadata["doc"])
        if sub.metadata.get("unit") == "W":
            meaning += f" Or `{sub.name.removesuffix('_w')}_dbm` in dBm."
        cells = (f"`{sub.name}`", meaning, expectation(sub, tp), default)
        lines.append("| " + " | ".join(c.replace("|", "\\|") for c in cells) + " |")
    lines.append("")
    for sub, tp, header in nested:
        repeated = header.startswith("[[")
        lines += [f"## `{header}` (optional)", "",
                  _sentence(sub.metadata.get("doc", "")),
                  "Repeat the table once per item." if repeated
                  else "Every key takes its default when the table is left out.", ""]
        lines += _key_table(tp, f"{path}.{sub.name}")
    return lines


def _table_header(root, f):
    kind, _, _ = field_kind(root, f.name)
    return f"[[{f.name}]]" if kind == "sections" else f"[{f.name}]"


def _toml_literal(value):
    """A default value as it would be written in a TOML file."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return f'"{value}"'
    return repr(value)


def _sentence(text):
    """``text`` with a capital first letter and a full stop, for the reference."""
    text = text.strip()
    if not text:
        return text
    text = text[0].upper() + text[1:]
    return text if text.endswith((".", "?", "!")) else text + "."
