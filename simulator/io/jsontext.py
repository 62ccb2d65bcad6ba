"""Strict JSON text of results that may hold NaN, infinities and numpy numbers.

Strict JSON has no NaN or infinity. Two uses need two spellings of them,
made by one encoder:

- reports for people and other programs (``--json``, ``inspect.json``):
  a non-finite number is ``null``;
- stored task results, read back by a resumed run: a non-finite number is
  ``{"non_finite": "nan" | "inf" | "-inf"}``, so that :func:`loads` gives
  back exactly the numbers that were stored.
"""

import json
import math

_NON_FINITE = "non_finite"


def plain(value, keep_non_finite=False):
    """``value`` as plain JSON-able data (see :func:`dumps` for ``keep_non_finite``)."""
    if isinstance(value, dict):
        return {k: plain(v, keep_non_finite) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v, keep_non_finite) for v in value]
    if type(value).__module__ == "numpy":  # numpy scalars and arrays, without importing it
        return plain(value.tolist(), keep_non_finite)
    if isinstance(value, float) and not math.isfinite(value):
        if not keep_non_finite:
            return None
        return {_NON_FINITE: "nan" if math.isnan(value) else ("inf" if value > 0 else "-inf")}
    return value


def dumps(data, *, keep_non_finite=False, indent=None):
    """Strict JSON text of ``data``.

    Parameters
    ----------
    data : dict, list or scalar
        Plain Python data; numpy scalars and arrays are converted.
    keep_non_finite : bool
        Tag NaN and infinities so that :func:`loads` restores them (stored
        results); by default they become ``null`` (reports).
    indent : int, optional
    """
    return json.dumps(plain(data, keep_non_finite), indent=indent, allow_nan=False)


def _untag(obj):
    if set(obj) == {_NON_FINITE} and obj[_NON_FINITE] in ("nan", "inf", "-inf"):
        return float(obj[_NON_FINITE])
    return obj


def loads(text):
    """Parse JSON text written by :func:`dumps`, restoring tagged non-finite numbers."""
    return json.loads(text, object_hook=_untag)
