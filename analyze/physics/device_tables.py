"""Device charge tables measured from the foundry's models.

The lumped model counts a device's gate and overlap capacitance as fixed
capacitors.  With the foundry's models the charge a device holds on its
terminals depends on every terminal voltage: a conducting device's
inversion channel holds charge that comes from (and returns to) the nodes
it joins, a rising gate pushes charge into them, and a receiver's gate
capacitance changes as its input falls through the threshold.
:func:`stage_tables` measures what the charge-conservation solver needs for
one stage, at the corner of the tech file's ``[models]``, with ngspice:

``terminal(device, vg)``
    The charge (fC) that both source/drain terminals of ``device`` hold
    together, tied at V, with the gate at ``vg`` and the body at its rail,
    on a grid of V from 0 to VDD, relative to the device with every
    terminal at 0 V: intrinsic and overlap charge as the models compute it
    (the device has no AD/AS/PD/PS, so its junctions are not in it; those
    stay with the depletion formula of :mod:`analyze.physics.charge`).  A
    conducting device's channel charge is in it; a device at its pass limit
    or off has none.
``receiver(rx)``
    The charge on a receiving inverter's input (both gates) over its input
    voltage, its output following (so the output's swing past the switching
    point is in it) or held where it was before evaluation (the charge
    conservation's own curve; where the output moves within the window,
    :mod:`analyze.physics.transient` adds what its swing couples back),
    and that switching point from a DC sweep: the input where the output
    equals it.
``response(rx)``
    A receiver's input charge and static output current over its input ×
    its output voltage (:mod:`analyze.physics.receiver_tables`): what the
    transient of the window needs when the output moves
    (:mod:`analyze.physics.transient`).
``current(device)``
    An evaluation device's channel current with its gate on, against its
    near terminal and its drain–source voltage (a log-spaced grid from
    2 mV, :data:`VDS_GRID`): what charges the internal nodes past the pass
    limit.

Charges are measured by integrating the current that a slow ramp draws
(the models are quasi-static, so the ramp speed does not matter; a 1 fF
capacitor on a ramp of its own calibrates sign and integration); the
decks are in :mod:`analyze.physics.table_measurement`, this module decides
what a stage needs and keeps the results.

Notes
-----
A few ngspice runs per stage and corner (the charges, the currents, the
receivers' response surfaces — :mod:`analyze.physics.receiver_tables` —
and the clock edge), each with its models
loaded once: every distinct device and gate level
gets its own pair of sources and every receiver its own inverter, on one
transient (gate ramp 0 -> level in 1 ns, then source/drain or input ramp
0 -> VDD in 2 ns), plus one DC sweep for the switching points and one
per drain–source voltage for the currents.
Every deck runs at ``[models] temperature`` (27 °C by default).
Results are cached on disk (``$DYNSHARE_CACHE``) by the pruned model file,
corner, VDD, temperature and the list of what is measured, so a second check measures
nothing.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import threading
from bisect import bisect_right
from collections import OrderedDict
from dataclasses import dataclass, field

import numpy as np

from analyze.physics.lookup import cell_finder, interp_point, interp_rows
from analyze.physics import table_measurement
from analyze.physics.receiver_tables import RAMP_NS, RAMP_START_NS, ReceiverResponse, output_levels
from analyze.physics.table_measurement import GRID_STEPS, VDS_GRID
from extract.tech import Tech

__all__ = ["StageTables", "stage_tables", "GRID_STEPS", "VDS_GRID"]


@dataclass
class StageTables:
    """Measured charge tables of one stage's devices.

    Attributes
    ----------
    v : ndarray
        The voltage grid, V.
    terminals : dict of (str, float) to ndarray
        ``(device name, gate level V)`` -> charge on one source/drain
        terminal over ``v``, fC.
    receivers : dict of str to ndarray
        Receiver nmos name -> input charge over ``v``, fC, the output
        following.
    held : dict of (str, str) to ndarray
        ``(receiver nmos name, "lo" or "hi")`` -> input charge over ``v``
        with the output held low or high (where it is before evaluation).
    thresholds : dict of str to float
        Receiver nmos name -> switching point, V.
    currents : dict of str to ndarray
        Pass device name -> its current (µA, positive) with the gate on
        (nmos at VDD, pmos at 0); rows: the drain–source voltage
        ``v_ds`` (far terminal, towards the dynamic node, above the near
        one for an nmos, below it for a pmos), columns: the near terminal
        at ``v``.
    v_ds : ndarray
        Drain–source voltages of the current tables, V.
    clock_v : float or None
        The dynamic node's voltage at the end of the evaluation window when
        nothing shares it: where the clock edge alone (coupling and the
        precharge devices' channel charge) leaves it.
    responses : dict of str to (ndarray, ndarray)
        Receiver nmos name -> its input charge (fC) and output current (µA)
        over ``v`` × ``out_levels`` (:mod:`analyze.physics.receiver_tables`).
    out_levels : ndarray or None
        The output voltages of ``responses``, V.
    """

    v: np.ndarray
    terminals: dict = field(default_factory=dict)
    receivers: dict = field(default_factory=dict)
    held: dict = field(default_factory=dict)
    thresholds: dict = field(default_factory=dict)
    currents: dict = field(default_factory=dict)
    v_ds: np.ndarray = field(default_factory=lambda: np.asarray(VDS_GRID))
    clock_v: float | None = None
    responses: dict = field(default_factory=dict)
    out_levels: np.ndarray | None = None
    _made: dict = field(default_factory=dict, repr=False, compare=False)

    def current(self, name: str):
        """Pass current ``I(v_near, v_far)`` of ``name``, µA: log-interpolated
        in the near voltage, log–log in |V_DS| = |v_far − v_near| (below the
        grid's first step, proportional to V_DS, as a subthreshold current
        1 − exp(−V_DS/V_T) is for V_DS ≪ V_T; EKV/BSIM subthreshold form,
        from memory)."""
        table = self.currents[name]
        made = self._made.get(("i", name))
        if made is not None and made[0] is table:
            return made[1]
        logs = np.log(np.maximum(table, 1e-15)).tolist()
        lds = np.log(self.v_ds).tolist()
        grid, first = self.v.tolist(), self.v_ds[0]
        last, rows = len(grid) - 1, len(lds) - 1

        def i(v_near, v_far):
            vds = abs(float(v_far) - float(v_near))
            if vds <= 0.0:
                return 0.0
            if vds != vds:
                return vds  # NaN, as numpy.interp gives it
            x = float(v_near)
            # numpy.interp's arithmetic on plain floats (analyze.physics.lookup),
            # the near voltage's place in the grid found once for every row
            j = bisect_right(grid, x) - 1
            if x != x or 0 <= j < last and grid[j] != x:
                col = None
                if x == x:
                    x0, dx = grid[j], grid[j + 1] - grid[j]
            else:
                col = 0 if j < 0 else (last if j >= last else j)

            def row(k):
                r = logs[k]
                if col is not None:
                    return r[col]
                out = (r[j + 1] - r[j]) / dx * (x - x0) + r[j] if x == x else float("nan")
                return out if out == out else interp_point(x, grid, r)

            if vds < first:
                return float(np.exp(row(0)) * vds / first)
            # log-log in |V_DS|: only the two rows around it are looked up
            lx = float(np.log(vds))
            m = bisect_right(lds, lx) - 1
            if m < 0:
                y = row(0)
            elif m >= rows:
                y = row(rows)
            elif lds[m] == lx:
                y = row(m)
            else:
                lo = row(m)
                y = (row(m + 1) - lo) / (lds[m + 1] - lds[m]) * (lx - lds[m]) + lo
                if y != y:
                    y = interp_rows(lx, lds, row)
            return float(np.exp(y))
        self._made[("i", name)] = (table, i)
        return i

    def pass_current(self, name: str):
        """``I(v_near, v_far)`` of device ``name``, µA: what :meth:`current`
        gives, to rounding, on plain floats with ``math`` (the creep's inner
        loop, :mod:`analyze.physics.creep`); made once per table.

        Parameters
        ----------
        name : str
            A device with a current table.

        Returns
        -------
        callable
            ``I(v_near, v_far)``: log-interpolated in the near voltage, log–log
            in |V_DS| = |v_far − v_near|, proportional to V_DS below the grid's
            first step; 0 at V_DS = 0.

        Notes
        -----
        The same table and the same interpolation as :meth:`current` (its
        docstring gives the source of the forms), which stays numpy.interp's
        arithmetic bit for bit for the bound of
        :func:`analyze.physics.bound.equalised_bound`; only the
        arithmetic's order differs (an index from the even grid, ``math.exp``),
        and a change of the forms is a change of both.  O(log rows) per call.
        """
        table = self.currents[name]
        made = self._made.get(("pass", name))
        if made is not None and made[0] is table:
            return made[1]
        table = np.asarray(table, dtype=float)
        logs = np.log(np.maximum(table, 1e-15)).tolist()
        v_ds = [float(x) for x in self.v_ds]
        lds = [math.log(x) for x in v_ds]
        inv_steps = [1.0 / (lds[k + 1] - lds[k]) for k in range(len(lds) - 1)]
        first, rows = v_ds[0], len(lds) - 1
        inv_first = 1.0 / first
        cell = cell_finder([float(x) for x in self.v])
        exp, log = math.exp, math.log

        def i(v_near, v_far):
            vds = abs(v_far - v_near)
            if vds <= 0.0:
                return 0.0
            j, t = cell(v_near)
            if j is None or vds != vds:
                return math.nan
            if vds < first:
                r = logs[0]
                return exp(r[j] + (r[j + 1] - r[j]) * t) * vds * inv_first
            lx = log(vds)
            m = bisect_right(lds, lx) - 1
            if m >= rows:
                r = logs[rows]
                return exp(r[j] + (r[j + 1] - r[j]) * t)
            r0, r1 = logs[m], logs[m + 1]
            y0 = r0[j] + (r0[j + 1] - r0[j]) * t
            y1 = r1[j] + (r1[j + 1] - r1[j]) * t
            return exp(y0 + (y1 - y0) * (lx - lds[m]) * inv_steps[m])
        self._made[("pass", name)] = (self.currents[name], i)
        return i

    def response(self, nmos: str) -> ReceiverResponse | None:
        """The response lookups of the receiver whose nmos is ``nmos``
        (None without its tables); made once per table."""
        table = self.responses.get(nmos)
        if table is None:
            return None
        made = self._made.get(("response", nmos))
        if made is not None and made[0] is table:
            return made[1]
        out = ReceiverResponse(self.v, self.out_levels, table[0], table[1])
        self._made[("response", nmos)] = (table, out)
        return out

    def nondecreasing(self) -> bool:
        """Whether every charge table (terminals, receivers, held receivers)
        is nondecreasing over ``v``; worked out once while the tables stay
        the same arrays."""
        arrays = tuple(a for d in (self.terminals, self.receivers, self.held) for a in d.values())
        made = self._made.get("nondecreasing")
        if made is not None and len(made[0]) == len(arrays) and all(a is b for a, b in zip(made[0], arrays)):
            return made[1]
        out = all(bool(np.all(np.diff(a) >= 0.0)) for a in arrays)
        self._made["nondecreasing"] = (arrays, out)
        return out

    def terminal(self, name: str, vg: float):
        """Charge function ``q(V)`` of ``name``'s tied source/drain at gate ``vg``
        (linear beyond the grid's ends)."""
        key = (name, round(float(vg), 6))
        return self._function(("t", key), self.terminals[key])

    def receiver(self, nmos: str, held: str | None = None):
        """Input charge function of the receiver whose nmos is ``nmos``:
        its output following (quasi-static), or held ``"lo"`` / ``"hi"``."""
        return self._function(("r", nmos, held), self.receivers[nmos] if held is None else self.held[(nmos, held)])

    def _function(self, key, table):
        """``q(x)``: an array for an array, a float for one voltage (the
        same double either way); made once per table."""
        made = self._made.get(key)
        if made is not None and made[0] is table:
            return made[1]
        v = self.v
        lo = (table[1] - table[0]) / (v[1] - v[0])
        hi = (table[-1] - table[-2]) / (v[-1] - v[-2])
        grid, values = v.tolist(), table.tolist()
        v_lo, v_hi, q_lo, q_hi, s_lo, s_hi = (float(x) for x in (v[0], v[-1], table[0], table[-1], lo, hi))

        def q(x):
            if isinstance(x, (float, int)):
                x = float(x)
                if x < v_lo:
                    return q_lo + s_lo * (x - v_lo)
                if x > v_hi:
                    return q_hi + s_hi * (x - v_hi)
                return interp_point(x, grid, values)
            x = np.asarray(x, dtype=float)
            inside = np.interp(x, v, table)
            return np.where(x < v[0], table[0] + lo * (x - v[0]),
                            np.where(x > v[-1], table[-1] + hi * (x - v[-1]), inside))
        self._made[key] = (table, q)
        return q


#: Per process: the digest of each pruned model file and the
#: :class:`StageTables` made from each table file, by path, each with the
#: file's (modification time, size, inode) when read; used only while that
#: is unchanged.  A stage analysed again in the same process neither hashes
#: the model file (megabytes) nor reads its tables again, and gets the same
#: :class:`StageTables` (read-only arrays; the interpolating functions it
#: makes are made once).  Table files kept: the last :data:`_KEPT` read.
_DIGESTS: dict = {}
_TABLES: "OrderedDict[str, tuple]" = OrderedDict()
_TABLES_LOCK = threading.Lock()
_KEPT = 32


def _stamp(path: str) -> tuple:
    st = os.stat(path)
    return st.st_mtime_ns, st.st_size, st.st_ino


def _digest(path: str) -> bytes:
    stamp = _stamp(path)
    hit = _DIGESTS.get(path)
    if hit is not None and hit[0] == stamp:
        return hit[1]
    with open(path, "rb") as fh:
        digest = hashlib.sha256(fh.read()).digest()
    _DIGESTS[path] = (stamp, digest)
    return digest


def _key(path: str, corner, vdd: float, items, temp_c: float) -> str:
    h = hashlib.sha256()
    h.update(_digest(path))
    # everything the stored numbers depend on besides the items: the grids
    # and the receiver surfaces' output levels and ramps
    h.update(json.dumps(["ramp-integral-7", str(corner), vdd, GRID_STEPS, output_levels(vdd).tolist(),
                         RAMP_START_NS, RAMP_NS, items] + ([] if temp_c == 27.0 else [temp_c]),
                        sort_keys=True).encode())
    return h.hexdigest()[:24]


def _made(path: str):
    """The :class:`StageTables` made from the table file ``path`` while the
    file is as it was then, else None (also when there is no such file)."""
    try:
        stamp = _stamp(path)
    except OSError:
        return None
    with _TABLES_LOCK:  # threads of one worker may share it
        hit = _TABLES.get(path)
        if hit is not None and hit[0] == stamp:
            _TABLES.move_to_end(path)
            return hit[1]
    return None


def _keep(path: str, stamp: tuple, tables: "StageTables") -> None:
    with _TABLES_LOCK:
        _TABLES[path] = (stamp, tables)
        while len(_TABLES) > _KEPT:
            _TABLES.popitem(last=False)


def _frozen(values) -> np.ndarray:
    out = np.asarray(values)
    out.flags.writeable = False
    return out


def stage_tables(circuit, stage, tech: Tech, gate_levels: dict, corner=None, passes=(), clock=None) -> StageTables:
    """Measure the tables of ``stage`` (see the module text).

    Parameters
    ----------
    circuit : Circuit
    stage : Stage
    tech : Tech
        With ``[models]``; its first corner unless ``corner`` is given.
    gate_levels : dict of str to iterable of float
        Device name -> the gate voltages its terminal charge is wanted at.
    corner : str, optional
    passes : iterable of str
        Devices whose channel current is wanted (the evaluation devices:
        the creep past the pass limit runs through them).
    clock : dict, optional
        The dynamic node's surroundings for the clock-edge measurement:
        ``{"devices": [(name, role)], "cap_ff": float}`` with role
        ``"clocked"``, ``"off"`` or ``"receiver:J"`` (J numbers the
        inverter; see
        :func:`analyze.physics.device_charge.clock_setup`).

    Returns
    -------
    StageTables

    Raises
    ------
    InputError
        Anything the model library or ngspice refuses (see
        :func:`analyze.simulator.models.prune_models`,
        :func:`analyze.simulator.ngspice.run_deck`).
    """
    from analyze.simulator.instances import transistor_line
    from analyze.simulator.models import cache_dir, prune_models
    from analyze.simulator.ngspice import deck, run_deck

    models = tech.models
    corner = corner if corner is not None else (models.corners[0] if models.corners else None)
    vdd = float(tech.vdd)
    names = {"nmos": models.nmos, "pmos": models.pmos}
    pruned = prune_models(models, corner, sorted(set(names.values())))
    items = []
    for name, levels in sorted(gate_levels.items()):
        d = circuit.device(name)
        for vg in sorted({round(float(x), 6) for x in levels}):
            items.append(["t", name, d.type, round(d.w_um, 6), round(d.l_um, 6), vg])
    for name in sorted(set(passes)):
        d = circuit.device(name)
        items.append(["i", name, d.type, round(d.w_um, 6), round(d.l_um, 6)])
    for rx in stage.receivers:
        dn, dp = circuit.device(rx.nmos), circuit.device(rx.pmos)
        items.append(["r", rx.nmos, round(dn.w_um, 6), round(dn.l_um, 6), round(dp.w_um, 6), round(dp.l_um, 6)])
    clock_items = None
    if clock is not None:
        clock_items = [[name, role, circuit.device(name).type, round(circuit.device(name).w_um, 6),
                        round(circuit.device(name).l_um, 6), _terminal_role(circuit, tech, stage, name)]
                       for name, role in clock["devices"]]
        clock_items = [clock_items, round(float(clock["cap_ff"]), 6), round(float(tech.evaluation_ns), 6),
                       stage.polarity]
    temp_c = float(models.temperature_c)
    key = _key(pruned.path, corner, vdd, [items, clock_items], temp_c)
    cache = os.path.join(cache_dir("tables", create=False), key + ".json")
    made = _made(cache)
    if made is not None:
        return made
    try:
        stamp = _stamp(cache)
        with open(cache) as fh:
            data = json.load(fh)
    except FileNotFoundError:
        data = table_measurement.measure_distinct(items, names, pruned, vdd, corner, transistor_line, deck,
                                                  run_deck, temp_c=temp_c)
        data["clock_v"] = (None if clock_items is None else
                           table_measurement.measure_clock(clock_items, names, pruned, vdd, corner,
                                                           transistor_line, deck, run_deck, temp_c=temp_c))
        cache = os.path.join(cache_dir("tables"), key + ".json")
        tmp = cache + f".{os.getpid()}.tmp"
        with open(tmp, "w") as fh:
            json.dump(data, fh)
        os.replace(tmp, cache)
        stamp = _stamp(cache)
    out = StageTables(np.linspace(0.0, vdd, GRID_STEPS + 1))
    out.clock_v = data.get("clock_v")
    for k, it in enumerate(items):
        if it[0] == "t":
            out.terminals[(it[1], it[5])] = _frozen(data["q"][k])
        elif it[0] == "i":
            out.currents[it[1]] = _frozen(data["i"][str(k)])
        else:
            out.receivers[it[1]] = _frozen(data["q"][k])
            for held in ("lo", "hi"):
                out.held[(it[1], held)] = _frozen(data["held"][f"{held}{k}"])
            out.thresholds[it[1]] = float(data["vm"][k])
            out.responses[it[1]] = (_frozen(data["response_q"][str(k)]), _frozen(data["response_i"][str(k)]))
    if out.responses:
        out.out_levels = _frozen(output_levels(vdd))
    _keep(cache, stamp, out)
    return out


def _terminal_role(circuit, tech, stage, name):
    """Where the far channel terminal of a device on the dynamic node goes in
    the clock-edge deck: ``"vdd"``, ``"0"`` or ``"rail"`` (the stage's rail)."""
    d = circuit.device(name)
    other = d.source if d.drain == stage.dynamic_node else d.drain
    role = circuit.role_of(other, tech)
    if role == "power":
        return "vdd"
    if role == "ground":
        return "0"
    return "rail"
