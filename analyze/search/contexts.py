"""Stage contexts: the analysis of a stage done once per distinct context.

A big block repeats the same stage many times (an array of one cell, a
few cells placed side by side).  Everything the charge-sharing analysis
of :func:`analyze.search.analysis.analyze_stage` reads about a stage is
gathered into a hashable *context key*, with every name replaced by its
rank among the stage's own names (so the order of names, which decides
sorting and tie-breaks, is part of the key).  The analysis then runs on a
small circuit rebuilt from the key alone, whose names are placeholders
in the same order, and the result is renamed back to each stage that has
that key.  Equal keys therefore give equal results with only the names
substituted, by construction; :class:`StageContexts` keeps one result per
key.

What the key holds (the analysis reads nothing else, with the run's tech
and constraints fixed for the life of a :class:`StageContexts`):

* the stage's parts: polarity, dynamic node, clock, supply, rail, footer
  node, inputs, internal nodes, secondary precharge, and the devices named
  as precharge, evaluation (in order), footer, keepers and receivers;
* each of those devices: type, model, the local ranks of its drain, gate
  and source, and W, L, AD, AS, PD, PS (bit for bit);
* each net they touch: its role as the analysis sees it (the circuit's,
  else the tech file's by name) and its capacitance parts and junction
  geometry per device type (bit for bit; a net missing from the circuit
  counts as one with no capacitance, which the analysis treats alike);
* with ``[models]`` in the tech file, also every device with a channel on
  the dynamic node or an internal node (the foundry-model analysis reads
  them: :func:`analyze.physics.device_charge.table_devices`), with the
  nets they touch, and their order in the circuit (sums over them go in
  that order, so the context circuit lists them first, in it);
* the constraints as they bear on the stage: every constraint name that
  is one of its nets, by rank (a name matching a net only without regard
  to case marked so); names of no net of the stage only as placeholders,
  since they can never resolve to an input of it.

Left out, and mapped back instead: names themselves and locations (the
stage's own, and each flag's, read from the real circuit).  A stage whose
constraint names match two of its nets without regard to case, or whose
analysis raises an error, or whose foundry models could not be used (the
report then quotes the error, in the stage's own names), is analysed
directly, as without contexts.

Since a key holds all the analysis reads, the distinct contexts can also
be analysed in other processes (:func:`analyse_contexts` on a chunk of
keys, :meth:`StageContexts.prefetch` to take the results back): the
cluster run of one block, :mod:`analyze.cli.cluster_block`.

Examples
--------
Two copies of one footless NAND2 under different names share a context:

>>> from extract.circuit import CapParts, Circuit, Device, Net
>>> from extract.tech import MosParams, NetRoles, Tech
>>> from analyze.stages.stage import Stage
>>> p = dict(gamma=0.0, phi=0.8, kp=200.0, cox=8.0, cgo=0.0, cj=1.0, cjsw=0.2,
...          cjswg=0.2, mj=0.5, mjsw=0.33, pb=0.8, pbsw=0.8)
>>> tech = Tech("t", 1.8, NetRoles(("VDD",), ("VSS",)), {},
...             {"nmos": MosParams("nmos", 0.45, **p), "pmos": MosParams("pmos", -0.45, **p)})
>>> def copy(k):
...     nets = {f"{n}{k}": Net(f"{n}{k}", cap=CapParts(wire=c)) for n, c in [("X", 30.0), ("n", 10.0)]}
...     devs = [Device(f"MA{k}", "nmos", f"X{k}", f"A{k}", f"n{k}", 1.0, 0.18),
...             Device(f"MB{k}", "nmos", f"n{k}", f"B{k}", "VSS", 1.0, 0.18)]
...     return Stage(f"X{k}", "n", "CLK", "VDD", "VSS", (), (f"MA{k}", f"MB{k}"), None, None,
...                  (f"A{k}", f"B{k}"), (f"n{k}",)), nets, devs
>>> (s1, n1, d1), (s2, n2, d2) = copy(1), copy(2)
>>> circuit = Circuit("two", {**n1, **n2}, d1 + d2)
>>> from analyze.search.analysis import analyze_stage
>>> ctx = StageContexts(circuit, tech, None, analyze_stage)
>>> r1, r2 = ctx.analyse(s1), ctx.analyse(s2)
>>> r2.worst_case.inputs, r2.worst_case.shared_nodes, ctx.analysed, ctx.reused
({'A2': 1, 'B2': 0}, ['n2'], 1, 1)
>>> stage_context(circuit, s1, tech)[0] == stage_context(circuit, s2, tech)[0]
True
"""

from __future__ import annotations

import struct

from analyze.physics.device_charge import table_devices
from analyze.search.constraints import Constraints
from analyze.stages.stage import Receiver, Stage
from extract.circuit import CapParts, Circuit, Device, JunctionGeometry, Net
from extract.tech import Tech

__all__ = ["StageContexts", "stage_context", "context_circuit", "renamed_result", "analyse_contexts",
           "MODELS_UNUSABLE"]

_SIX = struct.Struct("<6d")
_THREE = struct.Struct("<3d")
#: A constraint name that is no net of the stage (never resolves to one of its inputs).
_FOREIGN = "~"
#: Kept for a context whose analysis raised: its stages are analysed directly.
_DIRECT = object()


def stage_context(circuit: Circuit, stage: Stage, tech: Tech, constraints: Constraints | None = None,
                  rows: dict | None = None):
    """The context key of ``stage`` and its names in rank order.

    ``rows``, when given, keeps the key rows of rail and clock nets between
    calls on one circuit (they are in every stage).

    Parameters
    ----------
    circuit : Circuit
    stage : Stage
    tech : Tech
        For the role of a net the circuit does not list.
    constraints : Constraints or None

    Returns
    -------
    key : tuple or None
        Hashable; None when the stage cannot be keyed (constraint names
        that match several of its nets without regard to case).
    nets : list of str
        The stage's net names, sorted: local net ``i`` is ``nets[i]``.
    devices : list of str
        Its device names, sorted.

    Raises
    ------
    KeyError
        When the stage names a device the circuit does not have.

    Notes
    -----
    O(devices and nets of the stage + names in the constraints).
    """
    polarity = stage.polarity
    keepers, receivers, secondary = stage.keepers, stage.receivers, stage.secondary_precharge
    dev_names = [*stage.precharge, *stage.evaluation, *keepers]
    if stage.footer is not None:
        dev_names.append(stage.footer)
    for r in receivers:
        dev_names += (r.nmos, r.pmos)
    if secondary:
        dev_names += secondary.values()
    table = None
    if tech.models is not None:
        # the foundry-model analysis also reads every device with a channel
        # on the dynamic or an internal node, in circuit order
        table = table_devices(circuit, stage)
        dev_names += [d.name for d in table]
    dev_names = sorted(set(dev_names))
    index = circuit.devices_by_name()
    devs = [index.get(n) or circuit.device(n) for n in dev_names]
    net_set = {stage.dynamic_node, stage.clock, stage.supply, stage.rail, stage.footer_node, *stage.inputs,
               *stage.internal_nodes, *secondary}
    net_set.discard(None)
    for r in receivers:
        net_set.add(r.output)
    for d in devs:
        net_set.add(d.drain)
        net_set.add(d.gate)
        net_set.add(d.source)
    nets = sorted(net_set)
    ni = {n: i for i, n in enumerate(nets)}
    di = {n: i for i, n in enumerate(dev_names)}
    get = circuit.nets.get
    pack6, pack3 = _SIX.pack, _THREE.pack
    net_rows = []
    if rows is None:
        rows = {}
    for n in nets:
        row = rows.get(n)
        if row is not None:
            net_rows.append(row)
            continue
        net = get(n)
        if net is None:
            net_rows.append((tech.role_of(n), None, ()))
            continue
        c = net.cap
        jn = net.junctions
        if not jn:
            junctions = ()
        elif len(jn) == 1:
            ((t, j),) = jn.items()
            junctions = ((t, pack3(j.area_um2, j.field_perimeter_um, j.gate_perimeter_um)),)
        else:
            junctions = tuple(sorted((t, pack3(j.area_um2, j.field_perimeter_um, j.gate_perimeter_um))
                                     for t, j in jn.items()))
        row = (net.role, pack6(c.junction_area, c.junction_sidewall, c.junction_gate_edge,
                               c.wire, c.gate, c.overlap), junctions)
        if net.role != "signal":  # rails and clocks: in every stage, made once (few, so kept)
            rows[n] = row
        net_rows.append(row)
    dev_rows = tuple([
        (d.type, d.model, ni[d.drain], ni[d.gate], ni[d.source],
         pack6(d.w_um, d.l_um, d.ad_um2, d.as_um2, d.pd_um, d.ps_um))
        for d in devs
    ])
    stage_row = (
        polarity, ni[stage.dynamic_node], ni[stage.clock], ni[stage.supply], ni[stage.rail],
        tuple([di[n] for n in stage.precharge]), tuple([di[n] for n in stage.evaluation]),
        None if stage.footer is None else di[stage.footer],
        None if stage.footer_node is None else ni[stage.footer_node],
        tuple([ni[n] for n in stage.inputs]), tuple([ni[n] for n in stage.internal_nodes]),
        tuple([di[n] for n in keepers]), tuple([(di[r.nmos], di[r.pmos], ni[r.output]) for r in receivers]),
        tuple([(ni[n], di[d]) for n, d in secondary.items()]),
    )
    cons = _constraints_row(constraints, nets, ni)
    if cons is False:
        return None, nets, dev_names
    order = None if table is None else tuple([di[d.name] for d in table])
    return (stage_row, tuple(net_rows), dev_rows, cons, order), nets, dev_names


def _constraints_row(constraints, nets, ni):
    """The constraints in local ranks: ``(k,)`` a net of the stage by its
    exact name, ``(k, "fold")`` by a case variant of its name, None a name
    of no net of the stage.  False when a name matches several nets
    without regard to case (not keyed)."""
    if constraints is None:
        return None
    folded: dict[str, list[int]] = {}
    for i, n in enumerate(nets):
        folded.setdefault(n.upper(), []).append(i)

    def token(name):
        hits = folded.get(name.upper())
        if not hits:
            return None
        if len(hits) > 1:
            raise _Unkeyed
        k = hits[0]
        return (k,) if nets[k] == name else (k, "fold")

    try:
        hot = tuple(g for g in (tuple(token(n) for n in grp) for grp in constraints.one_hot) if any(g))
        comp = tuple(p for p in ((token(a), token(b)) for a, b in constraints.complement) if all(p))
        fixed = tuple((t, v) for t, v in ((token(n), v) for n, v in constraints.fixed) if t)
        low = tuple(t for t in (token(n) for n in constraints.low_in_precharge) if t)
    except _Unkeyed:
        return False
    return hot, comp, fixed, low


#: How a stage's ``physics_note`` starts when its foundry models could not be
#: used (the rest quotes the error, which names the stage's own devices).
MODELS_UNUSABLE = "foundry models not usable for this stage"


class _Unkeyed(Exception):
    pass


def _names(count: int, letter: str) -> list[str]:
    """Placeholder names in rank order (same width, so sorting them keeps the order)."""
    width = len(str(max(count - 1, 0)))
    return [f"{letter}{i:0{width}d}" for i in range(count)]


def context_circuit(key, path: str = "<constraints>"):
    """The small circuit, stage and constraints a context key describes.

    Parameters
    ----------
    key : tuple
        From :func:`stage_context`.
    path : str
        The constraints file's path (for messages).

    Returns
    -------
    circuit : Circuit
        Nets ``N0…`` and devices ``M0…`` in the rank order of the real names.
    stage : Stage
        Without a location.
    constraints : Constraints or None
    """
    stage_row, net_rows, dev_rows, cons, order = key
    nn = _names(len(net_rows), "N")
    dn = _names(len(dev_rows), "M")
    nets = {}
    for name, (role, parts, junctions) in zip(nn, net_rows):
        cap = CapParts() if parts is None else CapParts(*_SIX.unpack(parts))
        nets[name] = Net(name, role=role, cap=cap,
                         junctions={t: JunctionGeometry(*_THREE.unpack(j)) for t, j in junctions})
    devices = [Device(name, t, nn[d], nn[g], nn[s], *_SIX.unpack(nums), model=model)
               for name, (t, model, d, g, s, nums) in zip(dn, dev_rows)]
    if order is not None:  # the devices on the stage's nodes first, in the real circuit's order
        first = set(order)
        devices = [devices[i] for i in order] + [d for i, d in enumerate(devices) if i not in first]
    (pol, x, clk, sup, rail, pre, ev, foot, foot_node, inputs, internal, keepers, receivers, secondary) = stage_row
    dv = lambda idx: tuple(dn[i] for i in idx)  # noqa: E731
    stage = Stage(
        dynamic_node=nn[x], polarity=pol, clock=nn[clk], supply=nn[sup], rail=nn[rail], precharge=dv(pre),
        evaluation=dv(ev), footer=None if foot is None else dn[foot],
        footer_node=None if foot_node is None else nn[foot_node], inputs=tuple(nn[i] for i in inputs),
        internal_nodes=tuple(nn[i] for i in internal), keepers=dv(keepers),
        receivers=tuple(Receiver(dn[a], dn[b], nn[o]) for a, b, o in receivers),
        secondary_precharge={nn[n]: dn[d] for n, d in secondary},
    )
    constraints = None
    if cons is not None:
        hot, comp, fixed, low = cons

        def name(t):
            if t is None:
                return _FOREIGN
            return nn[t[0]] if len(t) == 1 else nn[t[0]].lower()

        constraints = Constraints(
            one_hot=tuple(tuple(name(t) for t in g) for g in hot),
            complement=tuple((name(a), name(b)) for a, b in comp),
            fixed=tuple((name(t), v) for t, v in fixed),
            path=path,
            low_in_precharge=tuple(name(t) for t in low),
        )
    return Circuit("context", nets, devices), stage, constraints


def _clone(record, **changes):
    """A shallow copy of a dataclass record with some fields changed
    (what :func:`dataclasses.replace` does, without its per-field work)."""
    new = object.__new__(type(record))
    new.__dict__.update(record.__dict__)
    new.__dict__.update(changes)
    return new


def renamed_result(result, stage: Stage, circuit: Circuit, nets: list[str], devices: list[str]):
    """A context's result as the result of ``stage`` of ``circuit``.

    Parameters
    ----------
    result : StageResult
        Of the context circuit (:func:`context_circuit`).
    stage : Stage
        The real stage.
    circuit : Circuit
        The real circuit (for the flags' locations).
    nets, devices : list of str
        The real names in rank order (:func:`stage_context`).

    Returns
    -------
    StageResult
        New records throughout (the cached one is never shared).
    """
    wc = result.worst_case
    if wc is not None:
        wc = _clone(wc, inputs={nets[int(k[1:])]: v for k, v in wc.inputs.items()},
                    shared_nodes=[nets[int(n[1:])] for n in wc.shared_nodes])
    flags = []
    for f in result.flags:
        node = nets[int(f.node[1:])]
        net = circuit.nets.get(node)
        flags.append(_clone(f, node=node, location_um=None if net is None else net.location_um,
                            between=tuple(devices[int(d[1:])] for d in f.between)))
    return _clone(result, stage=stage, worst_case=wc, flags=flags, simulation=list(result.simulation),
                  simulation_notes=list(result.simulation_notes))


def analyse_contexts(analyse, keys, tech: Tech, path: str = "<constraints>") -> list:
    """The analysis of each context key on the circuit rebuilt from it.

    What :class:`StageContexts` runs once per distinct key, here for a
    list of keys at once: a cluster worker runs it on a chunk of keys
    (:mod:`analyze.cli.cluster_block`).

    Parameters
    ----------
    analyse : callable
        ``analyse(circuit, stage, tech, constraints) -> StageResult``.
    keys : list of tuple
        From :func:`stage_context` (never None).
    tech : Tech
    path : str
        The constraints file's path (for messages).

    Returns
    -------
    list
        A result in placeholder names per key, in order (rename it with
        :func:`renamed_result`); None where the analysis raised (the
        stages of that key are then analysed directly, in their own names).

    Notes
    -----
    Cost: one analysis per key on a circuit of the stage's size.

    Examples
    --------
    >>> from analyze.search.analysis import analyze_stage
    >>> from extract.tech import MosParams, NetRoles, Tech
    >>> p = dict(gamma=0.0, phi=0.8, kp=200.0, cox=8.0, cgo=0.0, cj=1.0, cjsw=0.2,
    ...          cjswg=0.2, mj=0.5, mjsw=0.33, pb=0.8, pbsw=0.8)
    >>> tech = Tech("t", 1.8, NetRoles(("VDD",), ("VSS",)), {},
    ...             {"nmos": MosParams("nmos", 0.45, **p), "pmos": MosParams("pmos", -0.45, **p)})
    >>> nets = {"X": Net("X", cap=CapParts(wire=30.0)), "n": Net("n", cap=CapParts(wire=10.0))}
    >>> devs = [Device("MA", "nmos", "X", "A", "n", 1.0, 0.18), Device("MB", "nmos", "n", "B", "VSS", 1.0, 0.18)]
    >>> st = Stage("X", "n", "CLK", "VDD", "VSS", (), ("MA", "MB"), None, None, ("A", "B"), ("n",))
    >>> circuit = Circuit("nand2", nets, devs)
    >>> key, names, _ = stage_context(circuit, st, tech)
    >>> [r.worst_case.shared_nodes for r in analyse_contexts(analyze_stage, [key], tech)]
    [['N6']]
    >>> names[6]
    'n'
    """
    return [_context_result(analyse, key, tech, path) for key in keys]


def _context_result(analyse, key, tech, path):
    """One context analysed on its placeholder circuit; None when that raises."""
    c, s, cons = context_circuit(key, path)
    try:
        result = analyse(c, s, tech, cons)
    except Exception:  # noqa: BLE001
        return None
    if (result.physics_note or "").startswith(MODELS_UNUSABLE):
        return None  # the note quotes the error in placeholder names
    return result


class StageContexts:
    """Stage results of one circuit, analysed once per distinct context.

    Parameters
    ----------
    circuit : Circuit
    tech : Tech
    constraints : Constraints or None
    analyse : callable
        ``analyse(circuit, stage, tech, constraints) -> StageResult``:
        :func:`analyze.search.analysis.analyze_stage`.

    Attributes
    ----------
    analysed, reused : int
        Contexts analysed (here or, by :meth:`prefetch`, elsewhere), and
        stages that took a result analysed before them (after
        :meth:`prefetch`, every keyed stage).

    Notes
    -----
    With ``[models]`` in the tech file the foundry-model analysis is
    shared too (its key also holds the devices on the stage's nodes); its
    device tables are measured for the context circuit's placeholder
    names, once, and cached as any others.  Cost per stage: the key,
    O(stage size), then a dict look-up; the analysis once per key.
    """

    def __init__(self, circuit: Circuit, tech: Tech, constraints: Constraints | None, analyse):
        self.circuit, self.tech, self.constraints, self._analyse = circuit, tech, constraints, analyse
        self._results: dict = {}
        self._keys: dict = {}
        self._rows: dict = {}  # key rows of rail and clock nets, shared by every stage
        self.analysed = self.reused = 0

    def _path(self) -> str:
        return self.constraints.path if self.constraints is not None else "<constraints>"

    def _key(self, stage: Stage):
        """``(key, nets, devices)`` of ``stage`` (key None: not keyed)."""
        kept = self._keys.pop(id(stage), None)
        if kept is not None and kept[0] is stage:
            return kept[1:]
        try:
            return stage_context(self.circuit, stage, self.tech, self.constraints, self._rows)
        except KeyError:  # a device the circuit lacks: whatever the analysis makes of it
            return None, None, None

    def prefetch(self, stages, solve) -> int:
        """Analyse the distinct contexts of ``stages`` elsewhere, at once.

        Parameters
        ----------
        stages : list of Stage
            Those :meth:`analyse` will be asked for next.
        solve : callable
            ``solve(analyse, keys, tech, path)`` yields ``(key, result)``
            for each of ``keys`` in any order, as
            :func:`analyse_contexts` gives them (result None where the
            analysis raised): on the workers of a cluster
            (:mod:`analyze.cli.cluster_block`).

        Returns
        -------
        int
            Contexts sent to ``solve``.

        Notes
        -----
        :meth:`analyse` then only renames (or, for stages without a key
        and contexts whose analysis raised, analyses directly), so the
        results are those of the local run.  The stages' keys are kept
        until :meth:`analyse` takes them (one computation per stage; equal
        keys share one object).  Nothing is sent with ``[models]`` in the
        tech file (those stages are analysed directly).
        """
        if self.tech.models is not None:
            return 0
        distinct: dict = {}
        for st in stages:
            key, nets, devices = self._key(st)
            if key is not None:
                key = distinct.setdefault(key, key)
                self._keys[id(st)] = (st, key, nets, devices)
        todo = [k for k in distinct if k not in self._results]
        for key, result in solve(self._analyse, todo, self.tech, self._path()) if todo else ():
            self._results[key] = _DIRECT if result is None else result
            self.analysed += result is not None
        return len(todo)

    def analyse(self, stage: Stage):
        """The :class:`~analyze.search.analysis.StageResult` of ``stage``."""
        key, nets, devices = self._key(stage)
        hit = None if key is None else self._results.get(key)
        if key is not None and hit is None:
            hit = _context_result(self._analyse, key, self.tech, self._path())
            self._results[key] = _DIRECT if hit is None else hit
            self.analysed += hit is not None
        elif hit is not None and hit is not _DIRECT:
            self.reused += 1
        if hit is None or hit is _DIRECT:
            # not keyed, or the context's analysis raised: said in the real
            # stage's own names, as without contexts
            return self._analyse(self.circuit, stage, self.tech, self.constraints)
        return renamed_result(hit, stage, self.circuit, nets, devices)
