"""The subcircuit definitions of a SPICE netlist file.

:func:`parse_library` reads the cards of a file (:mod:`extract.netlist.cards`)
into :class:`Subckt` definitions with their elements, parameters and model
names; :func:`choose_top` picks the cell.  Elaboration into a flat circuit is
:mod:`extract.netlist.flatten`; the entry points are
:mod:`extract.netlist.reader`, whose module text gives the accepted subset.

Notes
-----
One pass over the cards, linear in the file size.
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass, field

from extract.errors import Finding, InputError
from extract.inputfile import read_input
from extract.limits import MAX_NETLIST_BYTES
from extract.netlist.cards import Card, read_cards, split_fields

__all__ = ["Subckt", "Library", "parse_library", "choose_top"]

#: What each SPICE element letter is, for messages about rejected ones.
ELEMENT_KINDS = {
    "r": "resistor",
    "l": "inductor",
    "k": "inductor coupling",
    "v": "voltage source",
    "i": "current source",
    "d": "diode",
    "q": "bipolar transistor",
    "j": "JFET",
    "z": "MESFET",
    "e": "controlled source",
    "f": "controlled source",
    "g": "controlled source",
    "h": "controlled source",
    "b": "behavioural source",
    "s": "switch",
    "w": "switch",
    "t": "transmission line",
    "o": "transmission line",
    "u": "transmission line",
    "y": "transmission line",
    "a": "code model",
    "n": "device model",
    "p": "coupled transmission line",
}

_MODEL = re.compile(r"\.model\s+(\S+)\s+([A-Za-z]+)", re.I)


@dataclass
class Subckt:
    """One ``.subckt`` definition as written (nothing evaluated yet).

    Attributes
    ----------
    name : str
        As written.
    ports : list of str
    defaults : list of (str, str)
        ``(name lower-case, value text)`` from the ``.subckt`` line.
    params : list of (Card, list of (str, str, str))
        Local ``.param`` cards with their parameters, in order.
    elements : list of (Card, list of str, list of (str, str, str))
        M, C and X cards with positional fields and parameters.
    line : int
    path : str
        The file that defines it.
    """

    name: str
    ports: list[str]
    defaults: list[tuple[str, str]]
    line: int
    path: str = ""
    params: list[tuple[Card, list[tuple[str, str, str]]]] = field(default_factory=list)
    elements: list[tuple[Card, list[str], list[tuple[str, str, str]]]] = field(default_factory=list)

    def instantiated(self) -> set[str]:
        """Lower-case names of the subcircuits its X lines use."""
        return {pos[-1].lower() for card, pos, _ in self.elements if card.keyword[0] == "x"}


@dataclass
class Library:
    """Everything a netlist file defines.

    Attributes
    ----------
    subckts : dict of str to Subckt
        Keyed by lower-case name, in file order.
    params : list of (Card, list of (str, str, str))
        Global ``.param`` cards.
    globals : set of str
        Lower-case ``.global`` net names.
    models : dict of str to (str, int)
        Lower-case model name -> (``"nmos"``/``"pmos"``, line) from
        ``.model`` cards.
    findings : list of Finding
    scale : float or None
        From a ``.option scale=`` card, if any.
    dialect : str
        ``"cdl"`` for a ``.cdl`` file, else ``"spice"``.
    skipped : list of str
        Included files (or ``.lib`` sections) skipped as model libraries.
    files : dict of str to str
        Every file read (absolute path -> path as named), the top one first.
    """

    subckts: dict[str, Subckt] = field(default_factory=dict)
    params: list[tuple[Card, list[tuple[str, str, str]]]] = field(default_factory=list)
    globals: set[str] = field(default_factory=set)
    models: dict[str, tuple[str, int]] = field(default_factory=dict)
    findings: list[Finding] = field(default_factory=list)
    scale: float | None = None
    dialect: str = "spice"
    skipped: list[str] = field(default_factory=list)
    files: dict[str, str] = field(default_factory=dict)


def _param_card(card: Card, path: str) -> list[tuple[str, str, str]]:
    pos, params = split_fields(card, path)
    if len(pos) != 1 or not params:
        raise InputError(path, ".param needs name=value pairs only", card.place)
    return params


def _start_subckt(card: Card, path: str, lib: Library) -> Subckt:
    pos, params = split_fields(card, path)
    if len(pos) < 2:
        raise InputError(path, ".subckt needs a name", card.place)
    name, ports = pos[1], pos[2:]
    if name.lower() in lib.subckts:
        first = lib.subckts[name.lower()].line
        raise InputError(path, f"subcircuit {name} is defined twice (first at line {first})", card.place)
    seen: set[str] = set()
    for port in ports:
        if port.lower() in seen:
            raise InputError(path, f"port {port} appears twice in .subckt {name}", card.place)
        seen.add(port.lower())
    return Subckt(name, ports, [(k, v) for k, _, v in params], card.line, path)


def _element(card: Card, path: str, sub: Subckt, names: dict[str, int]) -> None:
    kw = card.keyword
    letter = kw[0]
    if letter not in "mcxrd":
        kind = ELEMENT_KINDS.get(letter, "element")
        raise InputError(
            path,
            f"{card.text.split()[0]} ({kind}) is not supported in a cell: use MOSFETs (M), "
            "capacitors (C), resistors (R, taken as shorts), diodes (D, left out) and subcircuit "
            "instances (X) only",
            card.place,
        )
    if kw in names:
        raise InputError(
            path, f"element {card.text.split()[0]} is defined twice in {sub.name} "
            f"(first at line {names[kw]})", card.place,
        )
    names[kw] = card.line
    pos, params = split_fields(card, path)
    if letter == "x":
        pos = _cdl_instance(pos)
    if letter == "x" and len(pos) < 2:
        raise InputError(path, f"{pos[0]} names no subcircuit", card.place)
    sub.elements.append((card, pos, params))


def _cdl_instance(pos: list[str]) -> list[str]:
    """The fields of an X line without CDL's ``/`` before the subcircuit name.

    CDL writes an instance as ``XI1 a b / CELL`` (or ``XI1 a b /CELL``); the
    slash is a separator, not a node.  A node named ``/`` means nothing in
    SPICE either, so the rule holds in every dialect.  (A ``/`` inside a
    name, ``X1/A``, is part of the name.)

    Examples
    --------
    >>> _cdl_instance(["XI1", "a", "b", "/", "INV"])
    ['XI1', 'a', 'b', 'INV']
    >>> _cdl_instance(["XI1", "a", "b", "/INV"])
    ['XI1', 'a', 'b', 'INV']
    >>> _cdl_instance(["X1", "u/a", "INV"])
    ['X1', 'u/a', 'INV']
    """
    if len(pos) >= 3 and pos[-2] == "/":
        return pos[:-2] + pos[-1:]
    if len(pos) >= 2 and pos[-1].startswith("/") and len(pos[-1]) > 1:
        return pos[:-1] + [pos[-1][1:]]
    return pos


def _model(card: Card, path: str, lib: Library) -> None:
    m = _MODEL.match(card.text)
    if not m:
        raise InputError(path, ".model needs a name and a type", card.place)
    kind = m.group(2).lower()
    if kind in ("nmos", "pmos"):
        lib.models[m.group(1).lower()] = (kind, card.line)


_SUBCKT_LINE = re.compile(rb"^[ \t]*\.subckt\b", re.I | re.M)
_MODEL_LINE = re.compile(rb"^[ \t]*\.model\b", re.I | re.M)
_SCALE = re.compile(r"\bscale\s*=\s*(\S+)", re.I)
#: Included files larger than this are refused (a netlist library of a
#: whole cell family is a few MB; a bigger include is a mistake).
MAX_INCLUDE_BYTES = MAX_NETLIST_BYTES
#: How deep includes may nest.
MAX_INCLUDE_DEPTH = 32


def _decode(data: bytes) -> str:
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        return data.decode("latin-1")


def _lib_section(data: bytes, section: str, path: str, place: str) -> bytes:
    """The text between ``.lib SECTION`` and its ``.endl`` in a library file."""
    start = re.search(rb"^[ \t]*\.lib[ \t]+" + re.escape(section.encode()) + rb"[ \t]*\r?$",
                      data, re.I | re.M)
    if start is None:
        raise InputError(path, f"no section {section} in the library {path}", place)
    end = re.compile(rb"^[ \t]*\.endl\b", re.I | re.M).search(data, start.end())
    # keep the lines before the section as blank lines, so that line
    # numbers in messages are those of the file
    head = b"\n" * data.count(b"\n", 0, start.end())
    return head + data[start.end(): end.start() if end else len(data)]


class _Parser:
    """One library being read: the state shared by every file it includes."""

    def __init__(self, top_path: str):
        self.lib = Library(dialect="cdl" if top_path.lower().endswith(".cdl") else "spice")
        self.bench: list[str] = []

    def include(self, card: Card, path: str, stack: tuple[str, ...], names: list[str]) -> None:
        """Follow ``.include FILE`` or ``.lib FILE SECTION`` (``names``)."""
        if not names:
            raise InputError(path, f"{card.keyword} needs a file name", card.place)
        target = names[0].strip("'\"")
        if card.keyword == ".lib" and len(names) == 1:
            # ``.lib SECTION`` opens a section of a library read whole:
            # sections are entered only through ``.lib FILE SECTION``
            raise _SkipSection()
        full = target if os.path.isabs(target) else os.path.join(os.path.dirname(os.path.abspath(path)), target)
        full = os.path.normpath(full)
        section = names[1] if card.keyword == ".lib" and len(names) > 1 else None
        key = f"{full}#{section}" if section else full
        if key in stack:
            chain = " → ".join([*(k.rsplit("/", 1)[-1] for k in stack), os.path.basename(key)])
            raise InputError(path, f"{card.keyword} {target}: include cycle {chain}", card.place)
        if len(stack) >= MAX_INCLUDE_DEPTH:
            raise InputError(path, f"{card.keyword} {target}: includes nest deeper than {MAX_INCLUDE_DEPTH}",
                             card.place)
        try:
            data = read_input(full, "netlist library", MAX_INCLUDE_BYTES)
        except InputError as exc:  # the including line is the place
            raise InputError(path, f"{card.keyword} {target}: {exc.message} ({full})", card.place) from None
        shown = os.path.relpath(full) if not os.path.isabs(target) else full
        if section is not None:
            data = _lib_section(data, section, shown, card.place)
        what = f"{shown} section {section}" if section else shown
        # what brings no subcircuit at all, or a .lib section that defines
        # device models (a foundry corner), is a model library: the tech
        # file has the device parameters, so it is not read (nor what it
        # includes); an included file with subcircuits is read, its .model
        # cards only giving model names a type
        if not _SUBCKT_LINE.search(data) or (section is not None and _MODEL_LINE.search(data)):
            if what not in self.lib.skipped:
                self.lib.skipped.append(what)
            return
        self.lib.files.setdefault(full, shown)
        self.read(_decode(data), shown, (*stack, key))

    def read(self, text: str, path: str, stack: tuple[str, ...]) -> None:
        lib = self.lib
        current: Subckt | None = None
        names: dict[str, int] = {}
        control_line = 0
        section_line = 0
        for card in read_cards(text, path):
            kw = card.keyword
            if control_line:
                if kw == ".endc":
                    control_line = 0
                continue
            if section_line:
                if kw == ".endl":
                    section_line = 0
                continue
            if kw == ".end":
                break
            if kw == ".subckt":
                if current is not None:
                    raise InputError(
                        path, f".subckt inside .subckt {current.name} (line {current.line}); "
                        "nested definitions are not supported", card.place,
                    )
                current = _start_subckt(card, path, lib)
                names = {}
            elif kw == ".ends":
                if current is None:
                    raise InputError(path, ".ends without .subckt", card.place)
                end_name = card.text.split()[1:2]
                if end_name and end_name[0].lower() != current.name.lower():
                    raise InputError(
                        path, f".ends {end_name[0]} closes .subckt {current.name} (line {current.line})",
                        card.place,
                    )
                lib.subckts[current.name.lower()] = current
                current = None
            elif kw == ".param":
                target = lib.params if current is None else current.params
                target.append((card, _param_card(card, path)))
            elif kw in (".include", ".inc", ".lib"):
                if current is not None:
                    raise InputError(path, f"{kw} inside .subckt {current.name} is not supported", card.place)
                try:
                    self.include(card, path, stack, card.text.split()[1:])
                except _SkipSection:
                    section_line = card.line
            elif kw == ".global":
                lib.globals.update(n.lower() for n in card.text.split()[1:])
            elif kw == ".model":
                _model(card, path, lib)
            elif kw in (".option", ".options", ".opt"):
                found = _SCALE.search(card.text)
                if found:
                    lib.scale = _scale_value(found.group(1), path, card.place)
            elif kw == ".control":
                control_line = card.line
            elif kw.startswith("."):
                if current is not None:
                    raise InputError(path, f"{kw} is not allowed inside .subckt {current.name}", card.place)
                self.bench.append(kw)
            elif current is None:
                self.bench.append(card.text.split()[0])
            else:
                _element(card, path, current, names)
        if current is not None:
            raise InputError(path, f".subckt {current.name} has no .ends", f"line {current.line}")
        if control_line:
            raise InputError(path, ".control has no .endc", f"line {control_line}")


class _SkipSection(Exception):
    """A ``.lib SECTION`` opening met while reading a file whole."""


def _scale_value(text: str, path: str, place: str) -> float:
    from extract.netlist.expressions import ExpressionError, value_of

    try:
        value = value_of(text, {})
    except ExpressionError as exc:
        raise InputError(path, f".option scale: {exc}", place) from None
    if not 1e-12 <= value <= 1.0:
        raise InputError(path, f".option scale={text}: must be between 1e-12 and 1 (metres per unit)", place)
    return value


def parse_library(text: str, path: str) -> Library:
    """Subcircuit definitions, parameters and models of a netlist.

    Parameters
    ----------
    text : str
        The netlist.
    path : str
        For messages, and the folder that ``.include`` and ``.lib`` paths
        are relative to.  A name ending in ``.cdl`` (any case) makes the
        dialect CDL.

    Returns
    -------
    Library

    Raises
    ------
    InputError
        Structural errors (unbalanced ``.subckt``/``.ends``, unsupported
        elements, duplicates, include cycles, missing included files),
        naming the file and line.

    Notes
    -----
    ``.include FILE`` and ``.lib FILE SECTION`` are followed, relative to
    the including file, when what they bring defines subcircuits (a
    ``.lib`` section also only when it holds no ``.model``); anything else
    is a model library and is skipped unread
    (listed in :attr:`Library.skipped`).  A byte-level scan decides this
    before any parsing, so a foundry model library costs one read, not a
    parse.  Otherwise one pass over the cards, linear in the text read.

    Examples
    --------
    >>> lib = parse_library(".subckt INV a y vdd vss\\nMP y a vdd vdd pch W=1u L=0.18u\\n.ends", "x.sp")
    >>> sub = lib.subckts["inv"]
    >>> sub.ports, [pos[0] for _, pos, _ in sub.elements]
    (['a', 'y', 'vdd', 'vss'], ['MP'])
    >>> parse_library(".option scale=1e-6\\n.SUBCKT A y\\n.ENDS", "a.cdl").scale
    1e-06
    """
    parser = _Parser(path)
    parser.lib.files[os.path.abspath(path)] = path
    parser.read(text, path, (os.path.normpath(os.path.abspath(path)),))
    lib = parser.lib
    bench = parser.bench
    if bench:
        lib.findings.append(Finding(
            f"{path}: ignored {len(bench)} line(s) outside any .subckt (test bench: "
            f"{', '.join(sorted(set(bench), key=str.lower)[:6])}{', ...' if len(set(bench)) > 6 else ''})"
        ))
    if lib.skipped:
        lib.findings.append(Finding(
            f"{path}: skipped {len(lib.skipped)} included model librar{'y' if len(lib.skipped) == 1 else 'ies'} "
            f"(device parameters come from the tech file): {', '.join(lib.skipped[:3])}"
            f"{f' and {len(lib.skipped) - 3} more' if len(lib.skipped) > 3 else ''}"
        ))
    return lib


def choose_top(lib: Library, path: str, subckt: str | None = None) -> Subckt:
    """The subcircuit that is the cell.

    Parameters
    ----------
    lib : Library
    path : str
    subckt : str, optional
        Its name (case-insensitive).  Default: the only subcircuit that no
        other one instantiates.

    Returns
    -------
    Subckt

    Raises
    ------
    InputError
        No subcircuit, an unknown name, or several candidates.
    """
    if not lib.subckts:
        raise InputError(path, "no .subckt in the file: define the cell as a .subckt")
    listing = ", ".join(s.name for s in lib.subckts.values())
    if subckt is not None:
        if subckt.lower() not in lib.subckts:
            raise InputError(path, f"no subcircuit named {subckt} (the file defines: {listing})")
        return lib.subckts[subckt.lower()]
    used: set[str] = set()
    for sub in lib.subckts.values():
        used |= sub.instantiated() - {sub.name.lower()}
    tops = [s for key, s in lib.subckts.items() if key not in used]
    if len(tops) == 1:
        return tops[0]
    if not tops:
        raise InputError(path, f"every subcircuit is instantiated by another ({listing}); name the cell")
    raise InputError(
        path, f"several top-level subcircuits: {', '.join(s.name for s in tops)}; name the one to read"
    )


