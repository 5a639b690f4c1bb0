"""Writing a circuit's net capacitance as SPEF (IEEE 1481).

Output conventions
------------------
- Header, in the standard's order: ``*SPEF "IEEE 1481-1998"``,
  ``*DESIGN "CELL"``, ``*DATE``, ``*VENDOR "dynshare"``, ``*PROGRAM
  "dynshare"``, ``*VERSION "x.y.z"``, ``*DESIGN_FLAG "PIN_CAP
  INPUT_OUTPUT"``, ``*DIVIDER /``, ``*DELIMITER :``, ``*BUS_DELIMITER [
  ]``, ``*T_UNIT 1 NS``, ``*C_UNIT 1 FF``, ``*R_UNIT 1 OHM``, ``*L_UNIT 1
  HENRY``.
- ``*DATE`` is always ``"Thu Jan 1 00:00:00 1970"`` (the Unix epoch), so
  that the same circuit gives byte-identical files; it is not the time
  the file was written.
- ``*DESIGN_FLAG "PIN_CAP INPUT_OUTPUT"``: each net's total includes the
  capacitance of the device pins on it (junctions of drain/source pins,
  gate and overlap of gate pins), not only the wire.
- ``*NAME_MAP``: every net gets an index ``*1``, ``*2``, ... in order of
  net name; the rest of the file names nets by index only.
- ``*PORTS``: the labelled nets, direction ``B`` (a layout does not say
  which way a port drives).
- One ``*D_NET *n TOTAL`` block per net, in index order, TOTAL the net's
  whole zero-bias capacitance to ground in fF (junction, wire, gate and
  overlap).  ``*CONN`` lists ``*P *n B`` when the net is a port and
  ``*I DEVICE:PIN DIR`` for every device pin on it: ``D`` and ``S``
  (direction ``B``), ``G`` (direction ``I``); the bulk is not listed (it
  has no drawn terminal).  ``*CAP`` has a single entry ``1 *n TOTAL``, a
  lumped capacitance from the net to ground, equal to the D_NET total.
  A net with no pins and no port has no ``*CONN``; a net with zero
  capacitance has no ``*CAP``.  No ``*RES`` section (lumped nets).
- Nets named by a device terminal but absent from the circuit's net list
  are written too, with total 0.
- Numbers: six significant digits, positional (no exponent).
- Names (from memory of IEEE 1481): ASCII letters, digits and ``_`` are
  written as they are; every other printable ASCII character, including
  the divider ``/``, the delimiter ``:`` and the bus brackets, is escaped
  with a backslash, because in a flat circuit it is part of the name;
  a character that cannot be escaped (space, control, non-ASCII) becomes
  ``_``, and a name that then clashes gets ``_2``, ``_3``, ...  Names are
  case sensitive.  An empty design name is written ``cell``.
"""

from __future__ import annotations

import string

from extract.circuit import Circuit
from extract.writers.numbers import fixed, tool_version, unique_names
from extract.tech import Tech

__all__ = ["write_spef", "spef_escape", "SPEF_DATE"]

#: The fixed ``*DATE`` of every file (see the module docstring).
SPEF_DATE = "Thu Jan 1 00:00:00 1970"

_PLAIN = set(string.ascii_letters + string.digits + "_")
_ESCAPABLE = set(string.punctuation) - {"_"}


def spef_escape(name: str) -> str:
    """A name in SPEF identifier form, before clash resolution.

    Parameters
    ----------
    name : str

    Returns
    -------
    str
        Letters, digits and ``_`` unchanged; other printable ASCII
        characters preceded by ``\\``; anything else replaced by ``_``.
        ``"_"`` for an empty name.

    Examples
    --------
    >>> print(spef_escape("data[3]"), spef_escape("x/y:z"), spef_escape("a b"))
    data\\[3\\] x\\/y\\:z a_b
    """
    out = []
    for ch in name:
        if ch in _PLAIN:
            out.append(ch)
        elif ch in _ESCAPABLE:
            out.append("\\" + ch)
        else:
            out.append("_")
    return "".join(out) or "_"


def _qstring(text: str) -> str:
    return '"' + "".join(c if c.isprintable() and c not in '"\\' else "_" for c in text) + '"'


def write_spef(circuit: Circuit, tech: Tech) -> str:
    """The circuit's lumped net capacitance as SPEF text.

    Parameters
    ----------
    circuit : Circuit
        Net capacitance in fF; devices give the pins of each net.
    tech : Tech
        Not used by the SPEF output; taken so that both writers have the
        same arguments.

    Returns
    -------
    str
        The SPEF file, ending with a newline.  Conventions: see the module
        docstring.

    Raises
    ------
    ValueError
        If a capacitance in the circuit is not finite.

    Notes
    -----
    Pins are gathered in one pass over the devices, then each net is
    written once: O(devices + nets log nets).

    Examples
    --------
    >>> from extract.circuit import Device, Net, CapParts
    >>> from extract.tech import NetRoles
    >>> c = Circuit("inv", {"A": Net("A", labelled=True, cap=CapParts(gate=1.0, wire=0.5))},
    ...             [Device("M1", "nmos", "Y", "A", "VSS", 1.0, 0.18)])
    >>> text = write_spef(c, Tech("t", 1.8, NetRoles(), {}, {}))
    >>> print(text[text.index("*D_NET *1"):text.index("*D_NET *2")].strip())
    *D_NET *1 1.5
    *CONN
    *P *1 B
    *I M1:G I
    *CAP
    1 *1 1.5
    *END
    """
    del tech  # same signature as write_spice; nothing in SPEF depends on it
    net_names = set(circuit.nets)
    for d in circuit.devices:
        net_names.update((d.drain, d.gate, d.source))
    written = unique_names(net_names, spef_escape)
    index = {name: i for i, name in enumerate(sorted(net_names), start=1)}
    devices = sorted(circuit.devices, key=lambda d: d.name)
    dev_names = unique_names((d.name for d in devices), spef_escape)

    pins: dict[str, list[str]] = {name: [] for name in net_names}
    for d in devices:
        for pin, net, direction in (("D", d.drain, "B"), ("G", d.gate, "I"), ("S", d.source, "B")):
            pins[net].append(f"*I {dev_names[d.name]}:{pin} {direction}")

    lines = [
        '*SPEF "IEEE 1481-1998"',
        f"*DESIGN {_qstring(circuit.cell or 'cell')}",
        f'*DATE "{SPEF_DATE}"',
        '*VENDOR "dynshare"',
        '*PROGRAM "dynshare"',
        f"*VERSION {_qstring(tool_version())}",
        '*DESIGN_FLAG "PIN_CAP INPUT_OUTPUT"',
        "*DIVIDER /",
        "*DELIMITER :",
        "*BUS_DELIMITER [ ]",
        "*T_UNIT 1 NS",
        "*C_UNIT 1 FF",
        "*R_UNIT 1 OHM",
        "*L_UNIT 1 HENRY",
    ]
    ordered = sorted(net_names)
    if ordered:
        lines += ["", "*NAME_MAP"] + [f"*{index[n]} {written[n]}" for n in ordered]
    ports = [n for n in ordered if n in circuit.nets and circuit.nets[n].labelled]
    port_set = set(ports)
    if ports:
        lines += ["", "*PORTS"] + [f"*{index[n]} B" for n in ports]
    for name in ordered:
        ref = f"*{index[name]}"
        total = fixed(circuit.nets[name].cap.total) if name in circuit.nets else "0"
        lines += ["", f"*D_NET {ref} {total}"]
        conn = ([f"*P {ref} B"] if name in port_set else []) + pins[name]
        if conn:
            lines += ["*CONN"] + conn
        if total != "0":
            lines += ["*CAP", f"1 {ref} {total}"]
        lines.append("*END")
    return "\n".join(lines) + "\n"
