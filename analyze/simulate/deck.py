"""A dynamic stage as an ngspice transient deck with the foundry's models.

:func:`stage_deck` writes one deck that simulates several *runs* of one
stage side by side — each run a copy of the stage (a subcircuit instance)
with its own input waveforms — so that the models load once for all the
patterns, arrival cases and keeper variants of a stage at one corner.

What a copy holds
-----------------
- Every device of the stage: precharge, evaluation network, footer,
  keepers, receivers, secondary precharge devices, and any other device
  whose gate is on the dynamic node (a fan-out load), written as the
  library wants (``X`` instance of a device subcircuit or ``M`` line) with
  the device's W, L, AD, AS, PD, PS.  The models compute junction and gate
  charge themselves.  A terminal whose PD is smaller than W gets PD = W:
  in our circuit model a diffusion piece shared by two devices is given to
  one of them, so the other still has its own gate edge.
- A capacitor per simulated net: the net's ``wire`` part plus the
  zero-bias gate, overlap and junction parts of devices *outside* the copy
  (the next stage's gates on the receiver output, for instance).
- Bodies at the rails (nmos to ground, pmos to power).  An undriven gate
  (neither an input, the clock, a supply nor a simulated net) is tied to
  the level that turns its device off, and said in the notes.

Waveforms (ns)
--------------
``0 … RESET_NS``: clock at its evaluation level and every input on, so the
dynamic node and every internal node discharge (an earlier evaluation).
``RESET_NS … EVAL_NS``: precharge (clock at its precharge level), each input
at its precharge level for the run's arrival case.  Every internal node
that no clocked device precharges is held at the rail (ground; p-type:
VDD) by an ideal switch that opens ``RELEASE_NS`` before evaluation: the
state "discharged in an earlier cycle" that the analysis assumes, without
the charge that falling gates would otherwise couple into floating nodes
(which depends on the order the inputs fall in).  ``EVAL_NS``: the clock
and the late inputs move to their evaluation levels with EDGE_NS edges.
The lowest dynamic-node voltage (highest, p-type) is measured from
``EVAL_NS`` to ``EVAL_NS + evaluation_ns``.

Net names are replaced by ``n0 n1 ...`` in the deck (ngspice folds case and
dislikes ``/ # [ ]``); :class:`StageDeck` keeps the map.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from analyze.simulator.instances import transistor_line
from analyze.stages.stage import Stage
from extract.capacitance import gate_parts, junction_parts, overlap_per_side
from extract.circuit import CapParts, Circuit, Device, JunctionGeometry
from extract.tech import Tech

__all__ = ["Run", "StageDeck", "stage_deck", "stage_devices", "device_line", "RESET_NS", "EVAL_NS", "EDGE_NS",
           "MAX_INSTANCES", "RELEASE_NS"]

RESET_NS = 1.0
EVAL_NS = 3.0
RELEASE_NS = 0.2
EDGE_NS = 0.05
#: Device instances per deck above which ngspice's set-up time grows fast.
MAX_INSTANCES = 40
#: Transient step (and largest internal step), ps.
TSTEP_PS = 10.0


@dataclass(frozen=True)
class Run:
    """One copy of the stage in a deck.

    Attributes
    ----------
    levels : dict of str to (int, int)
        Input net -> logical level in precharge and in evaluation
        (:func:`analyze.search.cases.input_levels`).
    keeper : bool
        False: keeper gates tied off (the droop without the keeper's help).
    """

    levels: dict
    keeper: bool = True


@dataclass
class StageDeck:
    """A written deck and how to read its results.

    Attributes
    ----------
    text : str
        The deck.
    measures : list of dict of str to str
        Per run: ``{"v": name, "t": name, "out": name or ""}`` of the
        printed values (extreme of the dynamic node, its time in seconds,
        the first receiver output's opposite extreme).
    thresholds : list of str
        Printed names of the receivers' switching points.
    table : str
        ``wrdata`` file with time and every run's dynamic-node voltage.
    nets : dict of str to str
        Net -> deck node name.
    notes : list of str
    """

    text: str
    measures: list[dict]
    thresholds: list[str]
    table: str
    nets: dict[str, str] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)


def stage_devices(circuit: Circuit, stage: Stage) -> list[Device]:
    """The devices a copy of the stage holds, in circuit order."""
    names = set(stage.precharge) | set(stage.evaluation) | set(stage.keepers)
    names |= set(stage.secondary_precharge.values())
    if stage.footer:
        names.add(stage.footer)
    for r in stage.receivers:
        names |= {r.nmos, r.pmos}
    inner = {stage.dynamic_node, *stage.internal_nodes}
    for d in circuit.devices:
        if d.gate == stage.dynamic_node or d.drain in inner or d.source in inner:
            names.add(d.name)
    return [d for d in circuit.devices if d.name in names]


def device_line(name: str, dev: Device, d: str, g: str, s: str, b: str, model: str, kind: str,
                scale: float | None) -> str:
    """One device of the circuit model as an instance line
    (:func:`analyze.simulator.instances.transistor_line`), PD and PS at
    least W (each device keeps its own gate edge).

    Examples
    --------
    >>> dev = Device("M1", "nmos", "a", "g", "b", 0.65, 0.15, 0.2, 0.0, 1.9, 0.0)
    >>> device_line("1", dev, "n1", "n2", "n3", "0", "sky_n", "subckt", 1e-6)
    'X1 n1 n2 n3 0 sky_n w=0.65 l=0.15 ad=0.2 as=0 pd=1.9 ps=0.65'
    """
    return transistor_line(name, (d, g, s, b), model, kind, scale, dev.w_um, dev.l_um, dev.ad_um2, dev.as_um2,
                           max(dev.pd_um, dev.w_um), max(dev.ps_um, dev.w_um))


def _role(circuit: Circuit, tech: Tech, net: str) -> str:
    return circuit.role_of(net, tech)


def _outside_parts(circuit: Circuit, tech: Tech, inside: set[str], nets: set[str]) -> dict[str, CapParts]:
    """Zero-bias parts that devices outside the copy add to its nets."""
    out: dict[str, CapParts] = {}
    for d in circuit.devices:
        if d.name in inside:
            continue
        p = tech.mos[d.type]
        if d.gate in nets:
            out[d.gate] = out.get(d.gate, CapParts()) + gate_parts(p, d.w_um, d.l_um)
        for net, area, perim in ((d.drain, d.ad_um2, d.pd_um), (d.source, d.as_um2, d.ps_um)):
            if net in nets:
                gate_edge = min(d.w_um, perim)
                j = junction_parts(p, JunctionGeometry(area, perim - gate_edge, gate_edge))
                out[net] = out.get(net, CapParts()) + j + overlap_per_side(p, d.w_um)
    return out


def _pwl(points: list[tuple[float, float]]) -> str:
    return "PWL(" + " ".join(f"{t:.6g}n {v:.6g}" for t, v in points) + ")"


def _levels_wave(on: float, pre: float, ev: float) -> str:
    # inputs change once the clock edge is over: an input from another
    # dynamic stage cannot move before the clock that starts its evaluation
    t = EVAL_NS + EDGE_NS
    return _pwl([(0.0, on), (RESET_NS, on), (RESET_NS + EDGE_NS, pre), (t, pre), (t + EDGE_NS, ev)])


def stage_deck(circuit: Circuit, stage: Stage, tech: Tech, runs: list[Run], *, include: str | None,
               models: dict[str, str], kinds: dict[str, str], scale: float | None, title: str,
               with_threshold: bool = True) -> StageDeck:
    """Write the deck of ``runs`` of ``stage``.

    Parameters
    ----------
    circuit, stage, tech
    runs : list of Run
    include : str or None
        The model file to include.
    models : dict of str to str
        Device name -> model (device subcircuit) name to write it with.
    kinds : dict of str to str
        Lower-case model name -> ``"subckt"`` or ``"model"``.
    scale : float or None
        The model file's ``.option scale``.
    title : str
    with_threshold : bool
        Also measure the receivers' switching points (a DC sweep).

    Returns
    -------
    StageDeck

    Notes
    -----
    Cost: linear in the devices of the circuit (the outside parts) plus
    runs × devices of the stage.  ngspice's own set-up grows faster than
    linearly with the number of device-subcircuit instances in one deck
    (measured with ngspice 39 and the sky130 models: 40 instances 1.0 s,
    80 instances 5.3 s, 160 instances 26 s), so callers keep decks small
    (:data:`MAX_INSTANCES`) and run several.
    """
    from analyze.simulator.ngspice import deck

    vdd = float(tech.vdd)
    n_type = stage.polarity == "n"
    devices = stage_devices(circuit, stage)
    inside = {d.name for d in devices}
    supply = {}
    nets: dict[str, str] = {}
    for d in devices:
        for net in (d.drain, d.gate, d.source):
            role = _role(circuit, tech, net)
            if role == "power":
                supply[net] = "vdd"
            elif role == "ground":
                supply[net] = "0"
    inputs = sorted(set(stage.inputs))
    ports = {stage.clock: "clk", **{n: f"i{k}" for k, n in enumerate(inputs)}}
    channel = {t for d in devices for t in (d.drain, d.source)}
    notes = []
    off_ties = {}
    for d in devices:
        for net in (d.drain, d.gate, d.source):
            if net in supply or net in ports or net in nets:
                continue
            if net in channel:
                nets[net] = f"n{len(nets)}"
            elif _role(circuit, tech, net) == "clock" and net not in off_ties:
                # a second clock (delayed or complementary): its phase is not
                # known, so it cannot be driven right; refuse rather than tie
                # a footer or precharge device off and pass a failing stage
                from extract.errors import InputError

                raise InputError(circuit.source or circuit.cell,
                                 f"stage {stage.dynamic_node}: device {d.name} is gated by clock {net}, not by the "
                                 f"stage's clock {stage.clock}; --simulate drives one clock per stage",
                                 f"cell {circuit.cell}")
            elif net not in off_ties:
                off_ties[net] = "vdd" if d.type == "pmos" else "0"
                notes.append(f"gate net {net} is driven by nothing in the stage; tied to turn {d.name} off")
    keeper_gates = {circuit.device(k).gate for k in stage.keepers}

    def node(net):
        if net in supply:
            return supply[net]
        if net in off_ties:
            return off_ties[net]
        if net in ports:
            return ports[net]
        return nets[net]

    body = {"nmos": "0", "pmos": "vdd"}
    held = [n for n in stage.internal_nodes if n in nets and n not in stage.secondary_precharge]
    extra = _outside_parts(circuit, tech, inside, set(nets))
    caps = {}
    for net, name in nets.items():
        c = (circuit.nets[net].cap.wire if net in circuit.nets else 0.0)
        c += extra[net].total if net in extra else 0.0
        if c > 0:
            caps[name] = c

    def copy(r: int, keeper_on: bool) -> list[str]:
        """The devices and capacitors of run ``r``, written flat with node
        names prefixed ``r<r>_`` (flat copies keep ngspice's set-up time
        linear in the number of copies; subcircuit copies do not)."""
        def at(net):
            n = node(net)
            if n in ("vdd", "0", "clk"):
                return n
            return f"r{r}_{n}"
        out = []
        for k, d in enumerate(devices):
            g = at(d.gate)
            if not keeper_on and d.name in stage.keepers and d.gate in keeper_gates:
                g = "vdd" if d.type == "pmos" else "0"
            m = models[d.name]
            out.append(device_line(f"r{r}d{k}", d, at(d.drain), g, at(d.source), body[d.type], m,
                                   kinds.get(m.lower(), "subckt"), scale))
        out += [f"Cr{r}{name} r{r}_{name} 0 {c:.6g}f" for name, c in sorted(caps.items())]
        rail = "0" if n_type else "vdd"
        for net in held:
            out.append(f"Sr{r}{nets[net]} r{r}_{nets[net]} {rail} hold 0 dynshare_hold")
        return out

    lines = []
    clk_eval, clk_pre = (vdd, 0.0) if n_type else (0.0, vdd)
    on = vdd if n_type else 0.0
    lines.append("Vdd vdd 0 " + f"{vdd:.6g}")
    if held:
        lines.append(f"Vhold hold 0 {_pwl([(0, 1.0), (EVAL_NS - RELEASE_NS, 1.0), (EVAL_NS - RELEASE_NS + EDGE_NS, 0.0)])}")
        lines.append(".model dynshare_hold sw vt=0.5 vh=0.1 ron=1 roff=1e14")
    lines.append(f"Vclk clk 0 {_pwl([(0, clk_eval), (RESET_NS, clk_eval), (RESET_NS + EDGE_NS, clk_pre), (EVAL_NS, clk_pre), (EVAL_NS + EDGE_NS, clk_eval)])}")
    x = nets[stage.dynamic_node]
    out_net = nets.get(stage.receivers[0].output) if stage.receivers else None
    measures = []
    window = f"from={EVAL_NS:.6g}n to={EVAL_NS + tech.evaluation_ns:.6g}n"
    commands = [f"tran {TSTEP_PS:g}p {EVAL_NS + tech.evaluation_ns:.6g}n"]
    vectors = []
    for r, run in enumerate(runs):
        names = []
        for k, net in enumerate(inputs):
            pre, ev = run.levels.get(net, (0, 0) if n_type else (1, 1))
            src = f"r{r}_i{k}"
            lines.append(f"V{src} {src} 0 {_levels_wave(on, pre * vdd, ev * vdd)}")
            names.append(src)
        lines += copy(r, run.keeper)
        probe = f"v(r{r}_{x})"
        vectors.append(probe)
        ext, at = ("min", "min_at") if n_type else ("max", "max_at")
        m = {"v": f"vx{r}", "t": f"tx{r}", "out": ""}
        commands += [f"meas tran vx{r} {ext} {probe} {window}", f"meas tran tx{r} {at} {probe} {window}",
                     f"print vx{r}", f"print tx{r}"]
        if out_net:
            oext = "max" if n_type else "min"
            commands += [f"meas tran vo{r} {oext} v(r{r}_{out_net}) {window}", f"print vo{r}"]
            m["out"] = f"vo{r}"
        measures.append(m)
    commands.append("wrdata vx.txt " + " ".join(vectors))
    thresholds = []
    for j, rx in enumerate(stage.receivers if with_threshold else ()):
        dn, dp = circuit.device(rx.nmos), circuit.device(rx.pmos)
        lines.append(device_line(f"rxn{j}", dn, f"rxo{j}", "rxi", "0", "0", models[dn.name],
                                 kinds.get(models[dn.name].lower(), "subckt"), scale))
        lines.append(device_line(f"rxp{j}", dp, f"rxo{j}", "rxi", "vdd", "vdd", models[dp.name],
                                 kinds.get(models[dp.name].lower(), "subckt"), scale))
        thresholds.append(f"vm{j}")
    if thresholds:
        lines.append("Vrxi rxi 0 0")
        commands.append(f"dc Vrxi 0 {vdd:.6g} {vdd / 900:.6g}")
        for j in range(len(thresholds)):
            commands += [f"meas dc vm{j} find v(rxi) when v(rxo{j})=v(rxi)", f"print vm{j}"]
    options = [".option rshunt=1e12", f".temp {tech.models.temperature_c if tech.models else 27.0:g}"]
    if scale is not None:
        # lengths are written in the library's unit: say so, whether or not
        # the model file sets it itself
        options.append(f".option scale={scale:.6g}")
    text = deck(title, include, lines, commands, options=options)
    return StageDeck(text, measures, thresholds, "vx.txt", nets, notes)
