"""SPICE numbers and ``.param`` expressions, evaluated without ``eval``.

A schematic gives values as SPICE numbers (``1.2u``, ``0.5p``, ``2meg``)
or as expressions over parameters (``{wn*2}``, ``'max(wn, 0.4u)'``).
This module turns both into floats.

Numbers
    Digits with an optional decimal point and exponent, then an optional
    scale suffix, case-insensitive: ``t`` 1e12, ``g`` 1e9, ``meg`` 1e6,
    ``k`` 1e3, ``mil`` 25.4e-6, ``m`` 1e-3, ``u`` 1e-6, ``n`` 1e-9,
    ``p`` 1e-12, ``f`` 1e-15, ``a`` 1e-18.  ``meg`` and ``mil`` are tried
    before ``m``.  Letters after the suffix are ignored, as SPICE does, so
    ``1.2um`` is 1.2e-6 and ``10pF`` is 1e-11 (and, as in SPICE, ``1M`` is
    one milli, ``1F`` one femto).

Expressions
    ``+ - * /``, ``**`` or ``^`` (power), parentheses, unary ``+``/``-``,
    numbers as above, parameter names (case-insensitive) and the functions
    ``sqrt abs exp log`` (natural) of one argument and ``min max pow`` of
    two (ngspice's ``min``/``max`` take exactly two; more is refused here
    rather than read differently from the simulator).  Precedence and associativity are
    those of ngspice (checked against ngspice 39 in the tests): power
    binds tighter than unary minus (``-3^2`` is -9) and groups from the
    left (``2^2^3`` is 64); its right operand may carry a sign (``2**-1``).

Notes
-----
The evaluator is a recursive-descent parser over a regular-expression
tokenizer; it computes while it parses, so the cost is linear in the
length of the expression.  Nothing is handed to Python's ``eval``.
"""

from __future__ import annotations

import math
import re

__all__ = ["ExpressionError", "SUFFIXES", "parse_number", "evaluate", "value_of"]


class ExpressionError(ValueError):
    """A number or expression that cannot be evaluated (the message says why)."""


#: Scale suffixes of SPICE numbers, in the order they are tried.
SUFFIXES = (
    ("meg", 1e6),
    ("mil", 25.4e-6),
    ("t", 1e12),
    ("g", 1e9),
    ("k", 1e3),
    ("m", 1e-3),
    ("u", 1e-6),
    ("n", 1e-9),
    ("p", 1e-12),
    ("f", 1e-15),
    ("a", 1e-18),
)

_NUMBER = re.compile(r"(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?([A-Za-z]*)")
_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_.]*")
_OPERATOR = re.compile(r"\*\*|[-+*/^(),]")
_SPACE = re.compile(r"\s+")


def _scale(letters: str) -> float:
    low = letters.lower()
    for suffix, factor in SUFFIXES:
        if low.startswith(suffix):
            return factor
    return 1.0


def parse_number(text: str) -> float | None:
    """A SPICE number, or None when ``text`` is not one.

    Parameters
    ----------
    text : str
        E.g. ``"1.2u"``, ``"-3e-15"``, ``"2MEG"``.

    Returns
    -------
    float or None

    Examples
    --------
    >>> parse_number("1.2um"), parse_number("2meg"), parse_number("5M")
    (1.2e-06, 2000000.0, 0.005)
    >>> parse_number("-0.5p") == -0.5e-12, parse_number("wn")
    (True, None)
    """
    text = text.strip()
    sign = 1.0
    if text and text[0] in "+-":
        sign = -1.0 if text[0] == "-" else 1.0
        text = text[1:]
    m = _NUMBER.fullmatch(text)
    if not m:
        return None
    letters = m.group(1)
    mantissa = text[: len(text) - len(letters)]
    return sign * float(mantissa) * _scale(letters)


def _tokens(text: str) -> list[tuple[str, object]]:
    out: list[tuple[str, object]] = []
    pos = 0
    while pos < len(text):
        m = _SPACE.match(text, pos)
        if m:
            pos = m.end()
            continue
        m = _NUMBER.match(text, pos)
        if m:
            letters = m.group(1)
            mantissa = m.group(0)[: len(m.group(0)) - len(letters)]
            out.append(("num", float(mantissa) * _scale(letters)))
            pos = m.end()
            continue
        m = _NAME.match(text, pos)
        if m:
            out.append(("name", m.group(0).lower()))
            pos = m.end()
            continue
        m = _OPERATOR.match(text, pos)
        if m:
            op = m.group(0)
            out.append(("op", "**" if op == "^" else op))
            pos = m.end()
            continue
        raise ExpressionError(f"unexpected character {text[pos]!r} in expression {text!r}")
    out.append(("end", None))
    return out


def _sqrt(x: float) -> float:
    if x < 0:
        raise ExpressionError(f"sqrt of a negative number ({x:g})")
    return math.sqrt(x)


def _log(x: float) -> float:
    if x <= 0:
        raise ExpressionError(f"log of a number that is not positive ({x:g})")
    return math.log(x)


def _pow(x: float, y: float) -> float:
    try:
        result = x**y
    except ZeroDivisionError:
        raise ExpressionError("zero raised to a negative power") from None
    except OverflowError:
        raise ExpressionError("number too large") from None
    if isinstance(result, complex):
        raise ExpressionError(f"negative number raised to a fractional power ({x:g}**{y:g})")
    return result


def _exp(x: float) -> float:
    try:
        return math.exp(x)
    except OverflowError:
        raise ExpressionError("number too large") from None


#: name -> (function, minimum arguments, maximum arguments or None)
_FUNCTIONS = {
    "sqrt": (_sqrt, 1, 1),
    "abs": (abs, 1, 1),
    "exp": (_exp, 1, 1),
    "log": (_log, 1, 1),
    "pow": (_pow, 2, 2),
    "min": (min, 2, 2),
    "max": (max, 2, 2),
}


class _Parser:
    """Recursive descent: expr := term (('+'|'-') term)*;
    term := unary (('*'|'/') unary)*; unary := ('+'|'-') unary | power;
    power := atom ('**' signed)*  (left to right, as ngspice);
    signed := ('+'|'-') signed | atom;
    atom := number | name | name '(' args ')' | '(' expr ')'."""

    def __init__(self, text: str, params: dict[str, float]):
        self.text = text
        self.params = params
        self.toks = _tokens(text)
        self.i = 0

    def peek(self) -> tuple[str, object]:
        return self.toks[self.i]

    def take(self) -> tuple[str, object]:
        tok = self.toks[self.i]
        self.i += 1
        return tok

    def expect(self, op: str) -> None:
        kind, val = self.take()
        if (kind, val) != ("op", op):
            raise ExpressionError(f"expected {op!r} in expression {self.text!r}")

    def parse(self) -> float:
        result = self.expr()
        if self.peek()[0] != "end":
            raise ExpressionError(f"unexpected {self.peek()[1]!r} in expression {self.text!r}")
        return result

    def expr(self) -> float:
        value = self.term()
        while self.peek() in (("op", "+"), ("op", "-")):
            op = self.take()[1]
            right = self.term()
            value = value + right if op == "+" else value - right
        return value

    def term(self) -> float:
        value = self.unary()
        while self.peek() in (("op", "*"), ("op", "/")):
            op = self.take()[1]
            right = self.unary()
            if op == "*":
                value = value * right
            elif right == 0:
                raise ExpressionError(f"division by zero in expression {self.text!r}")
            else:
                value = value / right
        return value

    def unary(self) -> float:
        if self.peek() in (("op", "+"), ("op", "-")):
            op = self.take()[1]
            value = self.unary()
            return -value if op == "-" else value
        return self.power()

    def power(self) -> float:
        value = self.atom()
        while self.peek() == ("op", "**"):
            self.take()
            value = _pow(value, self.signed())
        return value

    def signed(self) -> float:
        if self.peek() in (("op", "+"), ("op", "-")):
            op = self.take()[1]
            value = self.signed()
            return -value if op == "-" else value
        return self.atom()

    def atom(self) -> float:
        kind, val = self.take()
        if kind == "num":
            return val  # type: ignore[return-value]
        if kind == "op" and val == "(":
            value = self.expr()
            self.expect(")")
            return value
        if kind == "name":
            if self.peek() == ("op", "("):
                return self.call(str(val))
            if val not in self.params:
                raise ExpressionError(f"unknown parameter {val!r}")
            return self.params[val]  # type: ignore[index]
        what = "end of expression" if kind == "end" else repr(val)
        raise ExpressionError(f"unexpected {what} in expression {self.text!r}")

    def call(self, name: str) -> float:
        if name not in _FUNCTIONS:
            raise ExpressionError(
                f"unknown function {name!r} (known: {', '.join(sorted(_FUNCTIONS))})"
            )
        func, least, most = _FUNCTIONS[name]
        self.expect("(")
        args = []
        if self.peek() != ("op", ")"):
            args.append(self.expr())
            while self.peek() == ("op", ","):
                self.take()
                args.append(self.expr())
        self.expect(")")
        if len(args) < least or (most is not None and len(args) > most):
            want = str(least) if most == least else f"at least {least}"
            raise ExpressionError(f"{name}() takes {want} argument(s), got {len(args)}")
        return float(func(*args))


def evaluate(text: str, params: dict[str, float] | None = None) -> float:
    """Evaluate an arithmetic expression over parameters.

    Parameters
    ----------
    text : str
        The expression, without braces or quotes.
    params : dict of str to float, optional
        Known parameters, keys lower-case.

    Returns
    -------
    float

    Raises
    ------
    ExpressionError
        Syntax errors, unknown names, division by zero, domain errors.

    Examples
    --------
    >>> evaluate("2*(wn + 0.1u)", {"wn": 0.4e-6}) == 2 * (0.4e-6 + 0.1e-6)
    True
    >>> evaluate("-2^2"), evaluate("2**3**2"), evaluate("max(1, max(sqrt(16), abs(-3)))")
    (-4.0, 64.0, 4.0)
    >>> evaluate("w/0", {"w": 1.0})
    Traceback (most recent call last):
    ...
    extract.netlist.expressions.ExpressionError: division by zero in expression 'w/0'
    """
    if len(text) > 10_000:
        raise ExpressionError("expression longer than 10000 characters")
    try:
        result = _Parser(text, params or {}).parse()
    except RecursionError:
        raise ExpressionError("expression nested too deeply") from None
    if not math.isfinite(result):
        raise ExpressionError(f"expression {text!r} is not a finite number")
    return result


def value_of(text: str, params: dict[str, float] | None = None) -> float:
    """A value as written on an element or ``.param`` line.

    ``{expr}``, ``'expr'`` and ``"expr"`` are expressions; a bare SPICE
    number is a number; anything else is tried as an expression too (so
    ``W=wn`` works as in common SPICE dialects).

    Parameters
    ----------
    text : str
    params : dict of str to float, optional

    Returns
    -------
    float

    Raises
    ------
    ExpressionError

    Examples
    --------
    >>> value_of("{w*2}", {"w": 0.5}), value_of("'w + 1'", {"w": 0.5}), value_of("3k")
    (1.0, 1.5, 3000.0)
    """
    text = text.strip()
    if len(text) >= 2 and (
        (text[0] == "{" and text[-1] == "}") or (text[0] == text[-1] and text[0] in "'\"")
    ):
        return evaluate(text[1:-1], params)
    if not text:
        raise ExpressionError("missing value")
    number = parse_number(text)
    if number is not None:
        return number
    return evaluate(text, params)
