"""The technology description: layers, device parameters, net roles.

These are plain frozen dataclasses.  :func:`extract.techfile.load_tech`
builds a :class:`Tech` from a TOML file after validating every key; code
and tests may also build one directly.

Units: length µm, area µm², capacitance fF (fF/µm², fF/µm), voltage V,
kp µA/V².
"""

from __future__ import annotations

from dataclasses import dataclass, field

__all__ = [
    "LAYER_KINDS",
    "CONDUCTOR_KINDS",
    "Layer",
    "MosParams",
    "NetRoles",
    "Prelayout",
    "Tech",
]

#: Every value the ``kind`` key of a layer may take.
LAYER_KINDS = ("diffusion", "poly", "metal", "cut", "nimplant", "pimplant", "nwell")

#: Kinds that carry current and so form nets.
CONDUCTOR_KINDS = ("diffusion", "poly", "metal")


@dataclass(frozen=True)
class Layer:
    """One drawn layer of the tech file (``[layers.NAME]``).

    Parameters
    ----------
    name : str
        The table name, e.g. ``"metal1"``.
    gds : tuple of int
        ``(layer, datatype)`` in the layout file.
    kind : str
        One of :data:`LAYER_KINDS`.
    area : float
        fF/µm² to substrate (poly and metal only; poly over field).
    fringe : float
        fF/µm of perimeter (poly and metal only).
    labels : tuple of (int, int)
        ``(layer, texttype)`` pairs of text that names nets on this layer.
    joins : tuple of str
        For a ``cut``: the conductor layers it connects where it overlaps them.
    """

    name: str
    gds: tuple[int, int]
    kind: str
    area: float = 0.0
    fringe: float = 0.0
    labels: tuple[tuple[int, int], ...] = ()
    joins: tuple[str, ...] = ()


@dataclass(frozen=True)
class MosParams:
    """Parameters of one device type (``[mos.nmos]`` or ``[mos.pmos]``).

    The names are those of the SPICE level-1 MOSFET model; see the tech-file
    reference in the README for each unit.  ``vt0`` is negative for pmos.
    """

    type: str
    vt0: float
    gamma: float
    phi: float
    kp: float
    cox: float
    cgo: float
    cj: float
    cjsw: float
    cjswg: float
    mj: float
    mjsw: float
    pb: float
    pbsw: float
    models: tuple[str, ...] = ()


@dataclass(frozen=True)
class NetRoles:
    """Net names with a fixed role (``[nets]``).  An empty clock list means
    the clock is inferred from the circuit."""

    power: tuple[str, ...] = ("VDD",)
    ground: tuple[str, ...] = ("VSS", "GND")
    clock: tuple[str, ...] = ()


@dataclass(frozen=True)
class Prelayout:
    """Rules for estimating junctions that a schematic leaves out
    (``[prelayout]``).

    A source/drain of width W that is contacted (a node that leaves the
    series stack) is taken as a W × ``contacted_length`` rectangle; one
    shared by two series devices inside a stack as W ×
    ``uncontacted_length``.  The edge along the gate is W; the other three
    sides are field edges.
    """

    contacted_length: float = 0.50
    uncontacted_length: float = 0.25


@dataclass(frozen=True)
class Tech:
    """A whole tech file.

    Parameters
    ----------
    name : str
        ``process.name``.
    vdd : float
        Supply voltage, V.
    nets : NetRoles
    layers : dict of str to Layer
        In file order.
    mos : dict of str to MosParams
        Keys ``"nmos"`` and ``"pmos"``.
    guard : float
        ``check.guard``: margin in V required above the receiver threshold.
    prelayout : Prelayout
    path : str
        The file it came from (for messages), ``"<tech>"`` when built in code.
    """

    name: str
    vdd: float
    nets: NetRoles
    layers: dict[str, Layer]
    mos: dict[str, MosParams]
    guard: float = 0.0
    prelayout: Prelayout = field(default_factory=Prelayout)
    path: str = "<tech>"

    def layers_of_kind(self, *kinds: str) -> list[Layer]:
        """Layers whose kind is one of ``kinds``, in file order."""
        return [layer for layer in self.layers.values() if layer.kind in kinds]

    def role_of(self, net_name: str) -> str:
        """``"power"``, ``"ground"``, ``"clock"`` or ``"signal"`` for a net name.

        Names are compared without regard to case, as SPICE does.
        """
        upper = net_name.upper()
        if upper in {n.upper() for n in self.nets.power}:
            return "power"
        if upper in {n.upper() for n in self.nets.ground}:
            return "ground"
        if upper in {n.upper() for n in self.nets.clock}:
            return "clock"
        return "signal"
