"""JSON text of a report, piece by piece, as ``json.dumps(indent=2)`` writes it.

The standard library encodes an indented document with its pure-Python
encoder, a generator per nesting level, and joins hundreds of millions
of small pieces for a block of a million transistors (minutes and many
GB).  :func:`json_pieces` gives exactly the same text — byte for byte,
``json.dumps(report, indent=2, ensure_ascii=False, allow_nan=False)`` plus
a newline — as one piece per element of every top-level list, each made
by a small recursive encoder over the scalar types (strings through the
standard library's C string encoder, numbers through ``repr`` as the
standard library does).  A top-level value may be a :class:`Rows`: a
list made element by element only while it is written, so the whole
report is never held as Python objects.

Examples
--------
>>> import json
>>> report = {"a": [1, 2.5, None, True], "b": Rows(lambda: ({"n": k} for k in range(2)), 2), "c": {}}
>>> text = "".join(json_pieces(report))
>>> text == json.dumps({"a": [1, 2.5, None, True], "b": [{"n": 0}, {"n": 1}], "c": {}},
...                    indent=2, ensure_ascii=False) + "\\n"
True
>>> "".join(json_pieces({"x": Rows(lambda: iter(()), 0)}))
'{\\n  "x": []\\n}\\n'
"""

from __future__ import annotations

import json
import math
from json.encoder import encode_basestring

__all__ = ["Rows", "json_pieces"]


class Rows:
    """A list for a report, made element by element each time it is read.

    Parameters
    ----------
    make : callable
        ``make()`` returns a fresh iterator over the elements.
    count : int
        How many elements it gives.
    """

    def __init__(self, make, count: int):
        self._make, self._count = make, count

    def __iter__(self):
        return self._make()

    def __len__(self) -> int:
        return self._count


_KEYS: dict[str, str] = {}


def _key(k) -> str:
    """An encoded key and its colon; string keys remembered (reports
    repeat a few dozen).  Another key is turned into a string as
    ``json.dumps`` turns it (numbers, booleans, None; anything else raises
    as there)."""
    if type(k) is not str:
        return json.dumps({k: None}, allow_nan=False)[1:-7] + ": "
    got = _KEYS.get(k)
    if got is None:
        got = encode_basestring(k) + ": "
        if len(_KEYS) < 4096:
            _KEYS[k] = got
    return got


def _float(o: float) -> str:
    if o - o != 0.0:  # NaN or an infinity
        raise ValueError(f"Out of range float values are not JSON compliant: {o!r}")
    return float.__repr__(o)


def _encode(o, pad: str) -> str:
    """``o`` as json.dumps(indent=2) nests it at indentation ``pad``.

    Exact types first (the common case: str and float values of dicts
    written inline), then subclasses as the standard library treats them."""
    t = type(o)
    if t is str:
        return encode_basestring(o)
    if t is float:
        return _float(o)
    inner = pad + "  "
    if t is dict:
        if not o:
            return "{}"
        parts = []
        for k, v in o.items():
            tv = type(v)
            parts.append(_key(k) + (encode_basestring(v) if tv is str else _float(v) if tv is float
                                    else _encode(v, inner)))
        return "{\n" + inner + (",\n" + inner).join(parts) + "\n" + pad + "}"
    if o is None:
        return "null"
    if o is True:
        return "true"
    if o is False:
        return "false"
    if isinstance(o, str):
        return encode_basestring(o)
    if isinstance(o, int):
        return int.__repr__(o)
    if isinstance(o, float):
        return _float(o)
    if isinstance(o, dict):
        return _encode(dict(o), pad)
    if isinstance(o, (list, tuple, Rows)):
        if not len(o):
            return "[]"
        return "[\n" + inner + (",\n" + inner).join([_encode(v, inner) for v in o]) + "\n" + pad + "]"
    return json.dumps(o, indent=2, ensure_ascii=False, allow_nan=False).replace("\n", "\n" + pad)


def json_pieces(report: dict):
    """The JSON text of ``report`` (a dict), in pieces.

    Parameters
    ----------
    report : dict
        Values: what ``json.dumps`` takes, or :class:`Rows`.

    Yields
    ------
    str
        Pieces whose concatenation is ``json.dumps(report, indent=2,
        ensure_ascii=False, allow_nan=False) + "\\n"`` (lists as lists).

    Raises
    ------
    ValueError
        A NaN or infinite number (as ``json.dumps`` raises it).

    Notes
    -----
    One piece per top-level key, and one per element of a top-level list
    or :class:`Rows`; memory is that of one element at a time.  Cost: one
    call of the encoder per scalar.
    """
    if not report:
        yield "{}\n"
        return
    first = True
    for key, value in report.items():
        head = ("{\n  " if first else ",\n  ") + _key(key)
        first = False
        if isinstance(value, (list, tuple, Rows)) and len(value):
            yield head + "[\n    "
            sep = ""
            for v in value:
                yield sep + _encode(v, "    ")
                sep = ",\n    "
            yield "\n  ]"
        else:
            yield head + _encode(value, "  ")
    yield "\n}\n"
