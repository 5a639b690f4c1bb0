"""SPICE netlist text into cards: comments, continuation lines, fields.

A *card* is one logical line of a netlist: a physical line plus the
``+`` continuation lines after it.  This module only cuts text; what the
cards mean is :mod:`extract.netlist.reader`'s business.

Rules (those of SPICE decks as designers write them):

- A line whose first non-blank character is ``*`` is a comment.
- ``;`` starts a comment anywhere; ``$`` starts one at the start of a line
  or after white space.  Neither counts inside ``{...}`` or quotes.
- A line starting with ``+`` continues the card before it; comment and
  blank lines may sit between the two.
- Fields are separated by white space.  ``{...}``, ``'...'`` and
  ``"..."`` are single fields even with spaces inside.  ``key = value``
  with spaces around ``=`` is the same as ``key=value``.
- The first line is not a title line: the file is read as a subcircuit
  library, as an included file is.

Notes
-----
One pass over the characters of each line: linear in the file size.
"""

from __future__ import annotations

from dataclasses import dataclass

from extract.errors import InputError

__all__ = ["Card", "read_cards", "split_fields"]

_OPEN = {"{": "}", "'": "'", '"': '"'}


@dataclass(frozen=True)
class Card:
    """One logical line.

    Parameters
    ----------
    line : int
        1-based number of its first physical line.
    text : str
        The text with comments removed and continuations joined by a space.
    """

    line: int
    text: str

    @property
    def place(self) -> str:
        """The place for an :class:`~extract.errors.InputError`, ``"line N"``."""
        return f"line {self.line}"

    @property
    def keyword(self) -> str:
        """The first field in lower case (``".subckt"``, ``"mn1"``, ...)."""
        return self.text.split(None, 1)[0].lower()


def _strip_comment(line: str) -> str:
    closing = None
    for i, ch in enumerate(line):
        if closing is not None:
            if ch == closing:
                closing = None
            continue
        if ch in _OPEN:
            closing = _OPEN[ch]
        elif ch == ";":
            return line[:i]
        elif ch == "$" and (i == 0 or line[i - 1] in " \t"):
            return line[:i]
    return line


def read_cards(text: str, path: str) -> list[Card]:
    """Cut netlist text into cards.

    Parameters
    ----------
    text : str
        The whole file.
    path : str
        The file name, for messages.

    Returns
    -------
    list of Card

    Raises
    ------
    InputError
        A ``+`` continuation with no card before it.

    Examples
    --------
    >>> cards = read_cards("* a comment\\nM1 d g s b nch\\n+ W=1u ; width\\n\\nC1 d 0 1f $ wire", "x.sp")
    >>> [(c.line, c.text) for c in cards]
    [(2, 'M1 d g s b nch W=1u'), (5, 'C1 d 0 1f')]
    """
    cards: list[list] = []
    for number, raw in enumerate(text.splitlines(), start=1):
        stripped = raw.strip()
        if not stripped or stripped.startswith("*"):
            continue
        body = _strip_comment(stripped).strip()
        if stripped.startswith("+"):
            if not cards:
                raise InputError(
                    path, "continuation line '+' with no line before it", f"line {number}"
                )
            rest = body[1:].strip()
            if rest:
                cards[-1][1] = f"{cards[-1][1]} {rest}"
            continue
        if body:
            cards.append([number, body])
    return [Card(n, t) for n, t in cards]


def _raw_fields(card: Card, path: str) -> list[str]:
    fields: list[str] = []
    current: list[str] = []
    closing = None
    text = card.text

    def flush() -> None:
        if current:
            fields.append("".join(current))
            current.clear()

    for ch in text:
        if closing is not None:
            current.append(ch)
            if ch == closing:
                closing = None
            continue
        if ch in _OPEN:
            closing = _OPEN[ch]
            current.append(ch)
        elif ch in " \t":
            flush()
        elif ch == "=":
            flush()
            fields.append("=")
        else:
            current.append(ch)
    if closing is not None:
        raise InputError(path, f"unclosed {'{' if closing == '}' else closing!r}", card.place)
    flush()
    return fields


def split_fields(card: Card, path: str) -> tuple[list[str], list[tuple[str, str, str]]]:
    """Positional fields and ``key=value`` parameters of a card.

    Parameters
    ----------
    card : Card
    path : str
        For messages.

    Returns
    -------
    positional : list of str
        Fields before and between parameters, in order (the keyword
        ``params:`` is dropped).
    params : list of (str, str, str)
        ``(key lower-case, key as written, value text)`` in order.

    Raises
    ------
    InputError
        An unclosed brace or quote; ``=`` without a name or a value; a
        positional field after the first parameter.

    Examples
    --------
    >>> pos, par = split_fields(Card(3, "M1 d g s b nch W = {w*2} l=0.18u"), "x.sp")
    >>> pos, par
    (['M1', 'd', 'g', 's', 'b', 'nch'], [('w', 'W', '{w*2}'), ('l', 'l', '0.18u')])
    """
    raw = _raw_fields(card, path)
    positional: list[str] = []
    params: list[tuple[str, str, str]] = []
    i = 0
    while i < len(raw):
        tok = raw[i]
        nxt = raw[i + 1] if i + 1 < len(raw) else None
        if tok == "=":
            raise InputError(path, "'=' without a parameter name before it", card.place)
        if nxt == "=":
            if i + 2 >= len(raw) or raw[i + 2] == "=":
                raise InputError(path, f"parameter {tok!r} has no value after '='", card.place)
            params.append((tok.lower(), tok, raw[i + 2]))
            i += 3
            continue
        if tok.lower() != "params:":
            if params:
                raise InputError(
                    path,
                    f"field {tok!r} after the parameters; node names and the model "
                    "come before any key=value",
                    card.place,
                )
            positional.append(tok)
        i += 1
    return positional, params
