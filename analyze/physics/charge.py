"""Charge stored on a node as a function of its voltage.

A node's capacitance to ground has a linear part (wire, gate, overlap) and
junction parts whose depletion charge is not proportional to the voltage.
:class:`NodeCharge` gives the charge ``Q(V)`` and the small-signal
capacitance ``C(V) = dQ/dV`` of one node, or of several nodes that end at
one voltage (their models add).

Junction charge follows the SPICE2 / Berkeley SPICE junction
depletion-charge formula (Massobrio & Antognetti, *Semiconductor Device
Modeling with SPICE*, ch. 1, from memory)::

    q(VR) = C0 * PB / (1 - M) * ((1 + VR / PB) ** (1 - M) - 1)

for a reverse bias ``VR >= 0``, with ``C0`` the zero-bias capacitance, ``PB``
the built-in potential and ``M`` the grading coefficient
(``q = C0 * PB * ln(1 + VR / PB)`` when ``M = 1``).  An n+ diffusion sits in
the p-substrate at 0 V, so ``VR = V``; a p+ diffusion sits in an n-well at
VDD, so ``VR = VDD - V`` and the charge it puts on the node is ``-q(VDD - V)``.
Either way ``Q(V)`` increases with ``V``.

Units: V, fF, fC (fF·V).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from extract.circuit import Net
from extract.tech import Tech

__all__ = [
    "JUNCTION_KINDS",
    "depletion_charge",
    "depletion_capacitance",
    "NodeCharge",
    "node_charge",
]

#: The junction parts every :class:`NodeCharge` made by :func:`node_charge`
#: carries, in order: (device type, part).  Parts are the bottom ``area``,
#: the field-edge ``sidewall`` and the ``gate_edge`` sidewall.
JUNCTION_KINDS = tuple(
    (t, part) for t in ("nmos", "pmos") for part in ("area", "sidewall", "gate_edge")
)


def _depletion_terms(pb, m, vr):
    """``((1 + VR/PB)**(1-M) - 1) / (1-M)`` with its ``M = 1`` limit ``ln(1 + VR/PB)``."""
    pb, m, vr = np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in (pb, m, vr)))
    x = 1.0 + vr / pb
    one = np.isclose(m, 1.0)
    e = np.where(one, 0.5, 1.0 - m)
    # both branches are computed everywhere: a linear part (M = 0) may be
    # past -PB, where its power form holds and the unused log is NaN
    with np.errstate(invalid="ignore", divide="ignore"):
        power = (x**e - 1.0) / e
        return np.where(one, np.log(x), power)


def depletion_charge(c0, pb, m, vr):
    """Depletion charge of a junction at reverse bias ``vr`` (fC).

    Parameters
    ----------
    c0 : float or array_like
        Zero-bias capacitance, fF.
    pb : float or array_like
        Built-in potential, V.
    m : float or array_like
        Grading coefficient (0 < m <= 1).
    vr : float or array_like
        Reverse bias, V (``vr >= 0``; the formula holds for ``vr > -pb``).

    Returns
    -------
    ndarray or float
        ``C0·PB/(1−M)·[(1+VR/PB)^(1−M) − 1]``, the SPICE2 junction
        depletion-charge formula (Massobrio & Antognetti, from memory);
        zero at ``vr = 0``.  Broadcasts over its arguments.

    Examples
    --------
    >>> round(float(depletion_charge(1.0, 0.8, 0.5, 1.0)), 9)  # 2*0.8*(sqrt(2.25) - 1)
    0.8
    >>> float(depletion_charge(2.0, 0.8, 0.5, 0.0))
    0.0
    """
    return np.asarray(c0, dtype=float) * np.asarray(pb, dtype=float) * _depletion_terms(pb, m, vr)


def depletion_capacitance(c0, pb, m, vr):
    """Small-signal junction capacitance ``C0 / (1 + VR/PB)^M`` (fF).

    The derivative of :func:`depletion_charge` with respect to ``vr`` (same
    source).

    Examples
    --------
    >>> round(float(depletion_capacitance(1.0, 0.8, 0.5, 2.4)), 6)  # 1/sqrt(4)
    0.5
    """
    vr = np.asarray(vr, dtype=float)
    return np.asarray(c0, dtype=float) / (1.0 + vr / np.asarray(pb, dtype=float)) ** np.asarray(m)


@dataclass(frozen=True, eq=False)
class NodeCharge:
    """Charge–voltage relation of a node (or of nodes held at one voltage).

    Parameters
    ----------
    c_lin : float
        Linear capacitance (wire + gate + overlap), fF.
    c0, pb, m : ndarray
        Per junction part: zero-bias capacitance (fF), built-in potential
        (V), grading coefficient.
    body_high : ndarray of bool
        Per junction part: True when the junction's body is at ``vdd``
        (p+ in an n-well), so its reverse bias is ``vdd - V``; False when
        the body is at 0 V (n+ in the p-substrate), reverse bias ``V``.
    vdd : float
        Supply voltage, V.

    Notes
    -----
    ``Q(V) = c_lin·V + Σ_low q(V) − Σ_high q(vdd − V)``; only differences of
    ``Q`` are meaningful.  Each evaluation costs O(parts) numpy work.

    The zero-bias capacitances are those at 0 V *reverse bias* (what a
    net's :class:`extract.circuit.CapParts` hold).  For a p+ junction that
    is the capacitance at ``V = vdd``; at other voltages, and for n+
    junctions away from 0 V, :meth:`capacitance` differs from it.

    Examples
    --------
    >>> q = NodeCharge.linear(10.0, vdd=1.8)
    >>> float(q.charge(1.8) - q.charge(0.0))
    18.0
    >>> float((q + q).capacitance(0.3))
    20.0
    """

    c_lin: float
    c0: np.ndarray
    pb: np.ndarray
    m: np.ndarray
    body_high: np.ndarray
    vdd: float

    @classmethod
    def linear(cls, c_lin: float, vdd: float) -> "NodeCharge":
        """A node with linear capacitance only."""
        empty = np.zeros(0)
        return cls(float(c_lin), empty, empty, empty, np.zeros(0, dtype=bool), float(vdd))

    def __getattr__(self, name):
        # Plain-float copies for the scalar path (root finding calls
        # charge() with one voltage at a time), made on first use, so a sum
        # of nodes that is never evaluated does not pay for them:
        # ``_static`` per part pb, 1 − m, whether that is 0 (the log form),
        # body high (shared by the sums made with like()); ``_parts`` adds
        # c0·pb and leaves out the empty parts.
        if name == "_static":
            value = tuple(
                (p, 1.0 - m, abs(1.0 - m) < 1e-12, bool(h))
                for p, m, h in zip(self.pb.tolist(), self.m.tolist(), self.body_high.tolist())
            )
        elif name == "_parts":
            value = tuple((c * p, p, e, log_form, h)
                          for c, (p, e, log_form, h) in zip(self.c0.tolist(), self._static) if c != 0.0)
        else:
            raise AttributeError(name)
        object.__setattr__(self, name, value)
        return value

    def forward_margin(self) -> float:
        """How far past its rails (V) the node's voltage may go with every
        junction part's formula valid.

        The depletion formula needs ``1 + VR/PB > 0`` (it holds to a forward
        bias of PB); the margin is 0.9 × the smallest PB among the graded
        parts (M > 0), present or not (the array path evaluates every part,
        and 0 × NaN is NaN), since a part with M = 0 is a linear capacitor,
        valid at any bias (a fit to a flat sidewall may leave its PB
        anywhere); 0.9 V when no part bends.

        Examples
        --------
        >>> kw = dict(body_high=np.zeros(2, dtype=bool), vdd=1.8)
        >>> round(NodeCharge(1.0, np.array([1.0, 0.2]), np.array([0.7, 0.05]), np.array([0.4, 0.0]),
        ...                  **kw).forward_margin(), 12)
        0.63
        >>> NodeCharge.linear(1.0, 1.8).forward_margin()
        0.9
        """
        bends = [float(p) for p, m in zip(self.pb.tolist(), self.m.tolist()) if m > 0.0]
        return 0.9 * min(bends) if bends else 0.9

    def like(self, c_lin: float, c0: np.ndarray, vdd: float | None = None) -> "NodeCharge":
        """A node charge with these junction parts (``pb``, ``m``, body) and
        other capacitances, sharing their scalar constants."""
        out = NodeCharge(c_lin, c0, self.pb, self.m, self.body_high, self.vdd if vdd is None else vdd)
        static = self.__dict__.get("_static")
        if static is not None:
            object.__setattr__(out, "_static", static)
        return out

    def _charge_scalar(self, v: float) -> float:
        q = self.c_lin * v
        vdd = self.vdd
        for c0pb, pb, e, log_form, high in self._parts:
            x = 1.0 + ((vdd - v) if high else v) / pb
            dq = c0pb * (math.log(x) if log_form else (x**e - 1.0) / e)
            q += -dq if high else dq
        return q

    def charge_at(self, v: float) -> float:
        """:meth:`charge` at one voltage, remembered per node charge: for
        the few fixed voltages (0, ``v_lim``, ``vdd``) that every solve of
        :mod:`analyze.physics.redistribution` asks of the same sums."""
        memo = self.__dict__.get("_memo")
        if memo is None:
            memo = {}
            object.__setattr__(self, "_memo", memo)
        q = memo.get(v)
        if q is None:
            q = memo[v] = self._charge_scalar(float(v))
        return q

    def _reverse_bias(self, v):
        v = np.asarray(v, dtype=float)[..., None]
        return v, np.where(self.body_high, self.vdd - v, v)

    def charge(self, v):
        """Charge ``Q(V)`` in fC; ``v`` may be an array (result has its shape)."""
        if isinstance(v, (float, int)):
            return self._charge_scalar(float(v))
        v2, vr = self._reverse_bias(v)
        q = depletion_charge(self.c0, self.pb, self.m, vr)
        signed = np.where(self.body_high, -q, q).sum(axis=-1)
        return self.c_lin * v2[..., 0] + signed

    def capacitance(self, v):
        """Small-signal capacitance ``dQ/dV`` in fF at ``v`` (array allowed)."""
        _, vr = self._reverse_bias(v)
        return self.c_lin + depletion_capacitance(self.c0, self.pb, self.m, vr).sum(axis=-1)

    @property
    def zero_bias_total(self) -> float:
        """Linear part plus every junction part at zero reverse bias, fF."""
        return float(self.c_lin + self.c0.sum())

    def mirrored(self) -> "NodeCharge":
        """The model seen in the mirrored voltage ``u = vdd − V``.

        ``mirrored().charge(u) = −charge(vdd − u) + const``: n+ and p+ swap
        roles.  This turns a p-type stage into an n-type one.

        >>> q = NodeCharge(1.0, np.array([2.0]), np.array([0.8]), np.array([0.5]),
        ...                np.array([False]), 1.8)
        >>> u = np.array([0.2, 1.1])
        >>> d = q.mirrored().charge(u) + q.charge(1.8 - u)
        >>> bool(abs(d[0] - d[1]) < 1e-12)
        True
        """
        return NodeCharge(self.c_lin, self.c0, self.pb, self.m, ~self.body_high, self.vdd)

    def _same_parts(self, other: "NodeCharge") -> bool:
        if self.pb is other.pb and self.m is other.m and self.body_high is other.body_high:
            return True
        return (
            self.c0.shape == other.c0.shape
            and np.array_equal(self.pb, other.pb)
            and np.array_equal(self.m, other.m)
            and np.array_equal(self.body_high, other.body_high)
        )

    def __add__(self, other: "NodeCharge") -> "NodeCharge":
        """Nodes at one voltage: charges add (parts summed when alike)."""
        if self._same_parts(other):
            return self.like(self.c_lin + other.c_lin, self.c0 + other.c0)
        return NodeCharge(
            self.c_lin + other.c_lin,
            np.concatenate([self.c0, other.c0]),
            np.concatenate([self.pb, other.pb]),
            np.concatenate([self.m, other.m]),
            np.concatenate([self.body_high, other.body_high]),
            self.vdd,
        )


def node_charge(net: Net | None, tech: Tech) -> NodeCharge:
    """The :class:`NodeCharge` of ``net`` from its capacitance parts and junctions.

    Parameters
    ----------
    net : Net or None
        None stands for a net with no capacitance.
    tech : Tech
        Gives ``vdd`` and, per device type, ``cj, cjsw, cjswg`` with grading
        ``mj, mjsw, mjswg`` and built-in potentials ``pb, pbsw, pbswg``
        (``mjswg``/``pbswg`` default to ``mjsw``/``pbsw``).

    Returns
    -------
    NodeCharge
        Linear part ``cap.wire + cap.gate + cap.overlap``; one junction part
        per entry of :data:`JUNCTION_KINDS` (bottom ``cj·area``, sidewall
        ``cjsw·field_perimeter``, gate edge ``cjswg·gate_perimeter``), n+
        with the body at 0 V, p+ with the body at ``vdd``.

    Notes
    -----
    When the net carries junction capacitance in its ``cap`` but has no
    junction geometry (a netlist that gave capacitances only), that
    capacitance is taken as linear, so the zero-bias total always equals
    ``net.cap.total`` for a net whose parts were computed from its junctions.

    Examples
    --------
    >>> from extract.circuit import CapParts, JunctionGeometry
    >>> from extract.tech import MosParams, NetRoles, Tech
    >>> mos = {t: MosParams(t, 0.45, 0.4, 0.8, 200.0, 8.0, 0.0, 1.0, 0.25, 0.25,
    ...                     0.5, 0.33, 0.8, 0.8) for t in ("nmos", "pmos")}
    >>> tech = Tech("t", 1.8, NetRoles(), {}, mos)
    >>> net = Net("n1", cap=CapParts(junction_area=0.5, junction_sidewall=0.5, wire=2.0),
    ...           junctions={"nmos": JunctionGeometry(0.5, 2.0, 0.0)})
    >>> node_charge(net, tech).zero_bias_total
    3.0
    """
    vdd = float(tech.vdd)
    junctions = {} if net is None else net.junctions
    c_lin = 0.0 if net is None else net.cap.linear + (0.0 if junctions else net.cap.junction)
    c0, pb, m, high = [], [], [], []
    for dtype, part in JUNCTION_KINDS:
        geo = junctions.get(dtype)
        p = tech.mos[dtype]
        if part == "area":
            c0.append(p.cj * geo.area_um2 if geo else 0.0)
            pb.append(p.pb)
            m.append(p.mj)
        elif part == "sidewall":
            c0.append(p.cjsw * geo.field_perimeter_um if geo else 0.0)
            pb.append(p.pbsw)
            m.append(p.mjsw)
        else:
            c0.append(p.cjswg * geo.gate_perimeter_um if geo else 0.0)
            pb.append(p.pbswg)
            m.append(p.mjswg)
        high.append(dtype == "pmos")
    return NodeCharge(
        float(c_lin), np.array(c0), np.array(pb, dtype=float), np.array(m, dtype=float),
        np.array(high), vdd,
    )
