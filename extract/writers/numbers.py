"""Names and numbers for the text outputs (SPICE and SPEF writers).

Both netlist writers need the same three things: numbers written with a
fixed number of significant digits and never in exponent form, a
deterministic way to turn any net or device name into one the output
format accepts while keeping every name distinct, and the tool's version
for the header.

Examples
--------
>>> fixed(1 / 3)
'0.333333'
>>> names = unique_names(["a b", "a_b", "c"], lambda s: s.replace(" ", "_"))
>>> names["a_b"], names["a b"], names["c"]
('a_b', 'a_b_2', 'c')
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable
from importlib import metadata

import numpy as np

__all__ = ["fixed", "unique_names", "tool_version"]


def fixed(value: float, digits: int = 6) -> str:
    """Write ``value`` with ``digits`` significant digits, positional.

    Parameters
    ----------
    value : float
        A finite number.
    digits : int, optional
        Significant digits (6 by default).

    Returns
    -------
    str
        The shortest positional form of the rounded value: no exponent,
        no trailing zeros, no trailing point; ``-0`` is written ``0``.

    Raises
    ------
    ValueError
        If ``value`` is not finite (a NaN or infinity in a circuit is a
        bug upstream, never something to write into a netlist).

    Notes
    -----
    Positional notation keeps the numbers readable by every SPICE and
    SPEF reader (some do not accept an exponent before a scale suffix).
    Uses :func:`numpy.format_float_positional`; O(1).

    Examples
    --------
    >>> fixed(0.26), fixed(1234567.0), fixed(1e-7), fixed(-0.0)
    ('0.26', '1234570', '0.0000001', '0')
    """
    value = float(value)
    if not math.isfinite(value):
        raise ValueError(f"cannot write the non-finite number {value!r}")
    text = np.format_float_positional(
        value, precision=digits, unique=False, fractional=False, trim="-"
    )
    return "0" if text in ("-0", "0") else text


def unique_names(
    names: Iterable[str], transform: Callable[[str], str], fold_case: bool = False
) -> dict[str, str]:
    """Map every name to a transformed name, all of them distinct.

    Parameters
    ----------
    names : iterable of str
        The original names (duplicates are ignored).
    transform : callable
        Turns one name into the form the output accepts.
    fold_case : bool, optional
        Treat names that differ only in letter case as equal (SPICE does).

    Returns
    -------
    dict of str to str
        Original name to output name.

    Notes
    -----
    Deterministic whatever the input order: a name the transform leaves
    unchanged keeps itself (first come in sorted order when two differ
    only by case); every other name, in sorted order, gets its transformed
    form, followed by ``_2``, ``_3``, ... until it is free.  O(n log n)
    for the sort, O(1) expected per name after it.

    Examples
    --------
    >>> unique_names(["A", "a"], str, fold_case=True)
    {'A': 'A', 'a': 'a_2'}
    """
    ordered = sorted(set(names))
    key = str.lower if fold_case else (lambda s: s)
    out: dict[str, str] = {}
    taken: set[str] = set()
    for name in ordered:
        if transform(name) == name and key(name) not in taken:
            out[name] = name
            taken.add(key(name))
    for name in ordered:
        if name in out:
            continue
        base = transform(name)
        candidate, n = base, 2
        while key(candidate) in taken:
            candidate, n = f"{base}_{n}", n + 1
        out[name] = candidate
        taken.add(key(candidate))
    return out


def tool_version() -> str:
    """The installed dynshare version, or ``"unknown"`` when the package
    is used from a source tree without being installed.

    Returns
    -------
    str

    Examples
    --------
    >>> isinstance(tool_version(), str)
    True
    """
    try:
        return metadata.version("dynshare")
    except metadata.PackageNotFoundError:
        return "unknown"
