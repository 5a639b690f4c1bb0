"""Writing a circuit as a SPICE subcircuit (post-layout netlist).

Output conventions
------------------
- One ``.subckt CELL ports...`` ... ``.ends CELL`` block, preceded by a
  comment header (tool and version, cell, source file name, process,
  units, what the C lines hold, the bulk and reference nodes, and every
  name that had to be changed).
- Ports: every labelled net, plus the nets used as bulk or as the
  capacitor reference node (so that no bulk is left floating inside the
  subcircuit).  Order: power nets, then ground nets, then the rest, each
  group sorted by name.  Long port lists continue on ``+`` lines.
- One M line per device, sorted by device name::

      Mname drain gate source bulk model W=..u L=..u AD=..p AS=..p PD=..u PS=..u

  bulk is the first ground net for nmos and the first power net for pmos
  (the first name of ``[nets] ground`` / ``power`` found in the circuit,
  compared without case; else the first circuit net with that role; else
  the tech file's first name, which then becomes a port).  model is the
  first of ``[mos.TYPE] models``, or the type name when none is given.
  PD and PS include the gate edge, as SPICE level 1 expects.
- One C line per net, ``Cw_<net> <net> <ref> <value>f``, holding that
  net's *wire* capacitance only (poly and metal area and fringe), to the
  reference node ``<ref>`` = the ground net chosen as nmos bulk.  Nets
  with zero wire capacitance, and the reference net itself, get none.
  Junction capacitance comes from AD/AS/PD/PS through the device model,
  gate and overlap capacitance from the model's gate parameters, as in
  any post-layout netlist.
- Units: W, L, PD, PS in µm (suffix ``u``), AD, AS in µm² (suffix ``p``,
  i.e. 1e-12 m²), capacitors in fF (suffix ``f``).  Numbers have six
  significant digits, positional (no exponent).
- Names: every character other than an ASCII letter, digit or ``_``
  becomes ``_``; a net whose result is ``0`` or ``gnd`` (any case) gets the
  prefix ``n_`` (both mean the global ground to ngspice, which would
  short the net); a device name that does not start with ``M`` gets the
  prefix ``M``.  Names that then clash, ignoring case as SPICE does, get
  ``_2``, ``_3``, ... (see :func:`extract.writers.numbers.unique_names`).
  A name that needs no change is never changed.  The header lists every
  renamed net and device.
- The same circuit and tech always give byte-identical text (nothing
  depends on time, host, dict order or the source file's directory).
"""

from __future__ import annotations

import os
import re

from extract.circuit import Circuit
from extract.writers.numbers import fixed, tool_version, unique_names
from extract.tech import NetRoles, Tech

__all__ = ["write_spice", "spice_safe", "spice_net_names", "supply_nets"]

_UNSAFE = re.compile(r"[^A-Za-z0-9_]")
_ROLE_RANK = {"power": 0, "ground": 1}
_LINE = 78


def spice_safe(name: str) -> str:
    """The SPICE-safe form of a net or cell name, before clash resolution.

    Parameters
    ----------
    name : str

    Returns
    -------
    str
        Characters other than ASCII letters, digits and ``_`` replaced by
        ``_``; ``"_"`` for an empty name; prefix ``n_`` when the result is
        ``0`` or ``gnd`` in any case (ngspice's global ground).

    Examples
    --------
    >>> spice_safe("out<3>"), spice_safe("a b"), spice_safe("GND"), spice_safe("0")
    ('out_3_', 'a_b', 'n_GND', 'n_0')
    """
    safe = _UNSAFE.sub("_", name) or "_"
    if safe.lower() in ("0", "gnd"):
        safe = "n_" + safe
    return safe


def _device_safe(name: str) -> str:
    safe = _UNSAFE.sub("_", name)
    return safe if safe[:1] in ("M", "m") else "M" + safe


def supply_nets(circuit: Circuit, tech: Tech) -> tuple[str, str]:
    """The ground and power nets used as nmos and pmos bulk.

    Parameters
    ----------
    circuit : Circuit
    tech : Tech

    Returns
    -------
    (str, str)
        ``(ground, power)``.  For each: the first name of the tech's
        ``[nets]`` list present in the circuit (compared without case,
        returned as the circuit spells it); else the first circuit net,
        by name, with that role; else the tech's first name (or the
        default ``VSS``/``VDD`` when the list is empty).

    Notes
    -----
    O(nets + names in the tech's lists).

    Examples
    --------
    >>> from extract.circuit import Net
    >>> c = Circuit("x", {"vdd": Net("vdd", role="power")}, [])
    >>> supply_nets(c, Tech("t", 1.8, NetRoles(power=("VDD",), ground=("VSS",)), {}, {}))
    ('VSS', 'vdd')
    """
    by_upper: dict[str, str] = {}
    for name in sorted(circuit.nets):
        by_upper.setdefault(name.upper(), name)

    def pick(names: tuple[str, ...], role: str, default: str) -> str:
        for candidate in names:
            if candidate.upper() in by_upper:
                return by_upper[candidate.upper()]
        with_role = sorted(n for n, net in circuit.nets.items() if net.role == role)
        if with_role:
            return with_role[0]
        return names[0] if names else default

    defaults = NetRoles()
    return (
        pick(tech.nets.ground, "ground", defaults.ground[0]),
        pick(tech.nets.power, "power", defaults.power[0]),
    )


def _all_net_names(circuit: Circuit, extra: tuple[str, ...]) -> set[str]:
    names = set(circuit.nets) | set(extra)
    for d in circuit.devices:
        names.update((d.drain, d.gate, d.source))
    return names


def spice_net_names(circuit: Circuit, tech: Tech) -> dict[str, str]:
    """Original net name to the name :func:`write_spice` writes.

    Parameters
    ----------
    circuit : Circuit
    tech : Tech

    Returns
    -------
    dict of str to str
        Covers every circuit net, every device terminal net and the
        supply nets of :func:`supply_nets`.

    Examples
    --------
    >>> from extract.circuit import Net
    >>> c = Circuit("x", {"a-b": Net("a-b"), "a_b": Net("a_b")}, [])
    >>> names = spice_net_names(c, Tech("t", 1.8, NetRoles(), {}, {}))
    >>> names["a_b"], names["a-b"]
    ('a_b', 'a_b_2')
    """
    return unique_names(
        _all_net_names(circuit, supply_nets(circuit, tech)), spice_safe, fold_case=True
    )


def _si(value: float, suffix: str) -> str:
    return fixed(value) + suffix


def _wrap(head: str, words: list[str]) -> list[str]:
    lines, line = [], head
    for word in words:
        if len(line) + 1 + len(word) > _LINE and line not in (head, "+"):
            lines.append(line)
            line = "+"
        line += " " + word
    lines.append(line)
    return lines


def _role(circuit: Circuit, tech: Tech, name: str) -> str:
    net = circuit.nets.get(name)
    return net.role if net is not None else tech.role_of(name)


def write_spice(circuit: Circuit, tech: Tech) -> str:
    """The circuit as a SPICE subcircuit, as text.

    Parameters
    ----------
    circuit : Circuit
        Extracted (or read) circuit; W/L in µm, AD/AS in µm², PD/PS in µm,
        net capacitance in fF.
    tech : Tech
        Gives the supply net names, the model names and the process name.

    Returns
    -------
    str
        The netlist, ending with a newline.  Conventions: see the module
        docstring.

    Raises
    ------
    ValueError
        If a number in the circuit is not finite.

    Notes
    -----
    One pass over the devices and one over the nets after sorting:
    O((devices + nets) log(devices + nets)).

    Examples
    --------
    >>> from extract.circuit import Device, Net, CapParts
    >>> c = Circuit("inv", {"A": Net("A", labelled=True, cap=CapParts(wire=0.5)),
    ...                     "Y": Net("Y", labelled=True), "VSS": Net("VSS", "ground", labelled=True)},
    ...             [Device("M1", "nmos", "Y", "A", "VSS", 1.0, 0.18, 0.5, 0.5, 3.0, 3.0)])
    >>> text = write_spice(c, Tech("t", 1.8, NetRoles(), {}, {}))
    >>> [line for line in text.splitlines() if not line.startswith("*")]
    ['.subckt inv VSS A Y', 'M1 Y A VSS VSS nmos W=1u L=0.18u AD=0.5p AS=0.5p PD=3u PS=3u', \
'Cw_A A VSS 0.5f', '.ends inv']
    """
    ground, power = supply_nets(circuit, tech)
    names = spice_net_names(circuit, tech)
    devices = sorted(circuit.devices, key=lambda d: d.name)
    dev_names = unique_names((d.name for d in devices), _device_safe, fold_case=True)
    cell = spice_safe(circuit.cell) if circuit.cell else "cell"

    body, used = [], set()
    for d in devices:
        bulk = power if d.type == "pmos" else ground
        used.add(bulk)
        params = tech.mos.get(d.type)
        model = params.models[0] if params is not None and params.models else d.type
        body.append(
            f"{dev_names[d.name]} {names[d.drain]} {names[d.gate]} {names[d.source]} "
            f"{names[bulk]} {model} W={_si(d.w_um, 'u')} L={_si(d.l_um, 'u')} "
            f"AD={_si(d.ad_um2, 'p')} AS={_si(d.as_um2, 'p')} "
            f"PD={_si(d.pd_um, 'u')} PS={_si(d.ps_um, 'u')}"
        )
    for name in sorted(circuit.nets):
        wire = circuit.nets[name].cap.wire
        if wire != 0 and name != ground:
            used.add(ground)
            body.append(f"Cw_{names[name]} {names[name]} {names[ground]} {_si(wire, 'f')}")

    ports = {n for n, net in circuit.nets.items() if net.labelled} | used
    port_order = sorted(ports, key=lambda n: (_ROLE_RANK.get(_role(circuit, tech, n), 2), n))

    header = [
        f"* SPICE netlist written by dynshare {tool_version()}",
        f"* cell {circuit.cell or '(unnamed)'}"
        + (f" from {os.path.basename(circuit.source)}" if circuit.source else "")
        + f", process {tech.name}",
        "* units: W L PD PS in um (u), AD AS in um^2 (p), capacitors in fF (f)",
        "* PD and PS include the gate edge; junction capacitance comes from",
        "* AD/AS/PD/PS and gate/overlap capacitance from the device models.",
        f"* Cw_ lines: wire capacitance of each net only, to reference node {names[ground]}.",
        f"* bulk: nmos to {names[ground]}, pmos to {names[power]}.",
    ]
    renamed = [(n, names[n]) for n in sorted(names) if names[n] != n]
    renamed += [(n, dev_names[n]) for n in sorted(dev_names) if dev_names[n] != n]
    if cell != circuit.cell:
        renamed.insert(0, (circuit.cell, cell))
    if renamed:
        header.append("* renamed for SPICE (original -> written):")
        header += [f"*   {_printable(old)} -> {new}" for old, new in renamed]
    lines = header + _wrap(f".subckt {cell}", [names[n] for n in port_order])
    lines += body + [f".ends {cell}"]
    return "\n".join(lines) + "\n"


def _printable(name: str) -> str:
    """A name quoted for a comment line (no newline can end the comment)."""
    return '"' + name.encode("unicode_escape").decode("ascii").replace('"', '\\"') + '"'
