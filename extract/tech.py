"""The technology description: layers, device parameters, net roles.

These are plain frozen dataclasses.  :func:`extract.techfile.load_tech`
builds a :class:`Tech` from a TOML file after validating every key; code
and tests may also build one directly.

Units: length µm, area µm², capacitance fF (fF/µm², fF/µm), voltage V,
kp µA/V².
"""

from __future__ import annotations

import functools
from dataclasses import dataclass, field

__all__ = [
    "LAYER_KINDS",
    "CONDUCTOR_KINDS",
    "Layer",
    "MosParams",
    "NetRoles",
    "Prelayout",
    "Models",
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
    ``mjswg``/``pbswg`` grade the gate-edge sidewall (BSIM's names); None
    means the field sidewall's ``mjsw``/``pbsw``.
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
    mjswg: float | None = None
    pbswg: float | None = None

    def __post_init__(self):
        if self.mjswg is None:
            object.__setattr__(self, "mjswg", self.mjsw)
        if self.pbswg is None:
            object.__setattr__(self, "pbswg", self.pbsw)


@dataclass(frozen=True)
class NetRoles:
    """Net names with a fixed role (``[nets]``).  An empty clock list means
    the clock is inferred from the circuit."""

    power: tuple[str, ...] = ("VDD",)
    ground: tuple[str, ...] = ("VSS", "GND")
    clock: tuple[str, ...] = ()


@functools.lru_cache(maxsize=64)
def _roles(power: tuple, ground: tuple, clock: tuple) -> dict[str, str]:
    """Upper-case name -> role; the first of power, ground, clock wins."""
    roles: dict[str, str] = {}
    for role, names in (("clock", clock), ("ground", ground), ("power", power)):
        roles.update((n.upper(), role) for n in names)
    return roles


@dataclass(frozen=True)
class Prelayout:
    """Rules for estimating junctions that a schematic leaves out
    (``[prelayout]``).

    A missing AD (AS) or PD (PS) of a device of width W (the whole device;
    with ``NF=k`` each finger gets 1/k of it) is estimated per terminal:

    - contacted node (one that leaves the series stack): a rectangle of
      its own, AD = W·``contacted_length`` and
      PD = 2·W + 2·``contacted_length`` (gate edge W plus the field edges
      W + 2·``contacted_length``);
    - internal stack node (a net joined by exactly two source/drain
      terminals of devices of one type and by nothing else: not a port,
      supply or gate): one strip W × ``uncontacted_length`` between two
      gates, shared by the two series devices, so each of its two
      terminals carries half of it: AD = W·``uncontacted_length``/2 and
      PD = W + ``uncontacted_length`` (its own gate edge W plus one of the
      strip's two field edges).  The two terminals together count the
      strip once.

    Parameters
    ----------
    contacted_length : float
        µm of diffusion beyond the gate at a contacted node.
    uncontacted_length : float
        µm of diffusion between the two gates of a series stack.

    Notes
    -----
    The rectangles are the usual pre-layout estimate of source/drain
    geometry (common practice); splitting a shared strip in half between
    the two devices that share it is our convention, so that the stack
    node's estimate matches a drawn stack instead of counting it twice.
    """

    contacted_length: float = 0.50
    uncontacted_length: float = 0.25


@dataclass(frozen=True)
class Models:
    """The foundry's SPICE model library (``[models]``).

    Parameters
    ----------
    library : str
        Path of the model library, made absolute against the tech file's
        folder when read from a file.
    corners : tuple of str
        Sections to load with ``.lib FILE SECTION``; empty: the file is
        included whole.
    nmos, pmos : str
        Device (subcircuit or model) name an extracted nmos/pmos is written
        as in a simulation deck.
    length_um : float or None
        ``[models] length``: the channel length (µm) at which
        ``characterize`` fits the device parameters; None: its default.
    temperature_c : float
        ``[models] temperature``: the temperature (°C, SPICE's ``.temp``)
        of every simulation and measurement with the models — the device
        tables of the analysis, ``--simulate``'s decks and ``characterize``'s
        fit; 27 by default.
    """

    library: str
    corners: tuple[str, ...] = ()
    nmos: str = ""
    pmos: str = ""
    length_um: float | None = None
    temperature_c: float = 27.0


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
    netlist_scale : float or None
        ``[netlist] scale``: netlist lengths times this are metres (areas
        times its square).  None: the reader's default for the file (1 for
        SPICE, 1e-6 for CDL); a ``.option scale=`` in the file wins.
    netlist_ignore : tuple of str
        ``[netlist] ignore``: device or subcircuit names whose instances
        are left out of a netlist's circuit (diodes, resistors of a
        foundry library), compared without case.
    models : Models or None
        ``[models]``, the foundry model library, if given.
    evaluation_ns : float
        ``[check] evaluation_ns``: how long evaluation lasts, ns.
    """

    name: str
    vdd: float
    nets: NetRoles
    layers: dict[str, Layer]
    mos: dict[str, MosParams]
    guard: float = 0.0
    prelayout: Prelayout = field(default_factory=Prelayout)
    path: str = "<tech>"
    netlist_scale: float | None = None
    netlist_ignore: tuple[str, ...] = ()
    models: Models | None = None
    evaluation_ns: float = 1.0

    def layers_of_kind(self, *kinds: str) -> list[Layer]:
        """Layers whose kind is one of ``kinds``, in file order."""
        return [layer for layer in self.layers.values() if layer.kind in kinds]

    def role_of(self, net_name: str) -> str:
        """``"power"``, ``"ground"``, ``"clock"`` or ``"signal"`` for a net name.

        Names are compared without regard to case, as SPICE does; a name
        listed under several roles is power before ground before clock.
        The upper-cased names are indexed once per Tech.

        >>> Tech("t", 1.8, NetRoles(("vdd",), ("VSS",), ("CLK",)), {}, {}).role_of("VDD")
        'power'
        """
        table = self.__dict__.get("_role_table")  # kept on the (frozen) Tech: role_of runs per net
        if table is None:
            nets = self.nets
            table = _roles(tuple(nets.power), tuple(nets.ground), tuple(nets.clock))
            object.__setattr__(self, "_role_table", table)
        return table.get(net_name.upper(), "signal")
