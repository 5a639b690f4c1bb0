"""The circuit model that extraction produces and analysis consumes.

Plain dataclasses: a :class:`Circuit` holds :class:`Net` objects (each with
its capacitance split into :class:`CapParts` and its junction geometry per
device type in :class:`JunctionGeometry`) and :class:`Device` objects (one
per MOSFET, SPICE-style terminals and W/L/AD/AS/PD/PS).

Both the layout extractor and the schematic reader build this same model,
so every analysis works on either.

Units: µm, µm², fF.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from extract.errors import Finding

__all__ = ["CapParts", "JunctionGeometry", "Net", "Device", "Coupling", "Circuit", "CAP_PART_NAMES"]

#: The parts of a net's capacitance, in report order.
CAP_PART_NAMES = (
    "junction_area",
    "junction_sidewall",
    "junction_gate_edge",
    "wire",
    "gate",
    "overlap",
)


@dataclass(slots=True, frozen=True)
class CapParts:
    """Zero-bias capacitance of a net to ground, split by origin (fF).

    Examples
    --------
    >>> p = CapParts(junction_area=1.0, wire=0.5)
    >>> p.total
    1.5
    >>> (p + CapParts(gate=2.0)).total
    3.5
    >>> p.as_dict()["wire"]
    0.5
    """

    junction_area: float = 0.0
    junction_sidewall: float = 0.0
    junction_gate_edge: float = 0.0
    wire: float = 0.0
    gate: float = 0.0
    overlap: float = 0.0

    @property
    def total(self) -> float:
        return (
            self.junction_area
            + self.junction_sidewall
            + self.junction_gate_edge
            + self.wire
            + self.gate
            + self.overlap
        )

    @property
    def junction(self) -> float:
        """Sum of the three junction parts."""
        return self.junction_area + self.junction_sidewall + self.junction_gate_edge

    @property
    def linear(self) -> float:
        """The parts that do not depend on voltage: wire, gate, overlap."""
        return self.wire + self.gate + self.overlap

    def as_dict(self) -> dict[str, float]:
        return {name: getattr(self, name) for name in CAP_PART_NAMES}

    def __add__(self, other: "CapParts") -> "CapParts":
        # written out: this runs once per shape, junction and device side,
        # so no reflection over the fields (dataclasses.fields is slow)
        return CapParts(
            self.junction_area + other.junction_area,
            self.junction_sidewall + other.junction_sidewall,
            self.junction_gate_edge + other.junction_gate_edge,
            self.wire + other.wire,
            self.gate + other.gate,
            self.overlap + other.overlap,
        )


@dataclass(slots=True, frozen=True)
class JunctionGeometry:
    """Source/drain junction geometry of one net for one device type.

    Parameters
    ----------
    area_um2 : float
        Bottom area.
    field_perimeter_um : float
        Perimeter along field oxide (sidewall, ``cjsw``).
    gate_perimeter_um : float
        Perimeter along channels (gate-edge sidewall, ``cjswg``).

    Examples
    --------
    >>> j = JunctionGeometry(0.5, 2.0, 1.0) + JunctionGeometry(0.25, 1.0, 1.0)
    >>> (j.area_um2, j.field_perimeter_um, j.gate_perimeter_um)
    (0.75, 3.0, 2.0)
    """

    area_um2: float = 0.0
    field_perimeter_um: float = 0.0
    gate_perimeter_um: float = 0.0

    def __add__(self, other: "JunctionGeometry") -> "JunctionGeometry":
        return JunctionGeometry(
            self.area_um2 + other.area_um2,
            self.field_perimeter_um + other.field_perimeter_um,
            self.gate_perimeter_um + other.gate_perimeter_um,
        )

    @property
    def empty(self) -> bool:
        return self.area_um2 == 0 and self.field_perimeter_um == 0 and self.gate_perimeter_um == 0


@dataclass(slots=True)
class Net:
    """One electrical node.

    Parameters
    ----------
    name : str
    role : str
        ``"signal"``, ``"power"``, ``"ground"`` or ``"clock"``.
    cap : CapParts
        Zero-bias capacitance to ground, by part.
    junctions : dict of str to JunctionGeometry
        Keyed by device type (``"nmos"``, ``"pmos"``): the diffusion of that
        type that belongs to this net.  The analysis uses it for the
        voltage-dependent junction charge.
    location_um : tuple of float or None
        A point inside the net's geometry (layout only).
    labels : tuple of str
        Every label text found on the net (layout), or the port name.
    labelled : bool
        True when the name came from a label or a port, False when generated.
    """

    name: str
    role: str = "signal"
    cap: CapParts = field(default_factory=CapParts)
    junctions: dict[str, JunctionGeometry] = field(default_factory=dict)
    location_um: tuple[float, float] | None = None
    labels: tuple[str, ...] = ()
    labelled: bool = False

    @property
    def cap_ff(self) -> float:
        """Total zero-bias capacitance, fF."""
        return self.cap.total


@dataclass(slots=True)
class Device:
    """One MOSFET.

    Drain and source may come in either order (the layout has no
    preferred one).  ``ad_um2``/``pd_um`` belong to ``drain``,
    ``as_um2``/``ps_um`` to ``source``; perimeters include the gate edge
    (the SPICE level-1 convention).  A diffusion piece shared by several
    devices is given to exactly one of them, so summing AD/AS over the
    devices counts every junction once.
    """

    name: str
    type: str
    drain: str
    gate: str
    source: str
    w_um: float
    l_um: float
    ad_um2: float = 0.0
    as_um2: float = 0.0
    pd_um: float = 0.0
    ps_um: float = 0.0
    location_um: tuple[float, float] | None = None
    model: str | None = None

    def other_terminal(self, net: str) -> str | None:
        """The channel terminal opposite ``net``, or None if not on it.

        >>> Device("M1", "nmos", "a", "g", "b", 1.0, 0.18).other_terminal("b")
        'a'
        """
        if net == self.drain:
            return self.source
        if net == self.source:
            return self.drain
        return None


@dataclass(frozen=True)
class Coupling:
    """Capacitance between two signal nets (a post-layout netlist's
    coupling capacitors, summed per pair).

    For the droop it is also counted in the ``wire`` part of both nets, as
    if the other end were held still (conservative for the charge-sharing
    nodes); it is kept here so reports can show it.

    Parameters
    ----------
    net_a, net_b : str
        The two nets, ``net_a < net_b``.
    cap_ff : float
    elements : int
        How many capacitors were summed.
    """

    net_a: str
    net_b: str
    cap_ff: float
    elements: int = 1


@dataclass
class Circuit:
    """A flat circuit: nets, devices and what extraction noticed.

    Parameters
    ----------
    cell : str
        Cell (or subcircuit) name.
    nets : dict of str to Net
        Sorted by name.
    devices : list of Device
        Sorted by name.
    findings : list of Finding
        Warnings (label conflicts, unsplit diffusion, ...).
    source : str
        The file it came from.
    shapes : dict of str to list of (str, object)
        Layout only: for each net, ``(layer name, shapely Polygon)`` pieces,
        for drawing.  Empty for a schematic.
    couplings : list of Coupling
        Netlist only: capacitance between signal nets, sorted.
    """

    cell: str
    nets: dict[str, Net]
    devices: list[Device]
    findings: list[Finding] = field(default_factory=list)
    source: str = ""
    shapes: dict[str, list[tuple[str, object]]] = field(default_factory=dict)
    couplings: list[Coupling] = field(default_factory=list)

    def device(self, name: str) -> Device:
        """The device called ``name`` (KeyError if none); O(1) after the
        first call, the index rebuilt when the device list changed."""
        index = self.__dict__.get("_device_index")
        d = None if index is None else index.get(name)
        if d is None or d.name != name or len(index) != len(self.devices):
            index = {dev.name: dev for dev in self.devices}
            self.__dict__["_device_index"] = index
            d = index.get(name)
        if d is None:
            raise KeyError(name)
        return d

    def role_of(self, net: str, tech) -> str:
        """``"power"``, ``"ground"``, ``"clock"`` or ``"signal"``: the role
        of ``net`` as extraction recorded it, else by the tech file's net
        names (:meth:`extract.tech.Tech.role_of`; a net no device or shape
        reached, such as a name from a constraints file).

        >>> from extract.tech import NetRoles, Tech
        >>> t = Tech("t", 1.8, NetRoles(("VDD",), ("VSS",), ("CLK",)), {}, {})
        >>> c = Circuit("c", {"clk": Net("clk", "clock")}, [])
        >>> c.role_of("clk", t), c.role_of("VSS", t), c.role_of("n1", t)
        ('clock', 'ground', 'signal')
        """
        found = self.nets.get(net)
        return found.role if found is not None else tech.role_of(net)

    def devices_by_name(self) -> dict[str, Device]:
        """Device name -> device (the index :meth:`device` uses), made
        again when the device list changed length; read it, do not change
        it.  For many look-ups at once (a dict look-up each; a name it
        lacks is worth asking :meth:`device`, which also sees devices
        renamed in place)."""
        index = self.__dict__.get("_device_index")
        if index is None or len(index) != len(self.devices):
            index = {dev.name: dev for dev in self.devices}
            self.__dict__["_device_index"] = index
        return index

    def devices_on(self, *nets: str) -> list[Device]:
        """Devices with a channel terminal (drain or source) on any of
        ``nets``, each once, in circuit order; after the first call the
        cost is that of the devices found (an index by net, made again
        when the device list is replaced or changes length).

        >>> c = Circuit("c", {}, [Device("M1", "nmos", "a", "g", "b", 1, 0.2),
        ...                       Device("M2", "nmos", "b", "g", "b", 1, 0.2)])
        >>> [d.name for d in c.devices_on("b")], c.devices_on("g"), [d.name for d in c.devices_on("b", "a")]
        (['M1', 'M2'], [], ['M1', 'M2'])
        """
        got = self.__dict__.get("_channel_index")
        if got is None or got[0] is not self.devices or got[1] != len(self.devices):
            index: dict[str, list[int]] = {}
            for k, d in enumerate(self.devices):
                index.setdefault(d.drain, []).append(k)
                if d.source != d.drain:
                    index.setdefault(d.source, []).append(k)
            got = (self.devices, len(self.devices), index)
            self.__dict__["_channel_index"] = got
        devices, index = self.devices, got[2]
        at = sorted({k for n in nets for k in index.get(n, ())})
        return [devices[k] for k in at]

    def nets_with_role(self, role: str) -> list[str]:
        return [n.name for n in self.nets.values() if n.role == role]
