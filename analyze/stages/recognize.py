"""Recognition of dynamic stages in a flat circuit.

:func:`find_stages` finds every dynamic stage of a cell — its dynamic
node, precharge devices, evaluation network, footer, keepers, receiving
inverters and secondary precharge devices — for both polarities, and
reports half-recognised structures as findings.

The structure recognised is the textbook footed / footless dynamic gate
and domino gate (Weste & Harris, *CMOS VLSI Design*, 4th ed., ch. 9
"Circuit Families", from memory); the p-type stage is its mirror image.
"""

from __future__ import annotations

from extract.circuit import Circuit
from extract.errors import Finding
from extract.tech import Tech

from analyze.stages.clocks import infer_clocks
from analyze.stages.side_stages import recognition_of, side_stages
from analyze.stages.stage import Recognition, Stage
from analyze.stages.static import StaticNets
from analyze.stages.topology import SIDES, Topology

__all__ = ["Recognition", "find_stages", "ISLANDS_FROM"]

#: Circuits of at least this many devices are recognised by islands when they repeat.
ISLANDS_FROM = 2000


def find_stages(circuit: Circuit, tech: Tech, islands: bool | None = None) -> Recognition:
    """Recognise the dynamic stages of a circuit.

    Parameters
    ----------
    circuit : Circuit
        Net roles are taken from ``circuit.nets[...].role``, falling back
        to the tech file's ``[nets]`` for nets listed as ``"signal"``.
    tech : Tech
    islands : bool, optional
        Recognise once per distinct island (:mod:`analyze.stages.islands`)
        and rename the results back; by default when the circuit has at
        least ``ISLANDS_FROM`` devices and the islands repeat (the
        largest island times the number of distinct ones is at most half
        the devices).  The result is the same either way.

    Returns
    -------
    Recognition
        A cell without dynamic stages gives no stages and no error.
        Findings: those of the clock inference, then those of n-type and
        of p-type stages, each sorted by text.

    Notes
    -----
    Clocks come first (:func:`analyze.stages.clocks.infer_clocks`).  Then, for
    polarity n (p is the mirror image, nmos/pmos and power/ground swapped):

    1. Footers are nmos gated by a clock from ground to a net (their
       *footer nodes*); precharged nets are non-rail, non-clock nets with a
       clock-gated pmos from power that are not static
       (:class:`analyze.stages.static.StaticNets`: some assignment of the
       gate nets around them, the clock included, leaves them joined to
       no rail — a clocked static NAND or a set/reset gate of a
       flip-flop never is a stage).
    2. Precharged nets are grouped by nmos channels (not through rails or
       footer nodes, not through footers).  In a group the dynamic nodes
       are the precharged nets that drive a gate; when none does, those
       farthest (in series devices) from ground or a footer node.  The
       other precharged nets of the group are internal nodes with a
       secondary precharge device.
    3. The evaluation network of a dynamic node X is every nmos reached
       from X through nmos channels, not through rails, footer nodes,
       other dynamic nodes or footers.  Its footer is the footer on a
       reached footer node.  Keepers are pmos from power to X gated by a
       non-clock; receivers are inverters with input X.
    4. Not a stage, silently: X a footer node (an inverter of the clock);
       no evaluation device while X has other channels; a keeper gated by
       an evaluation input (a complementary static gate).
    5. Not a stage, with a finding: a clocked pmos onto a net that has no
       other channel (precharge without evaluation network); a clock
       gating an evaluation device; no path to ground.  A stage with
       footers on several nets is kept (first footer node) with a finding,
       and so is a device joining two dynamic nodes (left out of both).
    6. A finding for each clocked nmos from ground whose upper net leads
       into an nmos network none of whose nets has any pmos (footer
       without precharge).

    Cost: O(devices) for the indices and components, plus one search per
    precharged net over its own evaluation network, plus one staticness
    search per net with a clocked pull device from the supply.

    Examples
    --------
    A footless dynamic NAND2 (Weste & Harris ch. 9, from memory):

    >>> from extract.circuit import Circuit, Device
    >>> from extract.tech import NetRoles, Tech
    >>> tech = Tech("t", 1.8, NetRoles(("VDD",), ("VSS",), ("CLK",)), {}, {})
    >>> D = lambda *a: Device(*a, 1.0, 0.18)
    >>> c = Circuit("nand2", {}, [D("MP", "pmos", "X", "CLK", "VDD"),
    ...                           D("MA", "nmos", "X", "A", "n1"),
    ...                           D("MB", "nmos", "n1", "B", "VSS")])
    >>> r = find_stages(c, tech)
    >>> s = r.stages[0]
    >>> (s.dynamic_node, s.polarity, s.footed, s.inputs, s.internal_nodes)
    ('X', 'n', False, ('A', 'B'), ('n1',))
    >>> r.clock_note
    'clock CLK from tech file'
    """
    if islands is None or islands:
        from analyze.stages.islands import circuit_islands

        isl = circuit_islands(circuit, tech) if islands or len(circuit.devices) >= ISLANDS_FROM else None
        # (an island of 2M devices or more would need placeholder ranks of 8 digits: whole circuit)
        if isl is not None and isl.largest() < 2_000_000 and (
                islands or isl.largest() * len(isl.keys) <= len(circuit.devices) // 2):
            from analyze.stages.by_islands import find_stages_by_islands

            return find_stages_by_islands(isl, tech)
    topo = Topology(circuit, tech)
    static = StaticNets(topo)
    inference = infer_clocks(topo, static=static)
    clocks = set(inference.clocks)
    stages: list[Stage] = []
    notes: dict[str, list[Finding]] = {}
    for side in SIDES:
        found, notes[side.polarity] = side_stages(topo, side, clocks, static)
        stages += found
    return recognition_of(inference, stages, notes)
