"""The ngspice runs that measure a stage's device tables.

:func:`analyze.physics.device_tables.stage_tables` decides what one stage
needs and keeps the results; the decks here measure them with the foundry's
models (a pruned model file, :func:`analyze.simulator.models.prune_models`):

:func:`measure_charges`
    One transient and one DC sweep: each device's terminal charge over its
    tied source/drain voltage at each gate level, each receiver's input
    charge (output following, and held low or high) and its switching point.
:func:`measure_currents`
    One DC sweep per drain–source voltage of :data:`VDS_GRID`: the channel
    current of each evaluation device with its gate on.
:func:`measure_clock`
    One transient: where the clock edge leaves the lone dynamic node.
:func:`measure_distinct`
    The first two (and the receivers' response surfaces,
    :func:`analyze.physics.receiver_tables.measure_responses`) with each
    distinct device measured once.

Every function takes the measurement items of ``stage_tables``, the deck
helpers (``transistor_line``, ``deck``, ``run_deck``; passed in, so a test
can stand in for ngspice) and the temperature (``temp_c``, °C: ``[models]
temperature``) as arguments.  Charges are found by integrating the
current a slow quasi-static ramp draws, calibrated by a 1 fF capacitor on a
ramp of its own (:mod:`analyze.physics.ramp_charge`).
"""

from __future__ import annotations

import numpy as np

from analyze.physics.ramp_charge import calibration, delivered_charge
from analyze.physics.receiver_tables import measure_responses

__all__ = ["GRID_STEPS", "VDS_GRID", "measure_charges", "measure_clock", "measure_currents", "measure_distinct"]

#: Voltage grid: VDD / GRID_STEPS steps.
GRID_STEPS = 180
#: Drain–source voltages of the current tables, V (log-spaced: a
#: subthreshold current grows as 1 − exp(−V_DS/V_T) over the first ~0.1 V).
VDS_GRID = (0.002, 0.005, 0.01, 0.02, 0.04, 0.08, 0.15, 0.3, 0.6, 1.0, 1.8)


def measure_distinct(items, names, pruned, vdd, corner, transistor_line, deck, run_deck, *, temp_c: float) -> dict:
    """:func:`measure_charges` and :func:`measure_currents` of ``items`` with each
    distinct measurement made once: items that differ only in the device's
    name (the legs of a wide OR: the same type, W, L and gate level) share
    one instance in the decks, and the result is laid out per item as
    though each had been measured.  A 24-leg OR measures 3 devices, not
    48 (the deck's size, and ngspice's time, grow faster than its
    devices)."""
    first, which = {}, []
    for it in items:
        which.append(first.setdefault((it[0], *it[2:]), len(first)))
    distinct = [None] * len(first)
    for it, u in zip(items, which):
        if distinct[u] is None:
            distinct[u] = it
    receivers = [u for u, it in enumerate(distinct) if it[0] == "r"]
    made = measure_charges(distinct, names, pruned, vdd, corner, transistor_line, deck, run_deck, temp_c=temp_c)
    made_i = measure_currents(distinct, names, pruned, vdd, corner, transistor_line, deck, run_deck,
                              temp_c=temp_c)
    # one after another: run side by side in threads, the three runs took
    # several times longer on a 2-core machine (measured; Debian's ngspice
    # is built with OpenMP, and timings there swing widely)
    made_r = measure_responses([distinct[u] for u in receivers], names, pruned, vdd, corner, transistor_line, deck,
                               run_deck, GRID_STEPS, temp_c=temp_c)
    at = {u: m for m, u in enumerate(receivers)}
    held = {f"{h}{k}": made["held"][f"{h}{u}"] for k, u in enumerate(which) for h in ("lo", "hi")
            if f"{h}{u}" in made["held"]}
    return {"q": [made["q"][u] for u in which], "vm": [made["vm"][u] for u in which], "held": held,
            "calibration": made["calibration"],
            "i": {str(k): made_i[str(u)] for k, u in enumerate(which) if str(u) in made_i},
            "response_q": {str(k): made_r["q"][at[u]] for k, u in enumerate(which) if u in at},
            "response_i": {str(k): made_r["i"][at[u]] for k, u in enumerate(which) if u in at}}


def measure_charges(items, names, pruned, vdd, corner, transistor_line, deck, run_deck, *, temp_c: float) -> dict:
    """One transient and one DC sweep: the charges by integrating the
    currents that quasi-static ramps draw (gate ramp 0 -> level in the first
    ns, then the tied source/drain ramp 0 -> VDD over 2 ns); a 1 fF capacitor
    on a ramp of its own calibrates the sign and the integration."""
    kind = {t: pruned.kinds.get(n.lower(), "subckt") for t, n in names.items()}
    ramp = f"PWL(0 0 1n 0 3n {vdd:.6g})"
    lines = [f"Vdd vdd 0 {vdd:.6g}", f"Vcal cal 0 {ramp}", "Ccal cal 0 1f", "Vsw sw 0 0"]
    currents = ["i(Vcal)"]
    rows = []
    for k, it in enumerate(items):
        if it[0] == "t":
            _, _, t, w, l, vg = it
            body = "0" if t == "nmos" else "vdd"
            lines.append(f"Vg{k} g{k} 0 PWL(0 0 1n {vg:.6g})")
            lines.append(f"Vs{k} s{k} 0 {ramp}")
            lines.append(transistor_line(f"t{k}", (f"s{k}", f"g{k}", f"s{k}", body), names[t], kind[t],
                                         pruned.scale, w, l))
            currents.append(f"i(Vs{k})")
            rows.append(("t", k))
        elif it[0] == "i":
            continue
        else:
            _, _, wn, ln, wp, lp = it
            lines.append(f"Vi{k} i{k} 0 {ramp}")
            for tag, node in (("", f"i{k}"), ("dc", "sw")):
                lines.append(transistor_line(f"rn{tag}{k}", (f"o{tag}{k}", node, "0", "0"), names["nmos"],
                                             kind["nmos"], pruned.scale, wn, ln))
                lines.append(transistor_line(f"rp{tag}{k}", (f"o{tag}{k}", node, "vdd", "vdd"), names["pmos"],
                                             kind["pmos"], pruned.scale, wp, lp))
            currents.append(f"i(Vi{k})")
            rows.append(("r", k))
            # the same inverter with its output held where it was before
            # evaluation (low, below an n-type stage's dynamic node; high
            # above a p-type one's): the input charge before the output moves
            for held, out in (("lo", "0"), ("hi", "vdd")):
                lines.append(f"Vi{held}{k} i{held}{k} 0 {ramp}")
                lines.append(transistor_line(f"rn{held}{k}", (out, f"i{held}{k}", "0", "0"), names["nmos"],
                                             kind["nmos"], pruned.scale, wn, ln))
                lines.append(transistor_line(f"rp{held}{k}", (out, f"i{held}{k}", "vdd", "vdd"), names["pmos"],
                                             kind["pmos"], pruned.scale, wp, lp))
                currents.append(f"i(Vi{held}{k})")
                rows.append((held, k))
    commands = ["tran 5p 3n", "wrdata charges.txt " + " ".join(currents)]
    dc_vectors = [f"v(odc{k})" for kind_, k in rows if kind_ == "r"]
    if dc_vectors:
        commands += [f"dc Vsw 0 {vdd:.6g} {vdd / GRID_STEPS:.6g}", "wrdata transfer.txt " + " ".join(dc_vectors)]
    options = [f".temp {temp_c:g}"]
    if pruned.scale is not None:
        options.append(f".option scale={pruned.scale:.6g}")
    text = deck(f"dynshare: device charge tables at corner {corner}", pruned.path, lines, commands, options)
    res = run_deck(text, f"device charge tables at corner {corner}",
                   tables=["charges.txt"] + (["transfer.txt"] if dc_vectors else []))
    table = res.tables["charges.txt"]
    t = table[:, 0]
    q = delivered_charge(table)
    grid = np.linspace(0.0, vdd, GRID_STEPS + 1)
    times = 1e-9 + 2e-9 * grid / vdd
    scale = calibration(grid, np.interp(times, t, q[:, 0]))
    out_q, out_vm, out_held = {}, {}, {}
    transfer = res.tables.get("transfer.txt")
    col_dc = 1
    for j, (kind_, k) in enumerate(rows, start=1):
        if kind_ in ("lo", "hi"):
            out_held[f"{kind_}{k}"] = (np.interp(times, t, q[:, j]) * scale).tolist()
            continue
        out_q[k] = (np.interp(times, t, q[:, j]) * scale).tolist()
        if kind_ == "r":
            v, vout = transfer[:, 0], transfer[:, col_dc]
            col_dc += 1
            diff = vout - v
            idx = np.nonzero(np.diff(np.sign(diff)))[0]
            if len(idx):
                i = int(idx[0])
                out_vm[k] = float(v[i] - diff[i] * (v[i + 1] - v[i]) / (diff[i + 1] - diff[i]))
            else:
                out_vm[k] = vdd / 2
    n = len(items)
    return {"q": [out_q.get(k, []) for k in range(n)], "vm": [out_vm.get(k, 0.0) for k in range(n)],
            "held": out_held, "calibration": float(scale)}


def measure_currents(items, names, pruned, vdd, corner, transistor_line, deck, run_deck, *, temp_c: float) -> dict:
    """Pass currents: one DC sweep of the near terminal per drain–source
    voltage of :data:`VDS_GRID` (the far terminal rides on the near one
    through a source: above it for an nmos, below it for a pmos)."""
    kind = {t: pruned.kinds.get(n.lower(), "subckt") for t, n in names.items()}
    lines = [f"Vdd vdd 0 {vdd:.6g}", "Vsw sw 0 0", "Vdsn farn sw 0", "Vdsp farp sw 0"]
    rows = []
    for k, it in enumerate(items):
        if it[0] != "i":
            continue
        _, _, t, w, l = it
        gate, body, far = ("vdd", "0", "farn") if t == "nmos" else ("0", "vdd", "farp")
        lines.append(f"Vc{k} c{k} sw 0")
        lines.append(transistor_line(f"p{k}", (far, gate, f"c{k}", body), names[t], kind[t], pruned.scale, w, l))
        rows.append(k)
    if not rows:
        return {}
    options = [f".temp {temp_c:g}"] + ([f".option scale={pruned.scale:.6g}"] if pruned.scale is not None else [])
    commands = []
    for j, vds in enumerate(VDS_GRID):
        commands += [f"alter Vdsn dc = {vds:.6g}", f"alter Vdsp dc = {-vds:.6g}",
                     f"dc Vsw 0 {vdd:.6g} {vdd / GRID_STEPS:.6g}",
                     f"wrdata currents{j}.txt " + " ".join(f"i(Vc{k})" for k in rows)]
    text = deck(f"dynshare: pass currents at corner {corner}", pruned.path, lines, commands, options)
    res = run_deck(text, f"pass currents at corner {corner}",
                   tables=[f"currents{j}.txt" for j in range(len(VDS_GRID))])
    n_near = GRID_STEPS + 1
    out = {}
    for j, k in enumerate(rows, start=1):
        out[str(k)] = [(np.abs(res.tables[f"currents{r}.txt"][:n_near, j]) * 1e6).tolist()
                       for r in range(len(VDS_GRID))]
    return out


def measure_clock(clock_items, names, pruned, vdd, corner, transistor_line, deck, run_deck, *, temp_c: float) -> float:
    """The dynamic node after the clock edge with nothing sharing it: its
    devices (clocked ones with the edge, the others off), its receivers and
    a capacitor for the rest of its charge."""
    devices, cap, window, polarity = clock_items
    kind = {t: pruned.kinds.get(n.lower(), "subckt") for t, n in names.items()}
    n_type = polarity == "n"
    pre, ev = (0.0, vdd) if n_type else (vdd, 0.0)
    rail = "0" if n_type else "vdd"
    lines = [f"Vdd vdd 0 {vdd:.6g}", f"Vclk clk 0 PWL(0 {pre:.6g} 0.5n {pre:.6g} 0.55n {ev:.6g})",
             f"Cx x 0 {max(cap, 0.0):.6g}f"]
    for k, (name, role, t, w, l, far) in enumerate(devices):
        body = "0" if t == "nmos" else "vdd"
        far_node = rail if far == "rail" else far
        if role == "clocked":
            gate = "clk"
        elif role.startswith("receiver"):
            out = "o" + role.split(":")[1]
            lines.append(transistor_line(f"rx{k}", (out, "x", body, body), names[t], kind[t], pruned.scale, w, l))
            continue
        else:
            gate = "0" if t == "nmos" else "vdd"
        lines.append(transistor_line(f"d{k}", ("x", gate, far_node, body), names[t], kind[t], pruned.scale, w, l))
    options = [f".temp {temp_c:g}"] + ([f".option scale={pruned.scale:.6g}"] if pruned.scale is not None else [])
    commands = [f"tran 5p {0.51 + window:.6g}n", f"meas tran vend find v(x) at={0.5 + window:.6g}n", "print vend"]
    text = deck(f"dynshare: clock edge at corner {corner}", pruned.path, lines, commands, options)
    return run_deck(text, f"clock edge at corner {corner}", expect=["vend"]).scalar("vend")

