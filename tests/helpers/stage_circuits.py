"""Hand-built circuits for the stage-recognition tests.

Rows are ``(name, type, drain, gate, source, W, L)``; :func:`make_circuit`
turns them into a :class:`Circuit` with net roles from a tech built in
code from the demo tech file (the invented dsk18 process).
"""

from __future__ import annotations

try:
    import tomllib
except ModuleNotFoundError:  # Python 3.10
    import tomli as tomllib
from pathlib import Path

from extract.circuit import Circuit, Device, Net
from extract.tech import MosParams, NetRoles, Tech

__all__ = ["dsk18_tech", "make_circuit", "inverter", "TECH", "NO_CLOCK", "NAND3_FOOTED", "recognised_both_ways"]

DSK18 = Path(__file__).resolve().parents[2] / "sample_layouts" / "dsk18.toml"


def dsk18_tech(clock: tuple[str, ...] | None = None) -> Tech:
    """A Tech built in code from the demo tech file's [process], [nets] and
    [mos] tables (the tech-file loader is tested elsewhere)."""
    raw = tomllib.loads(DSK18.read_text())
    nets = raw["nets"]
    roles = NetRoles(
        power=tuple(nets["power"]),
        ground=tuple(nets["ground"]),
        clock=tuple(nets.get("clock", ())) if clock is None else clock,
    )
    mos = {
        t: MosParams(type=t, **{k: v for k, v in p.items() if k != "models"}, models=tuple(p["models"]))
        for t, p in raw["mos"].items()
    }
    return Tech(raw["process"]["name"], raw["process"]["vdd"], roles, {}, mos)


def make_circuit(rows, tech: Tech, name: str = "cell") -> Circuit:
    """A Circuit from ``(name, type, drain, gate, source, W, L)`` rows; net
    roles from the tech, every net and device given a distinct location."""
    devices = [
        Device(n, t, d, g, s, w, l, location_um=(float(k), 1.0))
        for k, (n, t, d, g, s, w, l) in enumerate(rows)
    ]
    names = sorted({x for dev in devices for x in (dev.drain, dev.gate, dev.source)})
    nets = {
        n: Net(n, role=tech.role_of(n), location_um=(float(k), 0.0), labelled=True)
        for k, n in enumerate(names)
    }
    return Circuit(name, nets, sorted(devices, key=lambda d: d.name))


TECH = dsk18_tech()
NO_CLOCK = dsk18_tech(clock=())


def inverter(prefix, inp, out):
    return [
        (prefix + "N", "nmos", out, inp, "VSS", 0.5, 0.18),
        (prefix + "P", "pmos", out, inp, "VDD", 1.0, 0.18),
    ]


# A footed dynamic NAND3 with keeper and output inverter (W&H ch. 9).
NAND3_FOOTED = [
    ("MPC", "pmos", "X", "CLK", "VDD", 1.0, 0.18),
    ("MK", "pmos", "X", "OUT", "VDD", 0.3, 0.36),
    ("MA", "nmos", "X", "A", "n1", 1.5, 0.18),
    ("MB", "nmos", "n1", "B", "n2", 1.5, 0.18),
    ("MC", "nmos", "n2", "C", "n3", 1.5, 0.18),
    ("MF", "nmos", "n3", "CLK", "VSS", 2.0, 0.18),
] + inverter("MI", "X", "OUT")


def recognised_both_ways(circuit: Circuit, tech: Tech):
    """``find_stages`` on the whole circuit and by islands
    (:mod:`analyze.stages.islands`); asserts that they agree in every
    field and finding (text and place) and returns the whole-circuit one."""
    from analyze.stages.recognize import find_stages

    whole = find_stages(circuit, tech, islands=False)
    parts = find_stages(circuit, tech, islands=True)
    assert parts.stages == whole.stages
    assert [(f.message, f.location_um) for f in parts.findings] == [(f.message, f.location_um) for f in whole.findings]
    assert (parts.clocks, parts.clock_inferred, parts.clock_note) == (whole.clocks, whole.clock_inferred,
                                                                      whole.clock_note)
    return whole
