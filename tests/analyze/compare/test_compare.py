"""``dynshare compare``: pre-layout (schematic) against post-layout (layout).

The sample cells DYN_NAND3 and DYN_NAND3_LONG (sample_layouts/dsk18_cells.gds)
with their schematics DYN_NAND3.sp and DYN_NAND3_LONG.sp, and the drawn fix
DYN_NAND3_PC.  Sources of the expected values, named beside each check:

* the drawing: every dimension in sample_layouts/README.md ("DYN_NAND3 in
  full", "DYN_NAND3_LONG and DYN_NAND3_PC in full");
* the schematics: W, L, AD, PD in the .sp files, and the ``[prelayout]``
  estimate rules of dsk18.toml (extract/netlist/flatten.py: an internal
  stack node is one W × uncontacted_length strip, half per terminal, so
  AD = W·u/2 and PD = W + u on each of its two terminals);
* hand calculations written out below with the dsk18 coefficients, using the
  SPICE level-1 zero-bias junction formula C = CJ·A + CJSW·P_field +
  CJSWG·P_gate, the wire estimate C = Ca·A + Cf·P, Cox·W·L and CGO·W
  (Rabaey, Chandrakasan & Nikolić, *Digital Integrated Circuits*, 2nd ed.,
  ch. 3–4, from memory);
* ngspice (Debian package ``ngspice``) transients of the whole circuit as
  the reference simulator (deck builder: spice_reference.transient_deck).
"""

from __future__ import annotations

import copy
import functools
import itertools
import json
import math
import re
import subprocess
import sys
from pathlib import Path

import pytest

from analyze.search.analysis import analyze_stage
from analyze.search.analysis import analyse_circuit
from analyze.cli.compare import compare_report, read_matching_schematic
from analyze.compare.comparison import compare_circuits
from analyze.compare.match import match_circuits
from extract.layout.pipeline import extract_layout
from extract.techfile import load_tech
from ngspice_run import require_ngspice, run_deck
from spice_reference import transient_deck

ROOT = Path(__file__).resolve().parents[3]
SAMPLES = ROOT / "sample_layouts"
GDS = SAMPLES / "dsk18_cells.gds"
TECH_FILE = SAMPLES / "dsk18.toml"
CELLS = ("DYN_NAND3", "DYN_NAND3_LONG")
TOL_SPICE = 0.010  # V, agreement with the ngspice reference (the bound DEVELOPERS.md sets for the physics)
TOL_REPORT = 2e-6  # the JSON report rounds to 1e-6 of its unit

# ---------------------------------------------------------------- dsk18 numbers
# Written out from sample_layouts/dsk18.toml (test_dsk18_coefficients checks
# that the file still says so).
VDD = 1.8
CJ_N, CJSW_N, CJSWG_N = 0.95, 0.22, 0.22  # fF/µm², fF/µm, fF/µm
CJ_P, CJSW_P, CJSWG_P = 1.10, 0.28, 0.28
COX, CGO = 8.5, 0.25  # fF/µm² (both types), fF/µm per side (both types)
M1_AREA, M1_FRINGE = 0.035, 0.045
PO_AREA, PO_FRINGE = 0.09, 0.04
U_LEN, C_LEN = 0.26, 0.48  # [prelayout] uncontacted_length, contacted_length
GUARD = 0.05


def jn(area, field, gate):
    """n+ junction, zero bias (SPICE level 1 with the BSIM3 gate-edge split)."""
    return CJ_N * area + CJSW_N * field + CJSWG_N * gate


def jp(area, field, gate):
    """p+ junction, zero bias."""
    return CJ_P * area + CJSW_P * field + CJSWG_P * gate


def m1(area, perim):
    return M1_AREA * area + M1_FRINGE * perim


# --------------------------------------------------------- pre-layout by hand
# n1 (and n2): MA's source and MB's drain, W = 1.0 each, internal stack node:
# per terminal AD = 1.0·0.26/2 = 0.13, PD = 1.0 + 0.26 = 1.26 (gate edge 1.0,
# field 0.26); both terminals: area 0.26, field 0.52, gate edge 2.0;
# overlap CGO·W on each of the two terminals.
PRE_N1 = jn(2 * 1.0 * U_LEN / 2, 2 * U_LEN, 2 * 1.0) + 2 * CGO * 1.0  # 1.3014
PRE_N2 = PRE_N1
# n3: MC's source (W 1.0) and MFOOT's drain (W 1.2): areas 0.13 + 0.156,
# field 0.26 + 0.26, gate edges 1.0 + 1.2.
PRE_N3 = jn(1.0 * U_LEN / 2 + 1.2 * U_LEN / 2, 2 * U_LEN, 1.0 + 1.2) + CGO * (1.0 + 1.2)  # 1.4201
# X: MPRE drain (p, W 0.6, AD 0.288, PD 2.16), MKEEP drain (p, W 0.3, AD
# 0.144, PD 1.56), MA drain (n, W 1.0, AD 0.48, PD 2.96): field = PD − W.
# DYN_NAND3.sp gives these; DYN_NAND3_LONG.sp gives none and the contacted
# estimate AD = W·0.48, PD = 2W + 0.96 yields the same numbers.
# Gates of MINVN (n 0.6/0.18) and MINVP (p 1.2/0.18): Cox·W·L and 2·CGO·W;
# overlap CGO·W of MPRE, MKEEP, MA; wire estimate CWX = 1.3 fF.
PRE_X = (jp(0.288 + 0.144, (2.16 - 0.6) + (1.56 - 0.3), 0.6 + 0.3)
         + jn(0.48, 2.96 - 1.0, 1.0)
         + COX * 0.18 * (0.6 + 1.2) + 2 * CGO * (0.6 + 1.2)
         + CGO * (0.6 + 0.3 + 1.0)
         + 1.3)  # 8.053

# -------------------------------------------------------- post-layout by hand
# DYN_NAND3, from README "DYN_NAND3 in full":
# n1, n2 pieces: area 0.26, perimeter 2.52 = gate edge 2.0 + field 0.52.
POST_N1 = jn(0.26, 0.52, 2.0) + 2 * CGO * 1.0  # 1.3014
POST_N2 = POST_N1
# n3 piece: area 0.286, perimeter 2.92 = gate edge 2.2 + field 0.72.
POST_N3 = jn(0.286, 0.72, 2.2) + CGO * (1.0 + 1.2)  # 1.4641
# X: pieces n 0.48 / 2.96 (gate edge 1.0), precharge p 0.288 / 2.16 (0.6),
# keeper p 0.144 / 1.56 (0.3); the same gates and overlaps as in the
# schematic; metal1 2.5304 µm², 16.02 µm; poly of X over field: the gate
# strip 0.18 × 4.80 plus the pad 0.48 × 0.40 (0.18 × 0.40 of it on the
# strip) = 0.984 µm², less the two channels 0.18 × 0.6 and 0.18 × 1.2 →
# 0.660 µm²; perimeter 2·(0.18 + 4.80) + 2·0.30 (pad sticks out 0.30 to
# the left) = 10.56 µm, less the gate edges across the actives 2·0.6 +
# 2·1.2 = 3.6 → 6.96 µm.
JUNCTIONS_X = jn(0.48, 1.96, 1.0) + jp(0.288, 1.56, 0.6) + jp(0.144, 1.26, 0.3)
LINEAR_X_DEVICES = COX * 0.18 * (0.6 + 1.2) + 2 * CGO * (0.6 + 1.2) + CGO * (0.6 + 0.3 + 1.0)
POLY_X = PO_AREA * (0.18 * 4.80 + 0.48 * 0.40 - 0.18 * 0.40 - 0.18 * 0.6 - 0.18 * 1.2) \
    + PO_FRINGE * (2 * (0.18 + 4.80) + 2 * 0.30 - 2 * 0.6 - 2 * 1.2)
POST_X = JUNCTIONS_X + LINEAR_X_DEVICES + m1(2.5304, 16.02) + POLY_X  # 7.9003
# DYN_NAND3_LONG, README "DYN_NAND3_LONG and DYN_NAND3_PC in full": N1, N2
# pieces 0.48 µm², 2.96 µm (gate edge 2.0, field 0.96), plus the metal1
# serpentines; X with its own metal1 (2.5440 µm², 16.10 µm), the devices
# and the X poly drawn as in DYN_NAND3 (same devices, moved).
LONG_N1 = jn(0.48, 0.96, 2.0) + 2 * CGO * 1.0 + m1(15.1200, 108.56)  # 7.0216
LONG_N2 = jn(0.48, 0.96, 2.0) + 2 * CGO * 1.0 + m1(14.7952, 106.24)  # 6.9058
LONG_N3 = POST_N3
LONG_X = JUNCTIONS_X + LINEAR_X_DEVICES + m1(2.5440, 16.10) + POLY_X  # 7.9043
# DYN_NAND3_PC: N1 as in LONG with the longer serpentine (15.6688 µm²,
# 112.48 µm) plus the secondary precharge pmos drain piece 0.6 × 0.48
# (area 0.288, perimeter 2.16 = gate edge 0.6 + field 1.56) and its overlap.
PC_N1 = jn(0.48, 0.96, 2.0) + 2 * CGO * 1.0 + m1(15.6688, 112.48) + jp(0.288, 1.56, 0.6) + CGO * 0.6  # 8.2888

# Hand-calculated zero-bias caps: (schematic net, layout net) -> fF.
HAND = {
    "DYN_NAND3": {"X": ("X", PRE_X, POST_X), "n1": ("net3", PRE_N1, POST_N1),
                  "n2": ("net2", PRE_N2, POST_N2), "n3": ("net1", PRE_N3, POST_N3)},
    "DYN_NAND3_LONG": {"X": ("X", PRE_X, LONG_X), "n1": ("N1", PRE_N1, LONG_N1),
                       "n2": ("N2", PRE_N2, LONG_N2), "n3": ("net1", PRE_N3, LONG_N3)},
}


# ------------------------------------------------------------------ helpers
@functools.lru_cache(maxsize=None)
def tech():
    return load_tech(str(TECH_FILE))


@functools.lru_cache(maxsize=None)
def compared(cell):
    """(pre circuit, post circuit, Comparison) computed in this process."""
    post = extract_layout(str(GDS), tech(), cell)
    pre = read_matching_schematic(str(SAMPLES / f"{cell}.sp"), tech(), cell)
    cmp = compare_circuits(pre, post, match_circuits(pre, post), tech())
    return pre, post, cmp


def run_cli(*args):
    return subprocess.run([sys.executable, "-m", "analyze", *map(str, args)], capture_output=True,
                          text=True, cwd=ROOT, timeout=120)


def compare_args(cell, schematic=None):
    return ["compare", GDS, "--cell", cell, "--schematic", schematic or SAMPLES / f"{cell}.sp",
            "--tech", TECH_FILE]


@functools.lru_cache(maxsize=None)
def cli_json(cell):
    """(exit status, parsed ``--json -`` report) of the real command line."""
    proc = run_cli(*compare_args(cell), "--json", "-")
    assert "Traceback" not in proc.stderr, proc.stderr
    return proc.returncode, json.loads(proc.stdout)  # nothing but JSON on stdout


@functools.lru_cache(maxsize=None)
def cli_text(cell):
    proc = run_cli(*compare_args(cell))
    assert "Traceback" not in proc.stderr, proc.stderr
    return proc.returncode, proc.stdout


def stage_json(cell):
    rc, rep = cli_json(cell)
    (st,) = rep["stages"]
    return st


def spice_v(circuit, stage, inputs, **kw):
    """ngspice's final v(X) (and probes) for one pattern."""
    require_ngspice()
    return run_deck(transient_deck(circuit, stage, tech(), inputs, **kw))


# ------------------------------------------------------------------- checks
def test_dsk18_coefficients():
    # The hand calculations use these numbers; they come from dsk18.toml.
    t = tech()
    n, p = t.mos["nmos"], t.mos["pmos"]
    assert (t.vdd, t.guard) == (VDD, GUARD)
    assert (n.cj, n.cjsw, n.cjswg, p.cj, p.cjsw, p.cjswg) == (CJ_N, CJSW_N, CJSWG_N, CJ_P, CJSW_P, CJSWG_P)
    assert (n.cox, p.cox, n.cgo, p.cgo) == (COX, COX, CGO, CGO)
    assert (t.layers["metal1"].area, t.layers["metal1"].fringe) == (M1_AREA, M1_FRINGE)
    assert (t.layers["poly"].area, t.layers["poly"].fringe) == (PO_AREA, PO_FRINGE)
    assert (t.prelayout.uncontacted_length, t.prelayout.contacted_length) == (U_LEN, C_LEN)


# Drawn pieces (README tables): x range, y range of each internal stack piece.
PIECES = {
    "DYN_NAND3": {"n1": ((2.54, 2.80), (1.40, 2.40)), "n2": ((2.10, 2.36), (1.40, 2.40)),
                  "n3": ((1.66, 1.92), (1.40, 2.60))},
    "DYN_NAND3_LONG": {"n1": ((15.36, 15.84), (1.40, 2.40)), "n2": ((14.70, 15.18), (1.40, 2.40)),
                       "n3": ((14.26, 14.52), (1.40, 2.60))},
}
# Schematic (.sp files): the gates of the two stack devices on each node.
GATES_ON = {"n1": {"A", "B"}, "n2": {"B", "C"}, "n3": {"C", "CLK"}}
PORTS = ("VDD", "VSS", "CLK", "A", "B", "C", "X", "OUT")


@pytest.mark.parametrize("cell", CELLS)
def test_node_mapping(cell):
    pre, post, cmp = compared(cell)
    net_map = cmp.net_map
    # Ports map to themselves (.subckt line; labels in the drawing).
    for port in PORTS:
        assert net_map[port] == port
    assert len(net_map) == len(PORTS) + 3
    back = {s: lay for lay, s in net_map.items()}
    for sch, ((x0, x1), (y0, y1)) in PIECES[cell].items():
        lay = back[sch]
        # The drawing: the layout net is the diffusion piece README places
        # between the two gates.
        x, y = post.nets[lay].location_um
        assert x0 < x < x1 and y0 < y < y1, (sch, lay, (x, y))
        # The schematic: its devices are those with the gates the .sp puts
        # on that node.
        assert {d.gate for d in post.devices_on(lay)} == GATES_ON[sch]
        assert {d.gate for d in pre.devices_on(sch)} == GATES_ON[sch]
        assert lay == HAND[cell][sch][0]
    # The report's nets[] carry the same pairs.
    rc, rep = cli_json(cell)
    assert {n["name"]: n["schematic_name"] for n in rep["nets"]} == net_map


@pytest.mark.parametrize("cell", CELLS)
def test_caps_pre_and_post_by_hand(cell):
    rc, rep = cli_json(cell)
    nets = {n["schematic_name"]: n for n in rep["nets"]}
    for sch, (lay, pre, post) in HAND[cell].items():
        got = nets[sch]
        assert got["name"] == lay
        assert got["cap_ff_pre"] == pytest.approx(pre, abs=TOL_REPORT), sch
        assert got["cap_ff_post"] == pytest.approx(post, abs=TOL_REPORT), sch


def test_drawn_fix_cap_by_hand():
    post = extract_layout(str(GDS), tech(), "DYN_NAND3_PC")
    assert post.nets["N1"].cap_ff == pytest.approx(PC_N1, abs=1e-6)  # hand calc above


def test_threshold_and_lossless_by_hand():
    # Receiver VM by the square-law formula (Rabaey et al., ch. 5, from
    # memory): r = sqrt(kpn (W/L)n / (kpp (W/L)p)) with 0.6/0.18 and 1.2/0.18.
    r = math.sqrt(280.0 * (0.6 / 0.18) / (65.0 * (1.2 / 0.18)))
    vm = (VDD - 0.48 + 0.45 * r) / (1 + r)  # 0.80257 V
    # Lossless charge sharing, pattern A=B=1, C=0 joins X, n1, n2
    # (V = C_X·VDD / (C_X + C_n1 + C_n2), charge conservation on capacitors).
    lossless = {
        "DYN_NAND3": (PRE_X * VDD / (PRE_X + PRE_N1 + PRE_N2), POST_X * VDD / (POST_X + POST_N1 + POST_N2)),
        "DYN_NAND3_LONG": (PRE_X * VDD / (PRE_X + PRE_N1 + PRE_N2), LONG_X * VDD / (LONG_X + LONG_N1 + LONG_N2)),
    }
    for cell in CELLS:
        st = stage_json(cell)
        for side, v_lin in zip(("pre", "post"), lossless[cell]):
            r_ = st[side]
            assert r_["worst_case"]["inputs"] == {"A": 1, "B": 1, "C": 0}
            assert r_["worst_case"]["v_final_linear"] == pytest.approx(v_lin, abs=TOL_REPORT)
            assert r_["threshold_v"] == pytest.approx(vm, abs=TOL_REPORT)
            margin = r_["worst_case"]["v_final"] - vm
            assert r_["margin_v"] == pytest.approx(margin, abs=TOL_REPORT)
            assert r_["status"] == ("pass" if margin >= GUARD else "fail")
    # The README's hand estimate: LONG fails after layout, passes before.
    assert stage_json("DYN_NAND3_LONG")["post"]["status"] == "fail"
    assert stage_json("DYN_NAND3_LONG")["pre"]["status"] == "pass"
    assert stage_json("DYN_NAND3")["post"]["status"] == "pass"


@pytest.mark.ngspice
@pytest.mark.parametrize("cell", CELLS)
@pytest.mark.parametrize("side", ["pre", "post"])
def test_droop_against_ngspice(cell, side):
    # pre: the schematic circuit with its given and estimated AD/AS/PD/PS;
    # post: the extracted circuit.  ngspice decides the final v(X).
    pre, post, cmp = compared(cell)
    (sc,) = cmp.stages
    circuit, result = (pre, sc.pre) if side == "pre" else (post, sc.post)
    wc = stage_json(cell)[side]["worst_case"]
    out = spice_v(circuit, result.stage, wc["inputs"])
    assert VDD - out["vx"] == pytest.approx(wc["droop_v"], abs=TOL_SPICE)


@pytest.mark.ngspice
def test_worst_pattern_against_ngspice_every_pattern():
    # Every pattern of LONG after layout except A=B=C=1 keeps X off VSS (the
    # footed NAND3 discharges only through all three, the footer on):
    # ngspice's lowest v(X) over them is the reported worst case.
    pre, post, cmp = compared("DYN_NAND3_LONG")
    stage = cmp.stages[0].post.stage
    lowest = min(
        spice_v(post, stage, dict(zip("ABC", bits)))["vx"]
        for bits in itertools.product((0, 1), repeat=3) if bits != (1, 1, 1)
    )
    assert lowest == pytest.approx(stage_json("DYN_NAND3_LONG")["post"]["worst_case"]["v_final"], abs=TOL_SPICE)


@pytest.mark.parametrize("cell", CELLS)
def test_droop_increase_is_post_minus_pre(cell):
    st = stage_json(cell)
    inc = st["post"]["worst_case"]["droop_v"] - st["pre"]["worst_case"]["droop_v"]
    assert st["droop_increase_v"] == pytest.approx(inc, abs=TOL_REPORT)
    # the layout adds droop here: N1/N2 wires in LONG, a smaller X in NAND3
    assert st["droop_increase_v"] > 0
    # shared nodes: the same nodes on both sides, through the net map
    net_map = compared(cell)[2].net_map
    assert sorted(net_map[n] for n in st["post"]["worst_case"]["shared_nodes"]) == \
        sorted(st["pre"]["worst_case"]["shared_nodes"]) == ["n1", "n2"]


def _reverted(post, pre, lay, sch):
    """The extracted circuit with one net's capacitance and junction
    geometry set back to the schematic's (built here, independently of
    analyze.compare.comparison)."""
    c = copy.deepcopy(post)
    c.nets[lay].cap = copy.deepcopy(pre.nets[sch].cap)
    c.nets[lay].junctions = copy.deepcopy(pre.nets[sch].junctions)
    return c


def test_attribution_reverting_n1():
    pre, post, cmp = compared("DYN_NAND3_LONG")
    stage = cmp.stages[0].post.stage
    st = stage_json("DYN_NAND3_LONG")
    att = {a["node"]: a for a in st["attribution"]}
    assert att["N1"]["schematic_name"] == "n1"
    assert att["N1"]["delta_ff"] == pytest.approx(LONG_N1 - PRE_N1, abs=TOL_REPORT)  # hand calc
    reverted = _reverted(post, pre, "N1", "n1")
    assert reverted.nets["N1"].cap_ff == pytest.approx(PRE_N1)
    assert post.nets["N1"].cap_ff == pytest.approx(LONG_N1)  # the original is untouched
    r = analyze_stage(reverted, stage, tech())
    # lossless, by hand: X, N1 (pre value) and N2 share C_X·VDD
    assert r.worst_case.v_final_linear == pytest.approx(LONG_X * VDD / (LONG_X + PRE_N1 + LONG_N2), abs=1e-6)
    post_droop = st["post"]["worst_case"]["droop_v"]
    assert att["N1"]["droop_reduction_v"] == pytest.approx(post_droop - r.worst_case.droop_v, abs=TOL_REPORT)
    assert 0 < att["N1"]["droop_reduction_v"] < st["droop_increase_v"]
    # the biggest contributor is the node with the biggest added cap (N1)
    assert st["attribution"][0]["node"] == "N1"


@pytest.mark.ngspice
def test_attribution_against_ngspice():
    # The droop reduction of reverting N1, with both circuits simulated.
    pre, post, cmp = compared("DYN_NAND3_LONG")
    stage = cmp.stages[0].post.stage
    st = stage_json("DYN_NAND3_LONG")
    att = {a["node"]: a for a in st["attribution"]}
    inputs = st["post"]["worst_case"]["inputs"]
    v_post = spice_v(post, stage, inputs)["vx"]
    v_rev = spice_v(_reverted(post, pre, "N1", "n1"), stage, inputs)["vx"]
    assert v_rev - v_post == pytest.approx(att["N1"]["droop_reduction_v"], abs=2 * TOL_SPICE)


def test_flag_fix_proven_by_reanalysis():
    pre, post, cmp = compared("DYN_NAND3_LONG")
    stage = cmp.stages[0].post.stage
    st = stage_json("DYN_NAND3_LONG")
    (flag,) = st["flags"]
    assert flag["node"] == "N1"
    assert flag["action"] == "add precharge device"
    # README: N1's contact is at (15.60, 1.90); N1 lies between the A and B channels.
    assert flag["location_um"] == pytest.approx([15.60, 1.90], abs=1e-6)
    assert {post.device(d).gate for d in flag["between"]} == {"A", "B"}
    # Re-analysis with a secondary precharge on N1: the worst case rises to
    # v_final_after, and the stage passes with the guard.
    fixed = analyze_stage(post, stage, tech(), precharged={"N1"})
    assert fixed.worst_case.v_final == pytest.approx(flag["v_final_after"], abs=TOL_REPORT)
    assert flag["v_final_after"] > st["post"]["worst_case"]["v_final"]
    assert fixed.status == "pass" and fixed.margin_v >= GUARD
    assert fixed.margin_v == pytest.approx(flag["v_final_after"] - st["post"]["threshold_v"], abs=TOL_REPORT)


def test_drawn_fix_passes():
    # DYN_NAND3_PC draws the fix the flag asks for: a pmos (gate CLK) from
    # VDD to N1.  Its check passes; it holds more precharged charge on N1
    # than the flagged fix (PC_N1 > LONG_N1), so its worst case is at least
    # v_final_after (the result rises with precharged capacitance:
    # charge conservation).
    pc = extract_layout(str(GDS), tech(), "DYN_NAND3_PC")
    rec, (r,) = analyse_circuit(pc, tech())
    assert set(r.stage.secondary_precharge) == {"N1"}
    assert r.status == "pass" and r.margin_v >= GUARD
    (flag,) = stage_json("DYN_NAND3_LONG")["flags"]
    assert PC_N1 > LONG_N1
    assert r.worst_case.v_final >= flag["v_final_after"] - TOL_REPORT


@pytest.mark.ngspice
def test_fix_holds_in_ngspice():
    # The reference agrees the fix works: with N1 precharged (flagged fix on
    # LONG) and in the drawn DYN_NAND3_PC, ngspice's v(X) at the worst
    # pattern clears the threshold plus guard, where LONG without it does not.
    pre, post, cmp = compared("DYN_NAND3_LONG")
    stage = cmp.stages[0].post.stage
    st = stage_json("DYN_NAND3_LONG")
    need = st["post"]["threshold_v"] + GUARD
    inputs = {"A": 1, "B": 1, "C": 0}
    assert spice_v(post, stage, inputs)["vx"] < need
    assert spice_v(post, stage, inputs, precharged=("N1",))["vx"] >= need
    pc = extract_layout(str(GDS), tech(), "DYN_NAND3_PC")
    rec, (r,) = analyse_circuit(pc, tech())
    assert spice_v(pc, r.stage, inputs)["vx"] >= need


# X–A–N1–B–N2 with N1 precharged and A = B = 1, C = 0.  Real charge flow
# (ngspice): MA is off at first (X and N1 both at VDD, above the pass limit
# V_lim = VDD − VT(V_lim) = 1.131 V); N1 alone feeds N2 through MB, falls
# below V_lim and only then does X top N1 up.  Both N1 and N2 end at V_lim
# and X keeps the rest.  Linear estimate, LONG + N1 precharged:
#   X = 1.8 − (C_N2·V_lim − C_N1·(1.8 − V_lim)) / C_X
#     = 1.8 − (6.906·1.131 − 7.022·0.669) / 7.904 ≈ 1.41 V;
# DYN_NAND3_PC (C_N1 = 8.289): ≈ 1.51 V.  ngspice (with the junction
# charge) gives 1.378 V and 1.484 V; the analysis follows the same rule
# (analyze.physics.redistribution: N2 can be fed only through N1, so N1 pays
# first, and X pays N1's shortfall), so v_final and the flag's
# v_final_after agree with it.
@pytest.mark.ngspice
@pytest.mark.parametrize("case", ["flagged_fix", "drawn_fix"])
def test_precharged_middle_node_against_ngspice(case):
    require_ngspice()
    inputs = {"A": 1, "B": 1, "C": 0}
    if case == "flagged_fix":
        pre, post, cmp = compared("DYN_NAND3_LONG")
        circuit, stage, extra = post, cmp.stages[0].post.stage, ("N1",)
        expect = stage_json("DYN_NAND3_LONG")["flags"][0]["v_final_after"]
    else:
        circuit = extract_layout(str(GDS), tech(), "DYN_NAND3_PC")
        rec, (r,) = analyse_circuit(circuit, tech())
        stage, extra, expect = r.stage, (), r.worst_case.v_final
    out = spice_v(circuit, stage, inputs, precharged=extra, probes=("N1", "N2"))
    assert out["vx"] == pytest.approx(expect, abs=TOL_SPICE)
    # ngspice: N1 ran out and ends with N2 (at the pass limit), X above both.
    assert out["v_n1"] == pytest.approx(out["v_n2"], abs=TOL_SPICE)
    assert out["vx"] > out["v_n1"] + 0.1


# -------------------------------------------------------------- command line
def test_cli_exit_status():
    assert cli_json("DYN_NAND3_LONG")[0] == 1  # post-layout fails
    assert cli_json("DYN_NAND3")[0] == 0  # both pass
    assert cli_text("DYN_NAND3_LONG")[0] == 1


WORST_KEYS = {"inputs", "shared_nodes", "v_final", "v_final_linear", "droop_v"}


@pytest.mark.parametrize("cell", CELLS)
def test_cli_json_keys(cell):
    # Keys of the compare report (README / the interface description).
    rc, rep = cli_json(cell)
    assert rep["tool"] == "dynshare"
    assert isinstance(rep["version"], str) and rep["version"]
    assert rep["cell"] == cell
    assert rep["vdd"] == VDD
    assert rep["nets"]
    for n in rep["nets"]:
        assert {"name", "schematic_name", "cap_ff_pre", "cap_ff_post"} <= set(n)
        assert isinstance(n["cap_ff_pre"], float) and isinstance(n["cap_ff_post"], float)
    (st,) = rep["stages"]
    assert st["dynamic_node"] == "X"
    assert isinstance(st["droop_increase_v"], float)
    for side in ("pre", "post"):
        r = st[side]
        assert {"worst_case", "threshold_v", "margin_v", "status"} <= set(r)
        assert WORST_KEYS <= set(r["worst_case"])
        assert r["status"] in ("pass", "fail")
    # the in-process report is the same document
    assert compare_report(compared(cell)[2])["stages"] == rep["stages"]


def _mutate(tmp_path, name, edit):
    text = (SAMPLES / "DYN_NAND3.sp").read_text()
    new = edit(text)
    assert new != text
    path = tmp_path / name
    path.write_text(new)
    return path


MISMATCHES = {
    # stack order X–B–n1–A–n2–C instead of X–A–n1–B–n2–C: the gates swapped
    "swapped_stack": (lambda t: t.replace("MA    X   A   n1", "MA    X   B   n1")
                      .replace("MB    n1  B   n2", "MB    n1  A   n2"), "stack order"),
    # MC (gate C) left out
    "missing_device": (lambda t: "\n".join(l for l in t.splitlines() if not l.startswith("MC ")) + "\n",
                       "gate C"),
    # MB 1.2 µm where the drawing has 1.0 µm (20 % off)
    "w_off_20pct": (lambda t: t.replace("MB    n1  B   n2  VSS nch W=1.0u", "MB    n1  B   n2  VSS nch W=1.2u"),
                    "MB"),
}


@pytest.mark.parametrize("case", sorted(MISMATCHES))
def test_cli_mismatch_is_input_error(tmp_path, case):
    edit, words = MISMATCHES[case]
    path = _mutate(tmp_path, f"{case}.sp", edit)
    before = path.read_bytes()
    proc = run_cli(*compare_args("DYN_NAND3", path))
    assert proc.returncode == 2
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in proc.stderr, proc.stderr
    assert lines[0].startswith(f"error: {path}: ")
    assert words in lines[0]
    assert path.read_bytes() == before  # inputs are never written


def test_cli_bad_netlist_line(tmp_path):
    text = (SAMPLES / "DYN_NAND3.sp").read_text().splitlines()
    k = next(i for i, l in enumerate(text) if l.startswith("MC "))
    text[k] += " AD="  # a parameter without a value
    path = tmp_path / "bad.sp"
    path.write_text("\n".join(text) + "\n")
    proc = run_cli(*compare_args("DYN_NAND3", path), "--json", "-")
    assert proc.returncode == 2
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in proc.stderr, proc.stderr
    assert lines[0].startswith(f"error: {path}: line {k + 1}: ")
    assert proc.stdout == ""


def test_cli_text_tables():
    rc, text = cli_text("DYN_NAND3_LONG")
    st = stage_json("DYN_NAND3_LONG")
    lines = text.splitlines()
    # side-by-side table: one header line with both columns, then rows
    head = next(i for i, l in enumerate(lines) if "pre-layout" in l and "post-layout" in l)
    assert lines[head].index("pre-layout") < lines[head].index("post-layout")
    rows = {}
    for line in lines[head + 1:]:
        m = re.match(r"^  (\S.*?)\s{2,}(\S.*?)\s{2,}(\S.*)$", line)
        if not m:
            break
        rows[m.group(1)] = (m.group(2), m.group(3))
    for key, row in (("v_final", "v_final (V)"), ("droop_v", "droop (V)")):
        pre_s, post_s = rows[row]
        assert float(pre_s) == pytest.approx(st["pre"]["worst_case"][key], abs=5e-4)
        assert float(post_s) == pytest.approx(st["post"]["worst_case"][key], abs=5e-4)
    assert rows["status"] == ("PASS", "FAIL")
    # nets table, largest increase first
    start = lines.index("nets, largest increase first")
    table = [l.split() for l in lines[start + 2:] if l.strip()]
    changes = [float(r[4]) for r in table]
    assert changes == sorted(changes, reverse=True)
    assert [r[0] for r in table[:2]] == ["N1", "N2"]
    by_name = {r[0]: r for r in table}
    assert float(by_name["N1"][2]) == pytest.approx(PRE_N1, abs=5e-4)
    assert float(by_name["N1"][3]) == pytest.approx(LONG_N1, abs=5e-4)
