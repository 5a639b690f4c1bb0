"""The terminal report of ``check``: one block per stage, readable at a glance."""

from __future__ import annotations

from analyze.report.json_report import input_name
from extract.circuit import Circuit

__all__ = ["stage_block", "check_header", "couplings_on", "fmt_loc"]


def fmt_loc(loc) -> str:
    """``(x, y)`` in µm, or ``"?"``.

    >>> fmt_loc((1.0, 2.25)), fmt_loc(None)
    ('(1.00, 2.25) um', '?')
    """
    if loc is None:
        return "?"
    return f"({loc[0]:.2f}, {loc[1]:.2f}) um"


def check_header(circuit: Circuit, tech, recognition) -> str:
    n = len(recognition.stages)
    what = "no dynamic stage" if n == 0 else f"{n} dynamic stage{'s' if n != 1 else ''}"
    lines = [f"cell {circuit.cell}  (process {tech.name}, VDD {tech.vdd:g} V): {what}"]
    if not circuit.shapes and circuit.source:
        lines.append(f"  from netlist {input_name(circuit.source)}: {len(circuit.devices)} transistors, {len(circuit.nets)} nets")
    if n and recognition.clock_note:
        lines.append(f"  clock: {recognition.clock_note}")
    if circuit.couplings:
        total = sum(c.cap_ff for c in circuit.couplings)
        top = max(circuit.couplings, key=lambda c: (c.cap_ff, c.net_a, c.net_b))
        lines.append(f"  coupling capacitance: {len(circuit.couplings)} net pairs, {total:.3f} fF in all "
                     f"(largest {top.net_a}-{top.net_b} {top.cap_ff:.3f} fF), counted to ground on both nets")
    return "\n".join(lines) + "\n"


def couplings_on(circuit: Circuit, nets) -> list:
    """The couplings of ``circuit`` with at least one end in ``nets``, largest first.

    >>> from extract.circuit import Coupling
    >>> c = Circuit("c", {}, [], couplings=[Coupling("a", "b", 1.0), Coupling("c", "d", 2.0)])
    >>> [(k.net_a, k.net_b) for k in couplings_on(c, {"b"})]
    [('a', 'b')]
    """
    nets = set(nets)
    found = [c for c in circuit.couplings if c.net_a in nets or c.net_b in nets]
    return sorted(found, key=lambda c: (-c.cap_ff, c.net_a, c.net_b))


def _pattern(inputs: dict[str, int]) -> str:
    return " ".join(f"{k}={v}" for k, v in sorted(inputs.items())) or "(no inputs)"


def stage_block(result, circuit: Circuit, tech) -> str:
    """Text block for one :class:`analyze.search.analysis.StageResult`."""
    st = result.stage
    kind = "n-type (precharged high)" if st.polarity == "n" else "p-type (predischarged low)"
    if st.polarity == "n":
        foot = f"footed (footer {st.footer})" if st.footed else "footless"
    else:
        foot = f"footed (header {st.footer} to {st.rail})" if st.footed else "footless (no header)"
    verdict = "PASS" if result.status == "pass" else "FAIL"
    out = [f"stage {st.dynamic_node}: {kind}, {foot}, clock {st.clock}   [{verdict}]"]
    if st.location_um is not None:
        out.append(f"  at            {fmt_loc(st.location_um)}")
    out.append(f"  precharge     {' '.join(st.precharge) or '-'}")
    out.append(f"  keepers       {' '.join(st.keepers) or 'none'}")
    if st.receivers:
        rx = ", ".join(f"{r.nmos}/{r.pmos} -> {r.output}" for r in st.receivers)
    else:
        rx = "none found (threshold taken as VDD/2)"
    out.append(f"  receiver      {rx}")
    out.append(f"  threshold     {result.threshold_v:.3f} V (guard {tech.guard:g} V)")
    out.append(f"  model         {result.physics}" + (f"; {result.physics_note}" if result.physics_note else ""))
    out.append(f"  inputs        {' '.join(st.inputs) or '-'}")
    if st.secondary_precharge:
        sp = ", ".join(f"{n} by {d}" for n, d in sorted(st.secondary_precharge.items()))
        out.append(f"  precharged    {sp}")
    wc = result.worst_case
    n = "not counted (too many states)" if result.counted_patterns is None else str(result.counted_patterns)
    if wc is None:
        out.append(f"  worst case    no counted pattern ({n} patterns keep the node)")
    else:
        out.append(f"  worst case    {_pattern(wc.inputs)}   ({n} counted patterns)")
        out.append("  shared nodes")
        names = [st.dynamic_node] + list(wc.shared_nodes)
        width = max(len(n) for n in names)
        for name in names:
            net = circuit.nets.get(name)
            cap = net.cap_ff if net else 0.0
            tag = " (dynamic node)" if name == st.dynamic_node else ""
            tag = tag or (" (precharged)" if name in st.secondary_precharge else "")
            loc = f"  {fmt_loc(net.location_um)}" if net and net.location_um is not None else ""
            out.append(f"    {name:<{width}}  {cap:8.3f} fF{loc}{tag}")
        coupled = couplings_on(circuit, names)
        if coupled:
            shown = ", ".join(f"{c.net_a}-{c.net_b} {c.cap_ff:.3f} fF" for c in coupled[:4])
            more = f" and {len(coupled) - 4} more" if len(coupled) > 4 else ""
            out.append(f"  coupling      {shown}{more} (in the wire parts above)")
        case = f", {wc.case} inputs" if getattr(wc, "case", None) else ""
        out.append(f"  v_final       {wc.v_final:.3f} V   (lossless estimate {wc.v_final_linear:.3f} V{case})")
        out.append(f"  droop         {wc.droop_v:.3f} V")
    sign = "+" if result.margin_v >= 0 else ""
    analysis_verdict = (result.analysis_status or result.status).upper()
    out.append(f"  margin        {sign}{result.margin_v:.3f} V   {analysis_verdict}"
               f"{'   (analysis; the simulation decides, see below)' if result.simulation else ''}")
    if result.flags:
        action = "precharge" if st.polarity == "n" else "predischarge"
        out.append(f"  fix: add {action} devices on")
        for f in result.flags:
            between = f" between {' and '.join(f.between)}" if f.between else ""
            where = "" if f.location_um is None else f" {fmt_loc(f.location_um)}"
            out.append(f"    {f.node:<8}{where}{between}  -> worst case {f.v_final_after:.3f} V")
        if result.flag_note:  # how the flags were chosen or proven
            out.append(f"    ({result.flag_note})")
    elif result.flag_note:
        out.append(f"  fix: {result.flag_note}")
    if result.simulation:
        out += simulation_lines(result, tech)
    return "\n".join(out) + "\n"


def simulation_lines(result, tech=None) -> list[str]:
    """The simulated cases of a stage as a small table, worst margin first
    per corner, with the analysis verdict beside the simulated one (and the
    temperature, from ``tech``'s ``[models]``, when it is not 27 °C)."""
    sims = result.simulation
    word = "v_min" if result.stage.polarity == "n" else "v_max"
    models = getattr(tech, "models", None)
    at = f" at {models.temperature_c:g} C" if models is not None and models.temperature_c != 27.0 else ""
    out = [f"  simulation    ngspice with the foundry models{at}; analysis said {result.analysis_status.upper()}, "
           f"simulation says {result.status.upper()}"]
    out += [f"    note: {note}" for note in getattr(result, "simulation_notes", [])]
    out += [
           f"    {'corner':<7} {'case':<8} {'pattern':<22} {word:>7} {'at ns':>6} {'thresh':>7} {'margin':>7}"
           f"  {'':<4}  {'no keeper':>9}"]
    for s in sims:
        pattern = _pattern(s.inputs)
        pattern = pattern if len(pattern) <= 22 else pattern[:19] + "..."
        nk = "" if s.v_min_without_keeper is None else f"{s.v_min_without_keeper:.3f} V"
        out.append(f"    {str(s.corner or '-'):<7} {s.case:<8} {pattern:<22} {s.v_min:7.3f} {s.t_min_ns:6.3f} "
                   f"{s.threshold_v:7.3f} {s.margin_v:+7.3f}  {s.status.upper():<4}  {nk:>9}")
    return out
