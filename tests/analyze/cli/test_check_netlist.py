"""``dynshare check NETLIST``: a SPICE or CDL netlist goes through the same
recognition, worst case, JSON, text and HTML as a layout.

Sources of the expected values, named beside each check:

* a hand calculation written out below, from the charge-sharing formulas
  of the README ("The charge-sharing model": ``v_final_linear`` is charge
  conservation over the zero-bias capacitances; an internal node stops at
  V_lim = VDD − VT(V_lim), VT(V) = vt0 + gamma·(√(phi+V) − √phi));
* SPICE conventions for the netlist dialects (SI units with suffixes;
  ``.option scale`` multiplies lengths; CDL writes µm without suffix) as
  the README's "Netlist input" section states them.

The cell is a footed domino NAND2 written as a post-layout netlist from an
extractor would be: names with ``/ # . [ ]``, the dynamic node split in two
by a wire resistor, capacitors to ground and one coupling capacitor
between the dynamic node and the stack node, devices with AD/AS/PD/PS = 0
(so no junction charge and the numbers are easy to follow by hand).
"""

from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import pytest
import tomli_w

try:
    import tomllib
except ModuleNotFoundError:  # Python 3.10
    import tomli as tomllib

ROOT = Path(__file__).resolve().parents[3]
DSK18 = ROOT / "sample_layouts" / "dsk18.toml"

#: Devices: (name, d, g, s, b, type, W µm, L µm)
DEVICES = [
    ("PRE", "X#1", "CLK", "VDD", "VDD", "p", 0.6, 0.18),
    ("A1", "X", "A", "n/1[0]", "VSS", "n", 1.0, 0.18),
    ("B1", "n/1[0]", "B", "foot.n", "VSS", "n", 1.0, 0.18),
    ("FOOT", "foot.n", "CLK", "VSS", "VSS", "n", 1.2, 0.18),
    ("INVN", "OUT", "X", "VSS", "VSS", "n", 0.6, 0.18),
    ("INVP", "OUT", "X", "VDD", "VDD", "p", 1.2, 0.18),
]
#: Capacitors: (name, a, b, fF).  X: 10 + 5.246 + 2 (coupling) + receiver
#: gate 8.5 fF/µm² · (0.6·0.18 + 1.2·0.18) µm² = 2.754 fF  → 20.000 fF.
#: n/1[0]: 8 + 2 (coupling) = 10.000 fF.
CAPS = [("C1", "X#1", "VSS", 10.0), ("C2", "X", "0", 5.246), ("CC", "X", "n/1[0]", 2.0),
        ("C3", "n/1[0]", "VSS", 8.0)]
HEADER = "VDD VSS CLK A B X OUT"


def _spice(style: str) -> str:
    """The cell in one of three dialects: ``m`` (M lines, SI), ``cdl`` (M
    lines, µm without suffix, CDL decorations), ``x`` (X instances of device
    subcircuits, lengths scaled by ``.option scale``)."""
    lines = ["* post-layout netlist, extractor style"]
    if style == "x":
        lines.append(".option scale=1e-6")
    lines.append((".SUBCKT" if style == "cdl" else ".subckt") + f" DNAND2 {HEADER}")
    if style == "cdl":
        lines.append("*.PININFO VDD:B VSS:B CLK:I A:I B:I X:O OUT:O")
    for name, d, g, s, b, t, w, l in DEVICES:
        if style == "m":
            lines.append(f"M{name} {d} {g} {s} {b} {t}ch W={w}u L={l}u AD=0 AS=0 PD=0 PS=0")
        elif style == "cdl":
            lines.append(f"M{name} {d} {g} {s} {b} {t}ch m=1 w={w} l={l} mult=1 sa=0.265 sb=0.265 sd=0 "
                         "ad=0 as=0 pd=0 ps=0")
        else:
            lines.append(f"X{name} {d} {g} {s} {b} {t}fet w={w * 1e6:g}u l={l * 1e6:g}u ad=0 as=0 pd=0 ps=0 "
                         "nrd=0 nrs=0")
    lines.append("R1 X#1 X 12.5")
    lines += [f"{n} {a} {b} {c}f" for n, a, b, c in CAPS]
    lines.append(".ENDS DNAND2" if style == "cdl" else ".ends DNAND2")
    return "\n".join(lines) + "\n"


def _tech(tmp: Path) -> Path:
    """dsk18 with no [layers] (a tech file for netlists only) and cgo = 0 (so
    the hand calculation has no overlap part)."""
    data = tomllib.loads(DSK18.read_text(encoding="utf-8"))
    del data["layers"]
    for t in ("nmos", "pmos"):
        data["mos"][t]["cgo"] = 0.0
    path = tmp / "netlists.toml"
    path.write_text(tomli_w.dumps(data))
    return path


def _run(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "analyze", *map(str, args)], capture_output=True, text=True,
                          timeout=120, cwd=cwd)


def _v_lim(vdd, vt0, gamma, phi):
    """V_lim = VDD − VT(V_lim) by bisection (README, "The charge-sharing model")."""
    lo, hi = 0.0, vdd
    for _ in range(200):
        mid = (lo + hi) / 2
        vt = vt0 + gamma * (math.sqrt(phi + mid) - math.sqrt(phi))
        lo, hi = (mid, hi) if mid < vdd - vt else (lo, mid)
    return (lo + hi) / 2


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("netlists")
    paths = {"tech": _tech(tmp)}
    for style, name in (("m", "cell.sp"), ("cdl", "cell.cdl"), ("x", "cell_x.spice")):
        paths[style] = tmp / name
        paths[style].write_text(_spice(style))
    return paths


@pytest.fixture(scope="module")
def reports(files):
    out = {}
    for style in ("m", "cdl", "x"):
        proc = _run("check", files[style], "--tech", files["tech"], "--json", "-")
        assert proc.returncode in (0, 1), proc.stderr
        out[style] = (json.loads(proc.stdout), proc.stderr)
    return out


def test_the_worst_case_is_the_hand_calculation(reports):
    """Worst pattern A=1 B=0 shares n/1[0] with X.

    Hand calculation with dsk18's nmos (vt0 0.45, gamma 0.45, phi 0.85):
    lossless: 20 fF · 1.8 V / (20 + 10) fF = 1.2 V.  That is above
    V_lim (≈ 1.131 V), so n/1[0] stops at V_lim and X keeps the rest:
    X = 1.8 − 10 · V_lim / 20.
    """
    report, _ = reports["m"]
    (stage,) = report["stages"]
    assert stage["dynamic_node"] == "X" and stage["footed"] is True
    wc = stage["worst_case"]
    assert wc["inputs"] == {"A": 1, "B": 0} and wc["shared_nodes"] == ["n/1[0]"]
    assert wc["v_final_linear"] == pytest.approx(20 * 1.8 / 30, abs=2e-6)
    v_lim = _v_lim(1.8, 0.45, 0.45, 0.85)
    assert wc["v_final"] == pytest.approx(1.8 - 10 * v_lim / 20, abs=1e-4)


def test_resistor_joins_the_split_node_and_caps_add_up(reports):
    """R1 joins X#1 into X (the port name wins); X carries 20 fF and the
    stack node 10 fF as added up in CAPS above."""
    report, stderr = reports["m"]
    nets = {n["name"]: n for n in report["nets"]}
    assert "X#1" not in nets
    assert nets["X"]["cap_ff"] == pytest.approx(20.0, abs=1e-6)
    assert nets["n/1[0]"]["cap_ff"] == pytest.approx(10.0, abs=1e-6)
    assert nets["X"]["location_um"] is None
    assert "1 resistor(s) taken as shorts" in stderr


def test_coupling_is_kept_and_reported(reports, files):
    """The 2 fF between X and n/1[0] is in ``couplings`` and in the text."""
    report, _ = reports["m"]
    assert report["couplings"] == [{"nets": ["X", "n/1[0]"], "cap_ff": 2.0, "elements": 1}]
    text = _run("check", files["m"], "--tech", files["tech"]).stdout
    assert "coupling capacitance: 1 net pairs" in text
    assert "X-n/1[0] 2.000 fF" in text


def test_the_three_dialects_give_the_same_report(reports):
    """SPICE M lines (SI), CDL (µm without suffix, *.PININFO, upper-case
    .SUBCKT) and X instances of device subcircuits with .option scale are the
    same circuit: same devices and the same stage numbers."""
    base = reports["m"][0]
    for style in ("cdl", "x"):
        other = reports[style][0]
        assert [(d["name"][1:], d["w_um"], d["l_um"]) for d in other["devices"]] == \
            [(d["name"][1:], d["w_um"], d["l_um"]) for d in base["devices"]]
        assert other["stages"][0]["worst_case"] == base["stages"][0]["worst_case"]
        assert other["nets"] == base["nets"]


def test_unused_device_parameters_are_one_warning(reports):
    """sa, sb, sd (CDL) and nrd, nrs (X lines) are accepted, listed once."""
    for style, keys in (("cdl", "sa"), ("x", "nrd")):
        _, stderr = reports[style]
        lines = [ln for ln in stderr.splitlines() if "ignored instance parameters" in ln]
        assert len(lines) == 1 and keys in lines[0]


def test_html_says_there_is_no_layout_picture(files, tmp_path):
    out = tmp_path / "r.html"
    proc = _run("check", files["m"], "--tech", files["tech"], "--html", out)
    assert proc.returncode in (0, 1), proc.stderr
    page = out.read_text()
    assert "No layout picture" in page and "<svg" in page  # the pattern plot is still drawn
    assert "Coupling capacitance" in page


def test_include_and_lib_sections(tmp_path, files):
    """.include brings a cell from a file beside the including one; a
    .lib FILE SECTION holding .model cards is a model library, skipped with
    one warning; an include cycle is refused naming the line."""
    (tmp_path / "cells").mkdir()
    (tmp_path / "cells" / "dnand2.sp").write_text(_spice("m"))
    (tmp_path / "models.lib").write_text(".lib tt\n.model nch nmos level=1\n.endl tt\n")
    top = tmp_path / "top.sp"
    top.write_text('.lib "models.lib" tt\n.include cells/dnand2.sp\n'
                   ".subckt TOP VDD VSS CLK A B X OUT\nXI VDD VSS CLK A B X OUT DNAND2\n.ends\n")
    proc = _run("check", top, "--tech", files["tech"], "--cell", "TOP", "--json", "-")
    assert proc.returncode in (0, 1), proc.stderr
    (stage,) = json.loads(proc.stdout)["stages"]
    assert stage["dynamic_node"] == "XI/X" or stage["dynamic_node"] == "X"
    assert "skipped 1 included model library" in proc.stderr and "models.lib section tt" in proc.stderr
    loop = tmp_path / "loop.sp"
    loop.write_text(".include loop.sp\n.subckt A x\n.ends\n")
    proc = _run("check", loop, "--tech", files["tech"])
    assert proc.returncode == 2 and proc.stderr.count("\n") == 1
    assert "loop.sp: line 1: .include loop.sp: include cycle" in proc.stderr


def test_all_cells_of_a_netlist_library(tmp_path, files):
    """--all-cells checks every subcircuit of a netlist file."""
    lib = tmp_path / "lib.sp"
    lib.write_text(_spice("m") + ".subckt INV a y VDD VSS\nMN y a VSS VSS nch W=1u L=0.18u\n"
                   "MP y a VDD VDD pch W=2u L=0.18u\n.ends\n")
    proc = _run("check", lib, "--tech", files["tech"], "--all-cells", "--json", "-")
    assert proc.returncode in (0, 1), proc.stderr
    cells = {c["cell"]: c for c in json.loads(proc.stdout)["cells"]}
    assert set(cells) == {"DNAND2", "INV"}
    assert cells["INV"]["status"] == "no stage" and len(cells["DNAND2"]["stages"]) == 1


def test_netlist_errors_name_file_and_line(tmp_path, files):
    bad = tmp_path / "bad.cdl"
    bad.write_text(".SUBCKT A y\nM1 y a 0 0 nch w=0.5 l=0.15\nM2 y a 0 0 nch w=5000 l=0.15\n.ENDS\n")
    proc = _run("check", bad, "--tech", files["tech"])
    assert proc.returncode == 2 and proc.stderr.count("\n") == 1
    assert proc.stderr.startswith(f"error: {bad}: line 3: M2: W=5000 is 5000 µm with scale 1e-06")


def test_a_tech_file_without_layers_refuses_a_layout(files):
    proc = _run("check", ROOT / "sample_layouts" / "dsk18_cells.gds", "--tech", files["tech"],
                "--cell", "DYN_NAND3")
    assert proc.returncode == 2
    assert proc.stderr == f"error: {files['tech']}: layers: has no [layers] tables, so it can read netlists " \
                          "only; describe the drawn layers to read a layout\n"


def test_lengths_below_a_nanometre_are_a_unit_mistake(tmp_path, files):
    """``w=0.65u`` read with scale 1e-6 would be 0.65 pm: refused with the
    file, line and a hint (SPICE suffixes multiply again by the scale)."""
    bad = tmp_path / "suffix.cdl"
    bad.write_text(".SUBCKT A y a\nM1 y a 0 0 nch w=0.65u l=0.15u\n.ENDS\n")
    proc = _run("check", bad, "--tech", files["tech"])
    assert proc.returncode == 2 and proc.stderr.count("\n") == 1
    assert proc.stderr.startswith(f"error: {bad}: line 2: M1: W=6.5e-07 is 6.5e-07 µm with scale 1e-06, below 0.001 µm")


def test_an_included_file_with_models_and_cells_is_read(tmp_path, files):
    """An .include that defines cells and also .model cards brings the cells
    (only a .lib corner section or a file without subcircuits is a model
    library)."""
    (tmp_path / "cells.sp").write_text(".model nch nmos level=1\n.model pch pmos level=1\n" + _spice("m"))
    top = tmp_path / "top.sp"
    top.write_text(".include cells.sp\n.subckt TOP VDD VSS CLK A B X OUT\nXI VDD VSS CLK A B X OUT DNAND2\n.ends\n")
    proc = _run("check", top, "--tech", files["tech"], "--cell", "TOP", "--json", "-")
    assert proc.returncode in (0, 1), proc.stderr
    assert len(json.loads(proc.stdout)["stages"]) == 1 and "model librar" not in proc.stderr

