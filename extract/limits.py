"""Work limits: how much one run may be asked to do, checked before the work.

Each limit has a default and, where a user may need more, an environment
variable to change it.  A value that is not a whole number of at least 1
is refused with one line naming the variable (never an internal error).

==========================  =====================  ==========================
limit                        default                environment variable
==========================  =====================  ==========================
shapes of a flattened cell   20 000 000             ``DYNSHARE_MAX_SHAPES``
  (polygons, paths and text labels, every array and repetition counted)
OASIS: elements, properties the shape limit        ``DYNSHARE_MAX_SHAPES``
  and names of a file, and placements of one repetition (checked by
  :mod:`extract.layout.oasis` before gdstk reads the file)
text labels of a flattened   1 000 000              ``DYNSHARE_MAX_LABELS``
  cell (each label is a Python object: slower than a shape)
devices of a netlist cell    2 000 000              ``DYNSHARE_MAX_DEVICES``
  (after ``M``, ``MULT``, ``NF`` and ``X`` expansion; subcircuit instances
  are counted against the same number)
subcircuit nesting depth     200                    –
TOML nesting depth           100                    –
layout file size             4 GiB                  –
OASIS CBLOCKs inflated       64 x file size + 1 MiB –
  (1 GiB each; :data:`extract.layout.oasis.MAX_INFLATION`)
OASIS: bytes gdstk copies    100 per allowed shape  ``DYNSHARE_MAX_SHAPES``
  (:mod:`extract.layout.oasis_memory`)
netlist file size            256 MiB                –
tech or constraints file     16 MiB                 –
==========================  =====================  ==========================
"""

from __future__ import annotations

import os

from extract.errors import InputError

__all__ = ["MAX_SHAPES", "MAX_LABELS", "MAX_DEVICES", "MAX_SUBCKT_DEPTH", "MAX_TOML_DEPTH", "MAX_LAYOUT_BYTES",
           "MAX_NETLIST_BYTES", "MAX_TOML_BYTES", "check_toml_depth", "env_limit"]

MAX_SHAPES = 20_000_000
MAX_LABELS = 1_000_000
MAX_DEVICES = 2_000_000
MAX_SUBCKT_DEPTH = 200
MAX_TOML_DEPTH = 100
MAX_LAYOUT_BYTES = 4 << 30
MAX_NETLIST_BYTES = 256 << 20
MAX_TOML_BYTES = 16 << 20


def env_limit(variable: str, default: int) -> int:
    """The limit set by environment ``variable``, else ``default``.

    Parameters
    ----------
    variable : str
        For example ``"DYNSHARE_MAX_SHAPES"``.
    default : int

    Returns
    -------
    int

    Raises
    ------
    InputError
        Naming the variable, when it is set to anything but a whole number
        from 1 to 10^15 (digits, optionally with ``_`` or ``,`` between
        groups: ``20_000_000``).

    Examples
    --------
    >>> os.environ["DYNSHARE_TEST_LIMIT"] = "1_000"
    >>> env_limit("DYNSHARE_TEST_LIMIT", 5)
    1000
    >>> os.environ["DYNSHARE_TEST_LIMIT"] = "1e3"
    >>> env_limit("DYNSHARE_TEST_LIMIT", 5)
    Traceback (most recent call last):
    ...
    extract.errors.InputError: DYNSHARE_TEST_LIMIT: environment variable: must be a whole number from 1 to 10^15, got '1e3'
    >>> del os.environ["DYNSHARE_TEST_LIMIT"]
    >>> env_limit("DYNSHARE_TEST_LIMIT", 5)
    5

    Notes
    -----
    Read once per call; O(length of the value).
    """
    raw = os.environ.get(variable)
    if raw is None:
        return default
    text = raw.strip().replace("_", "").replace(",", "")
    if text.isascii() and text.isdigit() and 1 <= int(text) <= 10**15:
        return int(text)
    shown = raw if len(raw) <= 40 else raw[:37] + "..."
    raise InputError(variable, f"must be a whole number from 1 to 10^15, got {shown!r}", "environment variable")


def check_toml_depth(text: str, path: str, limit: int = MAX_TOML_DEPTH) -> None:
    """Refuse TOML text whose arrays and inline tables nest deeper than ``limit``.

    The TOML reader is recursive: nesting thousands deep would exhaust
    Python's stack (a RecursionError, not a message).  This scan counts
    open brackets outside strings and comments.

    Raises
    ------
    InputError
        Naming the line where the nesting passes the limit.

    Examples
    --------
    >>> check_toml_depth("a = [[1], {b = [2]}]  # [[[[", "t.toml", 3)
    >>> check_toml_depth("a = 1\\nb = [[[[1]]]]", "t.toml", 3)
    Traceback (most recent call last):
    ...
    extract.errors.InputError: t.toml: line 2: arrays and inline tables nest more than 3 deep
    >>> check_toml_depth('s = "[[[[" \\nt = \\'[[[[\\'', "t.toml", 3)

    Notes
    -----
    One pass over the characters, O(n); strings (basic, literal, and
    their multi-line forms) and ``#`` comments are skipped.
    """
    depth, line, i, n = 0, 1, 0, len(text)
    while i < n:
        c = text[i]
        if c == "\n":
            line += 1
        elif c == "#":
            j = text.find("\n", i)
            i = n if j < 0 else j
            continue
        elif c in "\"'":
            quote = c * 3 if text.startswith(c * 3, i) else c
            j = i + len(quote)
            while j < n and not text.startswith(quote, j):
                if c == '"' and text[j] == "\\":
                    j += 1
                elif text[j] == "\n":
                    if len(quote) == 1:
                        break
                    line += 1
                j += 1
            i = j + len(quote)
            continue
        elif c in "[{":
            depth += 1
            if depth > limit:
                raise InputError(path, f"arrays and inline tables nest more than {limit} deep", f"line {line}")
        elif c in "]}":
            depth = max(0, depth - 1)
        i += 1
