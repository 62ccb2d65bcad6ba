"""Mutated scenario files for the input fuzz test, derived from the bundled scenarios.

Each mutation takes a valid scenario (``scenarios/*.toml`` and the demo) and
breaks it the way a hurried edit, a bad script or a damaged file does: a key
or section deleted, a value of the wrong type, a number at the edge of what a
float holds (NaN, infinities, 1e308, subnormals), a huge integer, unicode and
control characters in text, tables nested deeply, a truncated or byte-flipped
file, or a sweep over a bad path or value. Every case is a function of a
``random.Random``, so a failing case is reproduced from the seed the test
prints.
"""

import copy
import math
import random
from pathlib import Path

import tomli_w

REPO = Path(__file__).resolve().parents[1]
SOURCES = sorted((REPO / "scenarios").glob("*.toml")) + [REPO / "simulator" / "data"
                                                         / "demo.toml"]

SPECIAL_NUMBERS = (math.nan, math.inf, -math.inf, 1e308, -1e308, 1e-308, 5e-324, -5e-324,
                   0.0, -0.0, 1e300, 1e30, 1e10, 1e-20, -1.0, 1e-15, 2.0**53 + 1)
HUGE_INTEGERS = (2**63 - 1, 2**63, -(2**63), 10**30, 2**64 + 1, 10**300)
ODD_TEXT = ("", " ", "\n", "a\nb", "tab\there", "\x00", "\x7f", "\u202e", "é" * 3,
            "日本語", "x" * 5000, "\ud7ff", "\U0001f600")
WRONG_TYPES = ("text", True, False, [1.0, 2.0], {"a": 1}, [], {})
SWEEP_PATHS = ("drive.power_w", "drive.detuning_hz", "scenario.name", "scenario.seed",
               "detection.scheme", "detection.balanced", "record.duration_s",
               "mechanics[0].bath_temperature_k", "mechanics[9].frequency_hz",
               "cavity.nonexistent", "sweep.combine", "cavity", "mechanics", "",
               "drive..power_w", "mechanics[0].linewidth_hz")


def base_texts():
    """The bundled scenario texts, by file name."""
    return {p.name: p.read_text(encoding="utf-8") for p in SOURCES}


def _leaves(data, prefix=()):
    """Paths to every value of nested plain data, tables and arrays included."""
    out = []
    if isinstance(data, dict):
        for k, v in data.items():
            out.append(prefix + (k,))
            out += _leaves(v, prefix + (k,))
    elif isinstance(data, list):
        for i, v in enumerate(data):
            out.append(prefix + (i,))
            out += _leaves(v, prefix + (i,))
    return out


def _parent(data, path):
    node = data
    for part in path[:-1]:
        node = node[part]
    return node


def _set(data, path, value):
    _parent(data, path)[path[-1]] = value


def _delete(data, path):
    parent = _parent(data, path)
    if isinstance(parent, list):
        parent.pop(path[-1])
    else:
        del parent[path[-1]]


def _numeric_paths(data):
    return [p for p in _leaves(data)
            if isinstance(_get(data, p), (int, float)) and not isinstance(_get(data, p), bool)]


def _get(data, path):
    return _parent(data, path)[path[-1]]


def _nested(depth):
    """TOML text with an inline table nested ``depth`` levels deep."""
    return "[scenario]\nname = \"deep\"\nx = " + "{a = " * depth + "1" + "}" * depth + "\n"


def _data_mutation(rng, data):
    """One structural or value mutation of parsed scenario data, in place.

    Rescaling a number by up to eight decades either way is the commonest
    mutation: it mostly stays within the limits of the key, so it reaches
    the engine with an unusual device rather than stopping at the loader.
    """
    leaves = _leaves(data)
    kind = rng.choice(("delete", "type", "number", "integer", "text", "sweep", "number",
                       "extra", "rescale", "rescale", "rescale", "rescale"))
    if kind == "delete" and leaves:
        _delete(data, rng.choice(leaves))
    elif kind == "type" and leaves:
        _set(data, rng.choice(leaves), rng.choice(WRONG_TYPES))
    elif kind in ("number", "integer"):
        paths = _numeric_paths(data)
        if paths:
            pool = SPECIAL_NUMBERS if kind == "number" else HUGE_INTEGERS
            path = rng.choice(paths)
            value = rng.choice(pool)
            if rng.random() < 0.3:  # scale the valid value by a large factor instead
                value = _get(data, path) * rng.choice((1e10, 1e-10, 1e30, -1.0))
            _set(data, path, value)
    elif kind == "rescale":  # a plausible-looking value, often still within the limits
        paths = _numeric_paths(data)
        if paths:
            path = rng.choice(paths)
            value = _get(data, path) * 10 ** rng.uniform(-8, 8)
            _set(data, path, int(value) if isinstance(_get(data, path), int) else value)
    elif kind == "text":
        texts = [p for p in leaves if isinstance(_get(data, p), str)]
        if texts:
            _set(data, rng.choice(texts), rng.choice(ODD_TEXT))
    elif kind == "sweep":
        path = rng.choice(SWEEP_PATHS)
        values = rng.choice(([1.0, 2.0], [rng.choice(SPECIAL_NUMBERS)], ["a", "b"],
                             [True, False], [10**30], {"start": 0.0, "stop": 1e300, "num": 3},
                             {"start": 1.0, "stop": 2.0, "num": 3, "unit": "scenario.name"},
                             {"start": -1.0, "stop": 1.0, "num": 3, "log": True}, []))
        data.setdefault("sweep", {}).setdefault("parameters", {})[path] = values
    else:
        table = rng.choice([p for p in leaves if isinstance(_get(data, p), dict)] or [()])
        node = _get(data, table) if table else data
        node[rng.choice(("power", "powr_w", "name", "mechanics", "é"))] = rng.choice(
            (1.0, "x", {"y": 1}))


def _text_mutation(rng, text):
    """One mutation of the file's bytes: truncation, a flipped byte, deep nesting."""
    kind = rng.choice(("truncate", "flip", "nest", "duplicate"))
    raw = text.encode("utf-8")
    if kind == "truncate":
        return raw[:rng.randrange(len(raw))]
    if kind == "flip":
        raw = bytearray(raw)
        for _ in range(rng.randint(1, 4)):
            i = rng.randrange(len(raw))
            raw[i] = rng.randrange(256)
        return bytes(raw)
    if kind == "nest":
        return _nested(rng.choice((50, 500, 2000))).encode()
    lines = text.splitlines(keepends=True)
    i = rng.randrange(len(lines))
    return "".join(lines[:i + 1] + lines[i:]).encode("utf-8")


def mutated_case(rng, texts):
    """One mutated scenario file: ``(description, bytes)``."""
    import tomllib

    name = rng.choice(sorted(texts))
    text = texts[name]
    if rng.random() < 0.25:
        return f"{name}: bytes", _text_mutation(rng, text)
    data = copy.deepcopy(tomllib.loads(text))
    steps = rng.choice((1, 1, 1, 2, 3))
    for _ in range(steps):
        try:
            _data_mutation(rng, data)
        except (TypeError, AttributeError, KeyError, IndexError):
            pass  # an earlier edit broke the structure this one expected: keep that one
    try:
        return f"{name}: {steps} edit(s)", tomli_w.dumps(data).encode("utf-8")
    except (TypeError, ValueError):  # e.g. a float TOML cannot write: keep the original
        return f"{name}: unwritable", text.encode("utf-8")


def cases(seed, count):
    """``count`` mutated scenario files from ``seed``."""
    rng = random.Random(seed)
    texts = base_texts()
    return [mutated_case(rng, texts) for _ in range(count)]
