"""The recognised dynamic stage: which devices and nets play which part.

:func:`analyze.stages.recognize.find_stages` produces :class:`Stage` objects from
a :class:`extract.circuit.Circuit`; the charge-sharing analysis consumes
them together with the circuit.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from extract.errors import Finding

__all__ = ["Receiver", "Stage", "Recognition"]


@dataclass(frozen=True)
class Receiver:
    """A static inverter whose input is the dynamic node."""

    nmos: str
    pmos: str
    output: str


@dataclass
class Stage:
    """One dynamic stage.

    For an n-type stage (``polarity="n"``) the dynamic node is precharged
    high through clocked pmos devices from ``supply`` (power) and
    conditionally discharged through an nmos evaluation network to
    ``rail`` (ground), directly (footless) or through a clocked nmos
    ``footer``.  A p-type stage is the mirror image: predischarged low
    through clocked nmos from ground, pmos evaluation network to power.

    Attributes
    ----------
    dynamic_node : str
    polarity : str
        ``"n"`` (precharged high) or ``"p"`` (predischarged low).
    clock : str
    supply, rail : str
        Net the dynamic node is precharged from / evaluates towards.
    precharge : tuple of str
        Devices that precharge (predischarge) the dynamic node.
    evaluation : tuple of str
        Devices of the evaluation network, footer excluded.
    footer : str or None
        The clocked device between the evaluation network and the rail.
    footer_node : str or None
        Net between the evaluation network and the footer.  It is held at
        the rail during evaluation, so it is never shared.
    inputs : tuple of str
        Gate nets of the evaluation devices, sorted.
    internal_nodes : tuple of str
        Nets inside the evaluation network other than the dynamic node,
        the rail and the footer node, sorted.
    keepers : tuple of str
        Non-clocked devices from ``supply`` to the dynamic node.
    receivers : tuple of Receiver
        Inverters driven by the dynamic node.
    secondary_precharge : dict of str to str
        Internal node -> the clocked device that precharges
        (predischarges) it.
    location_um : tuple of float or None
        Where the dynamic node is in the layout.
    """

    dynamic_node: str
    polarity: str
    clock: str
    supply: str
    rail: str
    precharge: tuple[str, ...]
    evaluation: tuple[str, ...]
    footer: str | None
    footer_node: str | None
    inputs: tuple[str, ...]
    internal_nodes: tuple[str, ...]
    keepers: tuple[str, ...] = ()
    receivers: tuple[Receiver, ...] = ()
    secondary_precharge: dict[str, str] = field(default_factory=dict)
    location_um: tuple[float, float] | None = None

    @property
    def footed(self) -> bool:
        return self.footer is not None


@dataclass
class Recognition:
    """What :func:`analyze.stages.recognize.find_stages` found.

    Attributes
    ----------
    stages : list of Stage
        Sorted by dynamic node (then polarity).
    findings : list of Finding
        Half-recognised structures.
    clocks : list of str
        Clock nets, declared and inferred, sorted.
    clock_inferred : bool
        True when some clock was not declared in the tech file.
    clock_note : str
        Where each clock came from, e.g. ``"clock CLK from tech file"``.
    """

    stages: list[Stage] = field(default_factory=list)
    findings: list[Finding] = field(default_factory=list)
    clocks: list[str] = field(default_factory=list)
    clock_inferred: bool = False
    clock_note: str = ""
