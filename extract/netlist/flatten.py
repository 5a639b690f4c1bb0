"""Elaborate a parsed netlist into a flat circuit.

Evaluates parameters, flattens subcircuit instances, splits ``M=`` and
``NF=`` into separate devices, estimates missing source/drain geometry and
computes every net's zero-bias capacitance.  :func:`extract.netlist.reader.read_schematic`
is the public entry; this module is its second half.

Conventions
-----------
Units
    SPICE values are SI: W, L, PD, PS in metres (``1u`` = 1 µm), AD, AS
    in m² (``1p`` = 1 µm²), C in farads (``1f`` = 1 fF).  Lengths are
    multiplied by the netlist's *scale* first (areas by its square): a
    ``.option scale=`` card of the file, else ``[netlist] scale`` of the
    tech file, else 1 for SPICE and 1e-6 for CDL (``.cdl`` files, lengths in
    µm as CDL writes them).  They are stored in µm, µm², fF.  A length above
    1 mm (or an area above 1 mm²) is taken for a unit mistake (``W=1`` is
    one metre in SPICE) and rejected, and so is a capacitor above 1 nF
    (``1.3`` is 1.3 F, not 1.3 fF).
Device subcircuits
    ``Xname d g s b SUBCKT [w= l= ad= as= pd= ps= m= mult= nf=]`` whose
    SUBCKT is a model name of ``[mos.*] models`` (any case) is a transistor,
    as foundry libraries write them; that name wins over a subcircuit of
    the same name.  Other instance parameters (``sa sb sd topography area
    perim nrd nrs`` ...) are accepted and listed in one finding.
Left out
    D lines (diodes: antenna and tap diodes, reverse biased) and X lines of
    a device named in ``[netlist] ignore`` are left out, counted in one
    finding.
Resistors
    An R line joins its two nodes into one net (a post-layout netlist's
    wire resistance): charge sharing settles in a time much longer than the
    wire's RC, so the final state sees one node.
Parameters
    Global ``.param`` first; then, per instance, the subcircuit's defaults
    (from its ``.subckt`` line) unless the ``X`` line overrides them (an
    override is evaluated where the ``X`` line is), then the subcircuit's
    local ``.param`` cards in order.
Multiplier and fingers
    ``M=m`` is m separate devices of the full W, each with the AD/AS/PD/PS
    given.  ``NF=k`` is k fingers of ``W/k``, each with 1/k of AD/AS/PD/PS
    (which are the device's totals, as BSIM4 reads them).  Together they
    make ``m·k`` devices named ``Mname.1`` ... ``Mname.{m·k}`` (just
    ``Mname`` when there is one), which is how a layout extractor sees
    fingers: one device per finger.  ``M=k`` on an ``X`` line makes k copies
    ``Xname.1/`` ... (unless the subcircuit declares a parameter ``m``).
Junction estimates (``[prelayout]``)
    On a contacted node a missing AD (AS) is ``W × contacted_length`` and
    a missing PD (PS) is ``2·W + 2·contacted_length`` (field edges
    ``W + 2·contacted_length`` plus the gate edge ``W``), W the whole device width
    before the NF split.  An internal stack node is one strip of
    diffusion ``W × uncontacted_length`` between two gates, shared by the
    two series devices, so each of its two terminals carries half of it:
    AD = ``W·uncontacted_length/2`` and PD = ``W + uncontacted_length``
    (its own gate edge W plus one of the strip's two field edges).
    An internal stack node is a net that
    is not a port, not a supply, not a gate, and touched by exactly two
    channel terminals of devices of one type, counted per M line (before
    M/NF are expanded).  Each of the four values is estimated on its own.
Capacitor lines
    A C line is the designer's wire estimate: its value is added to the
    ``wire`` part of each terminal that is not a supply or ground net
    (node ``0`` is ground).  A capacitor between two signal nets is added
    to both, as if each other end were held still: conservative for the
    internal nodes that share charge, and also kept as a
    :class:`~extract.circuit.Coupling` for the reports.  Coupling noise is
    not modelled.  A capacitor with both ends on one net, or only on
    supplies, is ignored (with a finding).
Bulk
    The bulk terminal is not used: the type comes from the model, and the
    body is taken at the rail.

Notes
-----
One recursive walk over the instance tree; every element is visited once
per instance, so the cost is linear in the flattened size.  Devices (after
``M``/``MULT``/``NF``) and instances are counted as the walk goes and the
walk stops at ``DYNSHARE_MAX_DEVICES`` of either (default 2 000 000), and
at subcircuits nested deeper than 200 (:mod:`extract.limits`), before any
of that work is done.
"""

from __future__ import annotations

from collections import Counter, defaultdict
from dataclasses import dataclass, fields

from extract.circuit import CapParts, Circuit, Coupling, Device, JunctionGeometry, Net
from extract.errors import Finding, InputError
from extract.limits import MAX_DEVICES, MAX_SUBCKT_DEPTH, env_limit
from extract.capacitance import gate_parts, junction_parts, overlap_per_side
from extract.netlist.library import Library, Subckt
from extract.netlist.expressions import ExpressionError, value_of
from extract.tech import Tech

__all__ = ["flatten", "terminal_junction"]

#: Instance parameters of a transistor and whether each is a length (1) or an area (2).
_MOS_KEYS = {"w": 1, "l": 1, "ad": 2, "as": 2, "pd": 1, "ps": 1}
_MAX_LENGTH_UM = 1000.0
#: Shorter W or L than this (1 nm) is a unit mistake, not a device.
_MIN_LENGTH_UM = 1e-3
_MAX_COUNT = 100_000


@dataclass
class _Mos:
    """One M line of one instance, before the M/NF split."""

    name: str
    type: str
    model: str
    d: str
    g: str
    s: str
    w: float
    l: float
    given: dict[str, float | None]
    count: int
    nf: int


def terminal_junction(w_um: float, area_um2: float, perimeter_um: float) -> JunctionGeometry:
    """Junction geometry of one source/drain terminal from SPICE AD/PD.

    Parameters
    ----------
    w_um : float
        Device (finger) width: the terminal's edge along the gate.
    area_um2 : float
        AD (or AS).
    perimeter_um : float
        PD (or PS), gate edge included (SPICE level-1 convention).

    Returns
    -------
    JunctionGeometry
        ``gate_perimeter = W`` and ``field_perimeter = PD − W``.  When a
        netlist gives ``PD < W`` (e.g. ``AD=0 PD=0`` for a diffusion
        counted on another device) the gate edge is limited to PD and the
        field edge to zero, so the total perimeter stays PD, as level 1
        sees it.

    Examples
    --------
    >>> terminal_junction(1.0, 0.48, 2.96)
    JunctionGeometry(area_um2=0.48, field_perimeter_um=1.96, gate_perimeter_um=1.0)
    >>> terminal_junction(1.0, 0.0, 0.0)
    JunctionGeometry(area_um2=0.0, field_perimeter_um=0.0, gate_perimeter_um=0.0)
    """
    gate = min(w_um, perimeter_um)
    return JunctionGeometry(area_um2, perimeter_um - gate, gate)


def _to_um(value: float, factor: float) -> float:
    """SI to µm/µm²/fF, rounded to 12 significant digits so that ``0.2u``
    is 0.2 µm and not 0.19999999999999998."""
    return float(f"{value * factor:.12g}")


def _scaled(parts, factor: float):
    """A CapParts or JunctionGeometry with every field times ``factor``."""
    return type(parts)(*(getattr(parts, f.name) * factor for f in fields(parts)))


class _Builder:
    def __init__(self, lib: Library, tech: Tech, path: str):
        self.lib, self.tech, self.path = lib, tech, path
        self.names: dict[str, str] = {}
        self.mos: list[_Mos] = []
        self.wire: dict[str, float] = defaultdict(float)
        self.ignored: dict[str, set[str]] = defaultdict(set)
        self.findings: list[Finding] = list(lib.findings)
        self.ground = tech.nets.ground[0] if tech.nets.ground else "0"
        self.models = self._models()
        #: model names that an X line may use as a transistor
        self.devices = {m.lower(): t for t, p in tech.mos.items() for m in p.models}
        if lib.scale is not None:
            self.scale = lib.scale
        elif tech.netlist_scale is not None:
            self.scale = tech.netlist_scale
        else:
            self.scale = 1e-6 if lib.dialect == "cdl" else 1.0
        self.shorts: list[tuple[str, str]] = []
        #: devices and instances so far, against DYNSHARE_MAX_DEVICES
        self.max_devices = env_limit("DYNSHARE_MAX_DEVICES", MAX_DEVICES)
        self.n_devices = self.n_instances = 0
        self.ignore = {n.lower() for n in tech.netlist_ignore}
        self.left_out: Counter = Counter()
        self.couplings: dict[tuple[str, str], list] = {}
        self.global_scope: dict[str, float] = {}
        for card, params in lib.params:
            for key, written, text in params:
                self.global_scope[key] = self.value(text, self.global_scope, card.place, written)

    def _models(self) -> dict[str, str]:
        models = {}
        for mos_type, p in self.tech.mos.items():
            models[mos_type] = mos_type
            models.update({m.lower(): mos_type for m in p.models})
        for name, (kind, line) in self.lib.models.items():
            if models.get(name, kind) != kind:
                raise InputError(
                    self.path, f"model {name} is {kind} here but {models[name]} in the tech file "
                    f"({self.tech.path})", f"line {line}",
                )
            models[name] = kind
        return models

    def error(self, message: str, place: str) -> InputError:
        return InputError(self.path, message, place)

    def value(self, text: str, scope: dict[str, float], place: str, what: str) -> float:
        try:
            return value_of(text, scope)
        except ExpressionError as exc:
            raise self.error(f"{what}: {exc}", place) from None

    def net(self, node: str, prefix: str, ports: dict[str, str]) -> str:
        low = node.lower()
        if low == "0":
            key, shown = self.ground.lower(), self.ground
        elif low in ports:
            return ports[low]
        elif low in self.lib.globals:
            key, shown = low, node
        else:
            key, shown = (prefix + node).lower(), prefix + node
        self.names.setdefault(key, shown)
        return key

    def count(self, value: float, place: str, what: str) -> int:
        n = round(value)
        if abs(value - n) > 1e-9 or n < 1 or n > _MAX_COUNT:
            raise self.error(f"{what} must be a whole number from 1 to {_MAX_COUNT}, got {value:g}", place)
        return n

    def scope_of(self, sub: Subckt, overrides: dict[str, float]) -> dict[str, float]:
        scope = dict(self.global_scope)
        place = f"line {sub.line}"
        for key, text in sub.defaults:
            scope[key] = overrides[key] if key in overrides else self.value(text, scope, place, key)
        for card, params in sub.params:
            for key, written, text in params:
                scope[key] = self.value(text, scope, card.place, written)
        return scope

    def instance(self, sub: Subckt, prefix: str, ports: dict[str, str],
                 overrides: dict[str, float], stack: tuple[str, ...]) -> None:
        scope = self.scope_of(sub, overrides)
        for card, pos, params in sub.elements:
            letter = pos[0][0].lower()
            if letter == "d" or (letter == "x" and pos[-1].lower() in self.ignore):
                self.left_out["diode" if letter == "d" else pos[-1]] += 1
            elif letter == "m" or (letter == "x" and pos[-1].lower() in self.devices):
                self.mosfet(card, pos, params, prefix, ports, scope)
            elif letter == "c":
                self.capacitor(card, pos, params, prefix, ports, scope)
            elif letter == "r":
                self.resistor(card, pos, prefix, ports)
            else:
                self.subcircuit(card, pos, params, prefix, ports, scope, stack)

    def values(self, card, params, scope, name: str, allowed: dict[str, float]) -> dict[str, float]:
        out: dict[str, float] = {}
        for key, written, text in params:
            if key in out:
                raise self.error(f"{name}: {written} is given twice", card.place)
            if key not in allowed:
                self.ignored[key].add(name)
                continue
            out[key] = self.value(text, scope, card.place, f"{name}: {written}")
        return out

    def mosfet(self, card, pos, params, prefix, ports, scope) -> None:
        name = prefix + pos[0]
        if len(pos) != 6:
            what = "an M line" if pos[0][0] in "mM" else f"an X line of device {pos[-1]}"
            raise self.error(
                f"{name}: {what} needs drain gate source bulk model, got {len(pos) - 1} field(s)",
                card.place,
            )
        model = pos[5]
        if model.lower() not in self.models:
            known = "; ".join(f"{t}: {', '.join(p.models) or t}" for t, p in self.tech.mos.items())
            raise self.error(f"{name}: unknown model {model} (tech file models {known})", card.place)
        vals = self.values(card, params, scope, name, {**_MOS_KEYS, "m": 1, "mult": 1, "nf": 1})
        for key in ("w", "l"):
            if key not in vals:
                raise self.error(f"{name}: {key.upper()} is missing", card.place)
        given: dict[str, float | None] = {}
        for key, power in _MOS_KEYS.items():
            raw = vals.get(key)
            if raw is None:
                given[key] = None
                continue
            v = _to_um(raw, (self.scale * 1e6) ** power)
            limit = _MAX_LENGTH_UM ** power
            if v < 0 or (v == 0 and key in ("w", "l")):
                raise self.error(f"{name}: {key.upper()} must be {'positive' if key in ('w', 'l') else '>= 0'}, "
                                 f"got {raw:g}", card.place)
            if key in ("w", "l") and v < _MIN_LENGTH_UM:
                raise self.error(
                    f"{name}: {key.upper()}={raw:g} is {v:g} µm with scale {self.scale:g}, below "
                    f"{_MIN_LENGTH_UM:g} µm; {self._unit_hint()}", card.place,
                )
            if v > limit:
                raise self.error(
                    f"{name}: {key.upper()}={raw:g} is {v:g} {'µm²' if power == 2 else 'µm'} "
                    f"with scale {self.scale:g}; {self._unit_hint()}", card.place,
                )
            given[key] = v
        m = self.count(vals.get("m", 1), card.place, f"{name}: M")
        m *= self.count(vals.get("mult", 1), card.place, f"{name}: MULT")
        nf = self.count(vals.get("nf", 1), card.place, f"{name}: NF")
        self.n_devices += m * nf
        if self.n_devices > self.max_devices:
            raise self.error(f"{name}: the cell expands to more than {self.max_devices:,} devices (M, MULT, NF and "
                             "X multipliers applied; set DYNSHARE_MAX_DEVICES)", card.place)
        d, g, s = (self.net(n, prefix, ports) for n in pos[1:4])
        self.mos.append(_Mos(name, self.models[model.lower()], model, d, g, s,
                             given.pop("w"), given.pop("l"), given, m * nf, nf))

    def _unit_hint(self) -> str:
        if self.scale < 1.0:
            return ("lengths are multiplied by the scale ([netlist] scale in the tech file or the file's "
                    ".option scale); write them in that unit, without SI suffixes")
        if self.scale == 1.0:
            return ("SPICE values are in metres (write 1u for 1 µm, 1p for 1 µm²); for lengths "
                    "in µm set [netlist] scale = 1e-6 in the tech file")
        return "check [netlist] scale in the tech file or the file's .option scale"

    def resistor(self, card, pos, prefix, ports) -> None:
        name = prefix + pos[0]
        if len(pos) < 3:
            raise self.error(f"{name}: an R line needs two nodes", card.place)
        a, b = (self.net(n, prefix, ports) for n in pos[1:3])
        self.shorts.append((a, b))

    def capacitor(self, card, pos, params, prefix, ports, scope) -> None:
        name = prefix + pos[0]
        vals = self.values(card, params, scope, name, {"c": 1, "m": 1})
        if len(pos) == 4 and "c" not in vals:
            vals["c"] = self.value(pos[3], scope, card.place, f"{name}: value")
        elif len(pos) != 3 or "c" not in vals:
            raise self.error(f"{name}: a C line needs two nodes and a value", card.place)
        farads = vals["c"] * self.count(vals.get("m", 1), card.place, f"{name}: M")
        if farads < 0:
            raise self.error(f"{name}: capacitance must be >= 0, got {vals['c']:g}", card.place)
        if vals["c"] > 1e-9:
            # a wire estimate in a cell is fF to pF; above 1 nF the unit
            # suffix was almost surely forgotten (``1.3`` is 1.3 farads)
            raise self.error(f"{name}: {vals['c']:g} F is not a wire capacitance (forgot the f suffix?)", card.place)
        nodes = {self.net(n, prefix, ports) for n in pos[1:3]}
        signal = [n for n in nodes if self.tech.role_of(self.names[n]) not in ("power", "ground")]
        if len(nodes) == 1:
            signal = []
        for n in signal:
            self.wire[n] += _to_um(farads, 1e15)
        if len(signal) == 2:
            entry = self.couplings.setdefault(tuple(sorted(signal)), [0.0, 0])
            entry[0] += _to_um(farads, 1e15)
            entry[1] += 1
        if not signal:
            why = "has both ends on one net" if len(nodes) == 1 else "joins no signal net"
            self.findings.append(Finding(f"{self.path}: {card.place}: {name} {why}; ignored"))

    def subcircuit(self, card, pos, params, prefix, ports, scope, stack) -> None:
        name = prefix + pos[0]
        sub = self.lib.subckts.get(pos[-1].lower())
        if sub is None:
            raise self.error(f"{name}: no subcircuit named {pos[-1]} in this file", card.place)
        if sub.name.lower() in stack:
            chain = " → ".join([*stack, sub.name.lower()])
            raise self.error(f"{name}: recursive instantiation {chain}", card.place)
        if len(stack) >= MAX_SUBCKT_DEPTH:
            raise self.error(f"{pos[0]}: subcircuits nest more than {MAX_SUBCKT_DEPTH} deep "
                             f"({stack[0]} → {stack[1]} → ... → {sub.name})", card.place)
        nodes = pos[1:-1]
        if len(nodes) != len(sub.ports):
            raise self.error(
                f"{name}: {sub.name} has {len(sub.ports)} port(s) ({' '.join(sub.ports)}), "
                f"{len(nodes)} node(s) given", card.place,
            )
        declared = {k for k, _ in sub.defaults}
        copies, overrides = 1, {}
        for key, written, text in params:
            v = self.value(text, scope, card.place, f"{name}: {written}")
            if key == "m" and "m" not in declared:
                copies = self.count(v, card.place, f"{name}: M")
            elif key in declared:
                overrides[key] = v
            else:
                have = ", ".join(sorted(declared)) or "none"
                raise self.error(f"{name}: {sub.name} has no parameter {written} (it has: {have})", card.place)
        child_ports = {p.lower(): self.net(n, prefix, ports) for p, n in zip(sub.ports, nodes)}
        self.n_instances += copies
        if self.n_instances > self.max_devices:
            raise self.error(f"{name}: the cell expands to more than {self.max_devices:,} subcircuit instances "
                             "(X multipliers applied; set DYNSHARE_MAX_DEVICES)", card.place)
        for j in range(copies):
            tag = pos[0] if copies == 1 else f"{pos[0]}.{j + 1}"
            self.instance(sub, f"{prefix}{tag}/", child_ports, overrides, (*stack, sub.name.lower()))

    def internal_nodes(self, ports: set[str]) -> set[str]:
        channel = Counter()
        types: dict[str, set[str]] = defaultdict(set)
        gates = set()
        for mos in self.mos:
            for t in (mos.d, mos.s):
                channel[t] += 1
                types[t].add(mos.type)
            gates.add(mos.g)
        return {
            n for n, c in channel.items()
            if c == 2 and len(types[n]) == 1 and n not in gates and n not in ports
            and self.tech.role_of(self.names[n]) not in ("power", "ground")
        }

    def merge_shorts(self, ports: set[str]) -> None:
        """Join the nets that R lines connect (union-find over net keys).

        The net that stands for a joined group is a port if one is in it,
        else a supply, else the shortest name (then the first in order).
        """
        if not self.shorts:
            return
        import networkx as nx

        g = nx.Graph(self.shorts)
        rep: dict[str, str] = {}
        for group in nx.connected_components(g):
            def rank(key):
                role = self.tech.role_of(self.names[key])
                return (key not in ports, role not in ("power", "ground"), len(key), key)
            head = min(group, key=rank)
            rep.update({k: head for k in group})
        for mos in self.mos:
            mos.d, mos.g, mos.s = (rep.get(n, n) for n in (mos.d, mos.g, mos.s))
        wire: dict[str, float] = defaultdict(float)
        for key, value in self.wire.items():
            wire[rep.get(key, key)] += value
        self.wire = wire
        couplings: dict[tuple[str, str], list] = {}
        for (a, b), (cap, count) in self.couplings.items():
            a, b = rep.get(a, a), rep.get(b, b)
            if a == b:
                continue  # a capacitor across a resistor of one net: its charge stays on the net
            entry = couplings.setdefault(tuple(sorted((a, b))), [0.0, 0])
            entry[0] += cap
            entry[1] += count
        self.couplings = couplings
        self.names = {k: v for k, v in self.names.items() if rep.get(k, k) == k}
        self.findings.append(Finding(
            f"{self.path}: {len(self.shorts)} resistor(s) taken as shorts, "
            f"{len(rep) - len(set(rep.values()))} net(s) joined into others"))

    def circuit(self, top: Subckt, ports: set[str]) -> Circuit:
        pre = self.tech.prelayout
        self.merge_shorts(ports)
        internal = self.internal_nodes(ports)
        caps: dict[str, CapParts] = defaultdict(CapParts)
        junctions: dict[str, dict[str, JunctionGeometry]] = defaultdict(dict)
        devices: list[Device] = []
        for mos in self.mos:
            k, w = mos.nf, mos.w
            geo = {}
            for term, net in (("d", mos.d), ("s", mos.s)):
                area = mos.given["ad" if term == "d" else "as"]
                perim = mos.given["pd" if term == "d" else "ps"]
                if net in internal:
                    # one W × uncontacted_length strip shared by the two
                    # series devices: each terminal carries half of it
                    length = pre.uncontacted_length
                    est = (w * length / 2, w + length)
                else:
                    length = pre.contacted_length
                    est = (w * length, 2 * w + 2 * length)
                geo[term] = (est[0] if area is None else area, est[1] if perim is None else perim)
            shown = [self.names[n] for n in (mos.d, mos.g, mos.s)]
            for i in range(mos.count):
                name = mos.name if mos.count == 1 else f"{mos.name}.{i + 1}"
                devices.append(Device(name, mos.type, *shown, w / k, mos.l, geo["d"][0] / k,
                                      geo["s"][0] / k, geo["d"][1] / k, geo["s"][1] / k, model=mos.model))
            for net, (area, perim) in ((mos.d, geo["d"]), (mos.s, geo["s"])):
                j = _scaled(terminal_junction(w / k, area / k, perim / k), mos.count)
                have = junctions[net].get(mos.type)
                junctions[net][mos.type] = j if have is None else have + j
            p = self.tech.mos[mos.type]
            caps[mos.g] = caps[mos.g] + _scaled(gate_parts(p, w / k, mos.l), mos.count)
            for net in (mos.d, mos.s):
                caps[net] = caps[net] + _scaled(overlap_per_side(p, w / k), mos.count)
        seen: dict[str, str] = {}
        for dev in devices:
            low = dev.name.lower()
            if low in seen:
                raise InputError(self.path, f"device name {dev.name} occurs twice (after M/NF expansion)")
            seen[low] = dev.name
        if self.left_out:
            listing = ", ".join(f"{n} {k}" for k, n in sorted(self.left_out.items()))
            self.findings.append(Finding(f"{self.path}: left out of the circuit: {listing}"))
        if self.ignored:
            on = sorted(set().union(*self.ignored.values()))
            self.findings.append(Finding(
                f"{self.path}: ignored instance parameters (not used by the analysis): "
                f"{', '.join(sorted(self.ignored))} (on {', '.join(on[:3])}{' and more' if len(on) > 3 else ''})"))
        nets: dict[str, Net] = {}
        for key, shown in self.names.items():
            parts = caps[key] + CapParts(wire=self.wire.get(key, 0.0))
            for mos_type, geo in junctions.get(key, {}).items():
                parts = parts + junction_parts(self.tech.mos[mos_type], geo)
            is_port = key in ports
            nets[shown] = Net(shown, self.tech.role_of(shown), parts, dict(junctions.get(key, {})),
                              labels=(shown,) if is_port else (), labelled=is_port)
        couplings = sorted(Coupling(*sorted((self.names[a], self.names[b])), cap, count)
                           for (a, b), (cap, count) in self.couplings.items())
        return Circuit(top.name, dict(sorted(nets.items())), sorted(devices, key=lambda d: d.name),
                       self.findings, source=self.path, couplings=couplings)


def _literal(text: str) -> float | None:
    """A multiplier written as a plain number, else None (an expression)."""
    try:
        return value_of(text, {})
    except (ExpressionError, ValueError, OverflowError):
        return None


def expansion_floor(lib: Library, top: Subckt, devices: set[str] | None = None) -> tuple[int, int]:
    r"""At least how many (devices, instances) ``top`` expands to, before any
    parameter is evaluated.

    Multipliers written as plain numbers (``M=1000``, ``NF=4``) are
    applied; one given by an expression counts as 1, so the result is a
    lower bound of the real expansion and a cell whose floor already passes
    the limit is refused before the walk starts.

    Examples
    --------
    >>> from extract.netlist.library import parse_library
    >>> text = ".subckt L a\nM1 a a 0 0 n W=1u L=1u M=10 NF=2\n.ends\n"
    >>> text += ".subckt T a\nX1 a L M=1000\nX2 a L\n.ends\n"
    >>> lib = parse_library(text, "t.sp")
    >>> expansion_floor(lib, lib.subckts["t"])
    (20020, 1001)

    Notes
    -----
    Post-order over the subcircuit graph without recursion, memoised:
    O(elements of the file).  Instances of unknown subcircuits and cycles
    count 0 here (the walk reports them).
    """
    devices = devices or set()
    memo: dict[str, tuple[int, int]] = {}
    stack = [(top.name.lower(), False)]
    active: set[str] = set()
    while stack:
        key, done = stack.pop()
        sub = lib.subckts.get(key)
        if sub is None or key in memo:
            continue
        if not done:
            if key in active:
                continue
            active.add(key)
            stack.append((key, True))
            for _, pos, _ in sub.elements:
                child = pos[-1].lower()
                if pos[0][:1] in "xX" and child in lib.subckts and child not in memo and child not in active:
                    stack.append((child, False))
            continue
        active.discard(key)
        n_dev = n_inst = 0
        for _, pos, params in sub.elements:
            mult = 1
            for k, _, text in params:
                if k in ("m", "mult", "nf"):
                    v = _literal(text)
                    if v is not None and 1 <= v <= 1e15:
                        mult *= int(v)
            letter = pos[0][:1].lower()
            child = pos[-1].lower()
            if letter == "m" or (letter == "x" and child in devices):
                n_dev += mult
            elif letter == "x" and child in memo:
                d, i = memo[child]
                n_dev += mult * d
                n_inst += mult * (i + 1)
        memo[key] = (n_dev, n_inst)
    return memo.get(top.name.lower(), (0, 0))


def flatten(lib: Library, top: Subckt, tech: Tech, path: str) -> Circuit:
    """Elaborate subcircuit ``top`` of ``lib`` into a flat circuit.

    Parameters
    ----------
    lib : Library
        From :func:`extract.netlist.library.parse_library`.
    top : Subckt
        The cell.
    tech : Tech
    path : str
        The netlist file, for messages and ``Circuit.source``.

    Returns
    -------
    Circuit

    Raises
    ------
    InputError
        Any value, model, node-count or hierarchy error, naming the line.
    """
    b = _Builder(lib, tech, path)
    n_dev, n_inst = expansion_floor(lib, top, set(b.devices))
    if max(n_dev, n_inst) > b.max_devices:
        what = "devices" if n_dev > b.max_devices else "subcircuit instances"
        raise InputError(path, f"{top.name} expands to at least {max(n_dev, n_inst):,} {what} (M, MULT, NF and X "
                               f"multipliers applied), more than the limit of {b.max_devices:,} "
                               "(set DYNSHARE_MAX_DEVICES)", f"line {top.line}")
    ports: dict[str, str] = {}
    for port in top.ports:
        ports[port.lower()] = b.net(port, "", {})
    b.instance(top, "", ports, {}, (top.name.lower(),))
    return b.circuit(top, set(ports.values()))
