"""Threshold voltages: of a pass device with body effect, and of the receiver.

Two thresholds bound a dynamic stage's check:

* how far a conducting evaluation device can pass a voltage — an nmos
  with its gate at VDD stops once its lower terminal reaches
  ``V_lim = VDD − VT(V_lim)`` (:func:`pass_limit`);
* where the inverter that reads the dynamic node switches
  (:func:`switching_threshold`, :func:`receiver_threshold`).

Units: V, µm, kp µA/V².
"""

from __future__ import annotations

import functools
import math

from scipy.optimize import brentq

from extract.circuit import Circuit
from extract.tech import MosParams, Tech
from analyze.stages.stage import Stage

__all__ = ["body_effect_vt", "pass_limit", "switching_threshold", "receiver_threshold"]


def body_effect_vt(params: MosParams, vsb: float) -> float:
    """Threshold magnitude with body effect, V.

    Parameters
    ----------
    params : MosParams
        ``vt0`` (sign ignored), ``gamma``, ``phi``.
    vsb : float
        Source-to-body reverse bias, V (``>= 0``).

    Returns
    -------
    float
        ``|vt0| + gamma·(√(phi + vsb) − √phi)``: the SPICE level-1
        (Shichman–Hodges) threshold with body effect.

    Examples
    --------
    >>> from extract.tech import MosParams
    >>> p = MosParams("nmos", 0.45, 0.4, 0.81, 200, 8, 0, 1, .25, .25, .5, .33, .8, .8)
    >>> round(body_effect_vt(p, 1.8), 9)  # 0.45 + 0.4*(sqrt(2.61) - 0.9)
    0.736219777
    """
    return abs(params.vt0) + params.gamma * (
        math.sqrt(params.phi + max(vsb, 0.0)) - math.sqrt(params.phi)
    )


def pass_limit(params: MosParams, vdd: float) -> float:
    """The highest voltage a device with its gate fully on passes, V.

    Parameters
    ----------
    params : MosParams
        The pass device's type.
    vdd : float
        Supply, V.

    Returns
    -------
    float
        For an nmos with its gate at ``vdd`` and body at 0 V, the root of
        ``V = vdd − VT(V)`` (VT from :func:`body_effect_vt`); 0 when
        ``vdd <= |vt0|``.  For a pmos with gate at 0 and body at ``vdd`` the
        same number is the limit in the mirrored voltage ``u = vdd − V``:
        the pmos pulls down no lower than ``vdd − pass_limit``.

    Notes
    -----
    ``V + VT(V) − vdd`` increases with ``V``, so one root lies in
    ``[0, vdd − |vt0|]``; it is found by Brent's bracketing method
    (scipy.optimize.brentq), once per process for each device type's
    numbers and supply (remembered).

    Examples
    --------
    >>> from extract.tech import MosParams
    >>> p = MosParams("nmos", 0.5, 0.0, 0.8, 200, 8, 0, 1, .25, .25, .5, .33, .8, .8)
    >>> round(pass_limit(p, 1.8), 9)  # no body effect: 1.8 - 0.5
    1.3
    """
    try:
        return _pass_limit(params, vdd)
    except TypeError:  # numbers that cannot be a key (not a MosParams)
        return _pass_limit.__wrapped__(params, vdd)


@functools.lru_cache(maxsize=256, typed=True)
def _pass_limit(params: MosParams, vdd: float) -> float:
    # remembered per (device type's numbers, supply): the foundry-model
    # solver asks it once per pattern and case
    top = vdd - abs(params.vt0)
    if top <= 0.0:
        return 0.0
    if params.gamma == 0.0:
        return top
    return brentq(lambda v: v + body_effect_vt(params, v) - vdd, 0.0, top, xtol=1e-13)


def switching_threshold(tech: Tech, wl_n: float, wl_p: float) -> float:
    """Switching threshold of a static inverter, V.

    Parameters
    ----------
    tech : Tech
        ``vdd`` and ``mos.nmos``/``mos.pmos`` (``vt0``, ``kp``).
    wl_n, wl_p : float
        W/L of the nmos and of the pmos.

    Returns
    -------
    float
        ``VM = (VDD − |VTp| + VTn·r) / (1 + r)``, ``r = √(kpn·(W/L)n /
        (kpp·(W/L)p))``: both devices saturated, square law (Rabaey,
        Chandrakasan & Nikolić, *Digital Integrated Circuits*, 2nd ed.,
        ch. 5, from memory).  Zero-bias thresholds: the receiver's sources
        sit on the rails.

    Examples
    --------
    >>> from extract.tech import MosParams, NetRoles, Tech
    >>> n = MosParams("nmos", 0.4, 0, .8, 200, 8, 0, 1, .25, .25, .5, .33, .8, .8)
    >>> p = MosParams("pmos", -0.4, 0, .8, 50, 8, 0, 1, .25, .25, .5, .33, .8, .8)
    >>> t = Tech("t", 1.8, NetRoles(), {}, {"nmos": n, "pmos": p})
    >>> round(switching_threshold(t, 1.0, 4.0), 9)  # r = 1: VDD/2
    0.9
    """
    n, p = tech.mos["nmos"], tech.mos["pmos"]
    r = math.sqrt(n.kp * wl_n / (p.kp * wl_p))
    return (tech.vdd - abs(p.vt0) + abs(n.vt0) * r) / (1.0 + r)


def receiver_threshold(circuit: Circuit, stage: Stage, tech: Tech) -> float:
    """The threshold the dynamic node must stay clear of, V.

    Parameters
    ----------
    circuit : Circuit
    stage : Stage
    tech : Tech

    Returns
    -------
    float
        The :func:`switching_threshold` of the stage's receivers: with
        several receivers the most demanding one — the highest VM for an
        n-type stage (its node droops from VDD towards it), the lowest for a
        p-type stage (its node rises from 0).  ``0.5·vdd`` when the stage has
        no receiver (common practice).

    Raises
    ------
    KeyError
        When a receiver names a device the circuit does not have.

    Examples
    --------
    >>> from extract.tech import MosParams, NetRoles, Tech
    >>> from extract.circuit import Circuit
    >>> from analyze.stages.stage import Stage
    >>> n = MosParams("nmos", 0.4, 0, .8, 200, 8, 0, 1, .25, .25, .5, .33, .8, .8)
    >>> t = Tech("t", 1.8, NetRoles(), {}, {"nmos": n, "pmos": n})
    >>> s = Stage("X", "n", "CLK", "VDD", "VSS", (), (), None, None, (), ())
    >>> receiver_threshold(Circuit("c", {}, []), s, t)
    0.9
    """
    values = []
    for rec in stage.receivers:
        dn, dp = circuit.device(rec.nmos), circuit.device(rec.pmos)
        values.append(switching_threshold(tech, dn.w_um / dn.l_um, dp.w_um / dp.l_um))
    if not values:
        return 0.5 * tech.vdd
    return max(values) if stage.polarity == "n" else min(values)
