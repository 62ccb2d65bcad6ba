"""Declarative description of scenario parameters, shared by loader and docs.

Every scenario section is a frozen, keyword-only dataclass whose fields carry
a :func:`param` specification: a one-line meaning, the unit, the admissible
range and, for strings, the allowed choices. The loader
(:mod:`simulator.scenario`) walks these specifications generically, so a new
section or key needs no new loader code, and the scenario reference in
``docs/`` is generated from the same source.
"""

import dataclasses
import math
import types
import typing

# Range checks a parameter can declare, with the words used in error messages.
CHECKS = {
    "positive": (lambda v: v > 0, "a positive number (> 0)"),
    "nonnegative": (lambda v: v >= 0, "a non-negative number (≥ 0)"),
    "fraction": (lambda v: 0 < v <= 1, "a fraction in (0, 1]"),
    "unit_interval": (lambda v: 0 <= v <= 1, "a number in [0, 1]"),
    "real": (lambda v: True, "a finite number"),
}


def param(doc, *, unit="", check=None, choices=None, default=dataclasses.MISSING):
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
    """
    if check is not None and check not in CHECKS:
        raise ValueError(f"unknown check {check!r}; expected one of {sorted(CHECKS)}")
    meta = {"doc": doc, "unit": unit, "check": check, "choices": choices}
    return dataclasses.field(default=default, metadata=meta)


def section(default_factory, doc):
    """Field of :class:`~simulator.scenario.Scenario` holding a whole section."""
    return dataclasses.field(default_factory=default_factory, metadata={"doc": doc})


def required_section(doc):
    """Field of :class:`~simulator.scenario.Scenario` for a section that must be given."""
    return dataclasses.field(metadata={"doc": doc})


def is_section(tp):
    """True for a dataclass type used as a scenario section."""
    return isinstance(tp, type) and dataclasses.is_dataclass(tp)


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


def public_fields(cls):
    """The dataclass fields of ``cls`` that belong in a scenario file."""
    return [f for f in dataclasses.fields(cls) if not f.metadata.get("internal")]


def expectation(f, tp):
    """Words describing what a parameter accepts, for errors and the reference."""
    meta = f.metadata
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
    return text


def convert_scalar(value, tp):
    """Check the TOML type of ``value`` against ``tp``; return it converted.

    Returns ``(ok, value)``: integers are accepted where a float is expected;
    booleans are never taken for numbers.
    """
    if isinstance(value, bool):
        return (tp is bool), value
    if tp is float and isinstance(value, (int, float)):
        return True, float(value)
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
        if check and not CHECKS[check][0](value):
            return f"{value!r} is out of range; expected {expectation(f, tp)}"
    if meta.get("choices") and value not in meta["choices"]:
        return f"{value!r} is not allowed; expected {expectation(f, tp)}"
    return None


def reference_markdown(root):
    """Scenario reference as Markdown, generated from the section classes.

    ``docs/scenario-reference.md`` is this text; a test keeps them equal.
    """
    lines = [
        "# Scenario file reference",
        "",
        "Generated from the loader's schema (`python -m simulator.schema`); a",
        "test fails if this file and the loader disagree. Keys carry their unit",
        "as a suffix; every frequency or rate is an ordinary frequency in Hz (the",
        "value of ω/2π). Unknown keys are errors.",
        "",
    ]
    for f in public_fields(root):
        kind, cls, _ = field_kind(root, f.name)
        header = f"[[{f.name}]]" if kind == "sections" else f"[{f.name}]"
        required = f.default is dataclasses.MISSING and f.default_factory is dataclasses.MISSING
        lines += [f"## `{header}`", "", f.metadata.get("doc", ""),
                  "(required)" if required else "(optional section)", ""]
        if getattr(cls, "EXCLUSIVE", ()):
            groups = "; ".join(" or ".join(f"`{k}`" for k in g) for g in cls.EXCLUSIVE)
            lines += [f"Give exactly one of: {groups}.", ""]
        lines += ["| key | meaning | accepts | default |", "|---|---|---|---|"]
        for sub in public_fields(cls):
            _, tp, optional = field_kind(cls, sub.name)
            if sub.default is dataclasses.MISSING:
                default = "required"
            elif sub.default is None:
                default = "—"
            else:
                default = f"`{sub.default!r}`".replace("'", '"')
            lines.append(f"| `{sub.name}` | {sub.metadata['doc']} | "
                         f"{expectation(sub, tp)} | {default} |")
        lines.append("")
    return "\n".join(lines)


if __name__ == "__main__":
    from simulator.scenario import Scenario

    print(reference_markdown(Scenario), end="")
