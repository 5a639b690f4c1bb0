"""Shared pieces of the netlist-writer tests: a hand-built domino stage with
its capacitances calculated by hand, a tech built for SPICE level 1, small
readers that parse the written SPICE and SPEF back, and an ngspice deck
that measures each net's zero-bias capacitance.

The readers are written here, independently of the writers, so that a
round trip checks the text a simulator or a timing tool would read.
"""

from __future__ import annotations

import os
import re

import gdstk

from extract.circuit import CapParts, Circuit, Device, JunctionGeometry, Net
from extract.tech import MosParams, NetRoles, Tech

__all__ = [
    "SAMPLES",
    "SAMPLE_CELLS",
    "level1_tech",
    "domino_circuit",
    "AC_EXPECTED_FF",
    "parse_spice",
    "parse_spef",
    "spice_value",
    "ac_deck",
    "op_deck",
    "model_cards",
]

#: The bundled sample layouts (sample_layouts/make_samples.py) and their top cells.
SAMPLES = os.path.join(os.path.dirname(__file__), "..", "..", "sample_layouts", "dsk18_cells.gds")
SAMPLE_CELLS = sorted(c.name for c in gdstk.read_gds(SAMPLES).top_level())

# ---------------------------------------------------------------- tech ----


def level1_tech() -> Tech:
    """A tech whose junction model is exactly what SPICE level 1 computes.

    Level 1 has one sidewall coefficient for the whole perimeter (PD/PS
    include the gate edge) and one built-in potential ``pb``
    (REFERENCE: ngspice manual, MOS level 1 parameters), so ``cjswg`` must
    equal ``cjsw`` and ``pbsw`` equal ``pb`` for the netlist to reproduce
    the extractor's junction capacitance.  The numbers are those of the
    hand calculation below.
    """
    common = dict(gamma=0.4, phi=0.8, cox=8.0, cgo=0.0, mj=0.5, mjsw=0.33, pb=0.8, pbsw=0.8)
    return Tech(
        name="handcalc",
        vdd=1.8,
        nets=NetRoles(power=("VDD",), ground=("VSS",), clock=("CLK",)),
        layers={},
        mos={
            "nmos": MosParams("nmos", vt0=0.45, kp=200.0, cj=1.0, cjsw=0.25, cjswg=0.25,
                              models=("nch",), **common),
            "pmos": MosParams("pmos", vt0=-0.45, kp=80.0, cj=1.2, cjsw=0.3, cjswg=0.3,
                              models=("pch",), **common),
        },
    )


# ------------------------------------------------------- hand-built stage ----
#
# A footed domino AND2: precharge MP1 (CLK), stack MN1 (A) - MN2 (B) - MN3
# (footer, CLK), output inverter MP2/MN4.  All L = 0.18 um.  Diffusion is
# drawn as W x 0.5 um where contacted and W x 0.25 um between two gates of
# the stack.  A shared piece is given to one device (area, field edges and
# its own gate edge); the other device gets AD = 0 and only its own gate
# edge as perimeter (the extractor's convention, extract/layout/pipeline.py).
#
#   piece            W    len   area  field perim      gate perim  -> AD/AS, PD/PS
#   DYN  (MP1 d)     1.0  0.5   0.5   0.5+0.5+1 = 2.0  1.0            0.5, 3.0
#   DYN  (MN1 d)     1.0  0.5   0.5   2.0              1.0            0.5, 3.0
#   n1   (MN1 s)     1.0  0.25  0.25  0.25+0.25 = 0.5  1+1 = 2.0      0.25, 0.5+1.0 = 1.5
#        (MN2 d)                                                      0,    1.0
#   n2   (MN2 s)     1.0  0.25  0.25  0.5              2.0            0.25, 1.5
#        (MN3 d)                                                      0,    1.0
#   VSS  (MN3 s)     1.0  0.5   0.5   2.0              1.0            0.5, 3.0
#   VSS  (MN4 s)     1.0  0.5   0.5   2.0              1.0            0.5, 3.0
#   VDD  (MP1 s)     1.0  0.5   0.5   2.0              1.0            0.5, 3.0
#   VDD  (MP2 s)     2.0  0.5   1.0   0.5+0.5+2 = 3.0  2.0            1.0, 5.0
#   OUT  (MP2 d)     2.0  0.5   1.0   3.0              2.0            1.0, 5.0
#   OUT  (MN4 d)     1.0  0.5   0.5   2.0              1.0            0.5, 3.0
#
# Zero-bias junction capacitance C = cj*A + cjsw*P_field + cjswg*P_gate
# (the SPICE depletion-capacitance model at V = 0; any device textbook,
# e.g. Rabaey, Digital Integrated Circuits, ch. 3, from memory):
#   nmos (cj 1.0, cjsw = cjswg 0.25), pmos (cj 1.2, cjsw = cjswg 0.3)
#   DYN : n 1.0*0.5 + 0.25*2.0 + 0.25*1.0 = 1.25; p 1.2*0.5 + 0.3*2.0 + 0.3*1.0 = 1.5
#   n1  : 1.0*0.25 + 0.25*0.5 + 0.25*2.0 = 0.875;  n2 the same
#   OUT : p 1.2*1.0 + 0.3*3.0 + 0.3*2.0 = 2.7;  n 1.25
#   VSS : 2 * 1.25 = 2.5;  VDD : p 1.5 + 2.7 = 4.2
# Wire capacitance is given per net (as the extractor would report it):
_WIRE = {"DYN": 0.40, "n1": 0.05, "n2": 0.07, "OUT": 0.60, "A": 0.30, "B": 0.30,
         "CLK": 0.80, "VDD": 0.90, "VSS": 0.70, "bus<0> x": 0.25, "spare": 0.15}
# Gate capacitance cox*W*L = 8.0 * W * 0.18: a 1 um gate 1.44 fF, a 2 um gate 2.88 fF.
_GATE = {"A": 1.44, "B": 1.44, "CLK": 2.88, "DYN": 1.44 + 2.88}

#: Junction + wire of every net that is not a bulk, from the table above:
#: what an AC measurement at zero bias must find (gate caps are off there).
AC_EXPECTED_FF = {
    "DYN": 1.25 + 1.5 + 0.40,   # 3.15
    "n1": 0.875 + 0.05,         # 0.925
    "n2": 0.875 + 0.07,         # 0.945
    "OUT": 2.7 + 1.25 + 0.60,   # 4.55
    "A": 0.30,
    "B": 0.30,
    "CLK": 0.80,
    "bus<0> x": 0.25,
    "spare": 0.15,
}


def _junction(cj: float, cjsw: float, geo: JunctionGeometry) -> tuple[float, float, float]:
    return cj * geo.area_um2, cjsw * geo.field_perimeter_um, cjsw * geo.gate_perimeter_um


def domino_circuit() -> Circuit:
    """The hand-calculated domino AND2 above, as a Circuit."""
    geo = {  # net -> type -> JunctionGeometry (area, field perimeter, gate perimeter)
        "DYN": {"nmos": JunctionGeometry(0.5, 2.0, 1.0), "pmos": JunctionGeometry(0.5, 2.0, 1.0)},
        "n1": {"nmos": JunctionGeometry(0.25, 0.5, 2.0)},
        "n2": {"nmos": JunctionGeometry(0.25, 0.5, 2.0)},
        "VSS": {"nmos": JunctionGeometry(1.0, 4.0, 2.0)},
        "VDD": {"pmos": JunctionGeometry(1.5, 5.0, 3.0)},
        "OUT": {"nmos": JunctionGeometry(0.5, 2.0, 1.0), "pmos": JunctionGeometry(1.0, 3.0, 2.0)},
    }
    coeff = {"nmos": (1.0, 0.25), "pmos": (1.2, 0.3)}
    roles = {"VDD": "power", "VSS": "ground", "CLK": "clock"}
    labelled = {"VDD", "VSS", "CLK", "A", "B", "OUT", "bus<0> x"}
    nets = {}
    for name in sorted(set(_WIRE) | set(geo)):
        parts = [_junction(*coeff[t], g) for t, g in geo.get(name, {}).items()]
        cap = CapParts(
            junction_area=sum(p[0] for p in parts),
            junction_sidewall=sum(p[1] for p in parts),
            junction_gate_edge=sum(p[2] for p in parts),
            wire=_WIRE.get(name, 0.0),
            gate=_GATE.get(name, 0.0),
        )
        nets[name] = Net(name, roles.get(name, "signal"), cap, geo.get(name, {}),
                         labels=(name,) if name in labelled else (), labelled=name in labelled)
    L = 0.18
    devices = [
        Device("MN1", "nmos", "DYN", "A", "n1", 1.0, L, 0.5, 0.25, 3.0, 1.5),
        Device("MN2", "nmos", "n1", "B", "n2", 1.0, L, 0.0, 0.25, 1.0, 1.5),
        Device("MN3", "nmos", "n2", "CLK", "VSS", 1.0, L, 0.0, 0.5, 1.0, 3.0),
        Device("MN4", "nmos", "OUT", "DYN", "VSS", 1.0, L, 0.5, 0.5, 3.0, 3.0),
        Device("MP1", "pmos", "DYN", "CLK", "VDD", 1.0, L, 0.5, 0.5, 3.0, 3.0),
        Device("MP2", "pmos", "OUT", "DYN", "VDD", 2.0, L, 1.0, 1.0, 5.0, 5.0),
    ]
    return Circuit("dom_and2", nets, devices, source="/somewhere/hand.gds")


# ------------------------------------------------------------- readers ----

_SCALE = {"f": 1e-15, "p": 1e-12, "n": 1e-9, "u": 1e-6, "m": 1e-3, "": 1.0}
_NUMBER = re.compile(r"^([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)([a-zA-Z]*)$")


def spice_value(text: str) -> float:
    """A SPICE number with an optional scale suffix, in SI units
    (scale factors of the SPICE language: f p n u m)."""
    m = _NUMBER.match(text)
    assert m, f"not a SPICE number: {text!r}"
    return float(m.group(1)) * _SCALE[m.group(2).lower()[:1]]


def parse_spice(text: str) -> dict:
    """Read back a written subcircuit: name, ports, M lines, C lines."""
    logical: list[str] = []
    for line in text.splitlines():
        if not line.strip() or line.startswith("*"):
            continue
        if line.startswith("+"):
            logical[-1] += " " + line[1:]
        else:
            logical.append(line)
    out = {"subckt": None, "ports": [], "devices": {}, "caps": {}, "ends": False}
    for line in logical:
        words = line.split()
        head = words[0].lower()
        if head == ".subckt":
            out["subckt"], out["ports"] = words[1], words[2:]
        elif head == ".ends":
            out["ends"] = True
        elif head.startswith("m"):
            params = dict(w.split("=", 1) for w in words[6:])
            out["devices"][words[0]] = {
                "d": words[1], "g": words[2], "s": words[3], "b": words[4], "model": words[5],
                **{k.upper(): spice_value(v) for k, v in params.items()},
            }
        elif head.startswith("c"):
            out["caps"][words[0]] = (words[1], words[2], spice_value(words[3]))
        else:
            raise AssertionError(f"unexpected line {line!r}")
    return out


def parse_spef(text: str) -> dict:
    """Read back a written SPEF file: header keywords, name map, ports and
    every D_NET with its total, connections and capacitances."""
    out = {"header": {}, "names": {}, "ports": [], "nets": {}}
    section, net = None, None
    for line in text.splitlines():
        words = line.split()
        if not words:
            continue
        key = words[0]
        if key in ("*NAME_MAP", "*PORTS", "*CONN", "*CAP"):
            section = key
        elif key == "*D_NET":
            net = {"total": float(words[2]), "conn": [], "caps": []}
            out["nets"][words[1]] = net
            section = None
        elif key == "*END":
            net, section = None, None
        elif section == "*NAME_MAP":
            out["names"][key] = words[1]
        elif section == "*PORTS":
            out["ports"].append((key, words[1]))
        elif section == "*CONN":
            net["conn"].append(tuple(words))
        elif section == "*CAP":
            net["caps"].append((words[0], words[1], float(words[2])))
        elif key.startswith("*"):
            out["header"][key] = line[len(key):].strip()
        else:
            raise AssertionError(f"unexpected line {line!r}")
    return out


# -------------------------------------------------------- ngspice deck ----


def _model_card(name: str, params) -> str:
    # Unit conversions (REFERENCE: ngspice manual units): kp uA/V^2 -> A/V^2 1e-6,
    # cj fF/um^2 -> F/m^2 1e-3, cjsw fF/um -> F/m 1e-9.  No tox and zero overlap
    # coefficients: level 1 then has no gate capacitance at all.
    spice_type = "pmos" if params.type == "pmos" else "nmos"
    return (
        f".model {name} {spice_type} level=1 vto={params.vt0} kp={params.kp * 1e-6:.6e} "
        f"gamma={params.gamma} phi={params.phi} cj={params.cj * 1e-3:.6e} "
        f"cjsw={params.cjsw * 1e-9:.6e} mj={params.mj} mjsw={params.mjsw} pb={params.pb} "
        "cgso=0 cgdo=0 cgbo=0"
    )


def model_cards(tech: Tech) -> list[str]:
    return [_model_card(p.models[0] if p.models else t, p) for t, p in sorted(tech.mos.items())]


def _nodes(parsed: dict) -> dict[str, str]:
    """Written net name -> the deck's node for it: ports through the
    instance's top-level nodes ``t_<port>``, internal nets by their
    flattened names ``x1.<net>``."""
    ports = parsed["ports"]
    internal = set()
    for dev in parsed["devices"].values():
        internal.update((dev["d"], dev["g"], dev["s"], dev["b"]))
    for a, b, _ in parsed["caps"].values():
        internal.update((a, b))
    internal -= set(ports)
    return {p: f"t_{p}" for p in ports} | {n: f"x1.{n}" for n in sorted(internal)}


def _instance(parsed: dict, node: dict[str, str]) -> str:
    return "X1 " + " ".join(node[p] for p in parsed["ports"]) + f" {parsed['subckt']}"


def ac_deck(netlist: str, tech: Tech, measure: list[str], freq_hz: float = 1e6) -> str:
    """A deck that holds every node of the written subcircuit at 0 V DC
    (supplies included, so every junction is at zero bias) and, for each
    node in ``measure`` (written names), drives that node alone with a
    1 V AC source and prints ``c_<i>`` = Im(I) / (2 pi f V) in farads,
    in ``measure`` order.
    """
    parsed = parse_spice(netlist)
    node = _nodes(parsed)
    lines = ["* zero-bias AC capacitance measurement", netlist, *model_cards(tech)]
    lines.append(_instance(parsed, node))
    src = {}
    for i, name in enumerate(sorted(node)):
        src[name] = f"vs{i}"
        lines.append(f"vs{i} {node[name]} 0 dc 0 ac 0")
    lines += [".control"]
    for i, name in enumerate(measure):
        v = src[name]
        lines += [
            f"alter @{v}[acmag] = 1",
            f"ac lin 1 {freq_hz:g} {freq_hz:g}",
            f"let c_{i} = -imag(i({v}))/(2*pi*{freq_hz:g})",
            f"print c_{i}",
            f"alter @{v}[acmag] = 0",
        ]
    lines += [".endc", ".end", ""]
    return "\n".join(lines)


def op_deck(netlist: str, tech: Tech, drive: dict[str, float]) -> tuple[str, list[str]]:
    """A deck that drives the ports in ``drive`` (written names, volts),
    runs ``op`` and prints ``v_<i>`` for every node of the subcircuit.

    Every node gets a 1e12 ohm shunt (ngspice ``.option rshunt``): a
    wire-only net or an undriven gate has no DC path otherwise, which any
    simulator needs.  Returns the deck and the written names in ``v_<i>``
    order.
    """
    parsed = parse_spice(netlist)
    node = _nodes(parsed)
    names = sorted(node)
    lines = ["* operating point of the written netlist", netlist, *model_cards(tech),
             ".option rshunt=1e12", _instance(parsed, node)]
    lines += [f"vd{i} {node[n]} 0 dc {drive[n]}" for i, n in enumerate(names) if n in drive]
    lines += [".control", "op"]
    for i, n in enumerate(names):
        lines += [f"let v_{i} = v({node[n]})", f"print v_{i}"]
    lines += [".endc", ".end", ""]
    return "\n".join(lines), names
