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

import re
from dataclasses import dataclass, field

from extract.errors import Finding, InputError
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
    """

    name: str
    ports: list[str]
    defaults: list[tuple[str, str]]
    line: int
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
    """

    subckts: dict[str, Subckt] = field(default_factory=dict)
    params: list[tuple[Card, list[tuple[str, str, str]]]] = field(default_factory=list)
    globals: set[str] = field(default_factory=set)
    models: dict[str, tuple[str, int]] = field(default_factory=dict)
    findings: list[Finding] = field(default_factory=list)


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
    return Subckt(name, ports, [(k, v) for k, _, v in params], card.line)


def _element(card: Card, path: str, sub: Subckt, names: dict[str, int]) -> None:
    kw = card.keyword
    letter = kw[0]
    if letter not in "mcx":
        kind = ELEMENT_KINDS.get(letter, "element")
        raise InputError(
            path,
            f"{card.text.split()[0]} ({kind}) is not supported in a schematic: use MOSFETs (M), "
            "capacitors (C) and subcircuit instances (X) only",
            card.place,
        )
    if kw in names:
        raise InputError(
            path, f"element {card.text.split()[0]} is defined twice in {sub.name} "
            f"(first at line {names[kw]})", card.place,
        )
    names[kw] = card.line
    pos, params = split_fields(card, path)
    if letter == "x" and len(pos) < 2:
        raise InputError(path, f"{pos[0]} names no subcircuit", card.place)
    sub.elements.append((card, pos, params))


def _model(card: Card, path: str, lib: Library) -> None:
    m = _MODEL.match(card.text)
    if not m:
        raise InputError(path, ".model needs a name and a type", card.place)
    kind = m.group(2).lower()
    if kind in ("nmos", "pmos"):
        lib.models[m.group(1).lower()] = (kind, card.line)


def parse_library(text: str, path: str) -> Library:
    """Subcircuit definitions, parameters and models of a netlist.

    Parameters
    ----------
    text : str
        The netlist.
    path : str
        For messages.

    Returns
    -------
    Library

    Raises
    ------
    InputError
        Structural errors (unbalanced ``.subckt``/``.ends``, ``.include``,
        unsupported elements, duplicates), naming the line.

    Examples
    --------
    >>> lib = parse_library(".subckt INV a y vdd vss\\nMP y a vdd vdd pch W=1u L=0.18u\\n.ends", "x.sp")
    >>> sub = lib.subckts["inv"]
    >>> sub.ports, [pos[0] for _, pos, _ in sub.elements]
    (['a', 'y', 'vdd', 'vss'], ['MP'])
    """
    lib = Library()
    current: Subckt | None = None
    names: dict[str, int] = {}
    control_line = 0
    bench: list[str] = []
    for card in read_cards(text, path):
        kw = card.keyword
        if control_line:
            if kw == ".endc":
                control_line = 0
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
            raise InputError(
                path, f"{kw} is not supported: put every subcircuit in this one file "
                "(device parameters come from the tech file)", card.place,
            )
        elif kw == ".global":
            lib.globals.update(n.lower() for n in card.text.split()[1:])
        elif kw == ".model":
            _model(card, path, lib)
        elif kw == ".control":
            control_line = card.line
        elif kw.startswith("."):
            if current is not None:
                raise InputError(path, f"{kw} is not allowed inside .subckt {current.name}", card.place)
            bench.append(kw)
        elif current is None:
            bench.append(card.text.split()[0])
        else:
            _element(card, path, current, names)
    if current is not None:
        raise InputError(path, f".subckt {current.name} has no .ends", f"line {current.line}")
    if control_line:
        raise InputError(path, ".control has no .endc", f"line {control_line}")
    if bench:
        lib.findings.append(Finding(
            f"{path}: ignored {len(bench)} line(s) outside any .subckt (test bench: "
            f"{', '.join(sorted(set(bench), key=str.lower)[:6])}{', ...' if len(set(bench)) > 6 else ''})"
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


