"""The machine report: plain dicts in the documented JSON layout.

Keys are the documented ones (README, "JSON report"); values are
rounded to 1e-6 of their unit so that the same input gives byte-identical
files.
"""

from __future__ import annotations

import json

from extract.circuit import Circuit
from extract.outformat import tool_version

__all__ = ["header", "nets_json", "devices_json", "worst_case_json", "stage_json", "dumps"]


def _r(x: float, nd: int = 6) -> float:
    """Round for the report (and turn -0.0 into 0.0).

    >>> _r(1 / 3), _r(-0.0)
    (0.333333, 0.0)
    """
    v = round(float(x), nd)
    return 0.0 if v == 0 else v


def header(cell: str, vdd: float) -> dict:
    return {"tool": "dynshare", "version": tool_version(), "cell": cell, "vdd": _r(vdd)}


def nets_json(circuit: Circuit) -> list[dict]:
    out = []
    for net in circuit.nets.values():
        out.append(
            {
                "name": net.name,
                "role": net.role,
                "cap_ff": _r(net.cap_ff),
                "parts_ff": {k: _r(v) for k, v in net.cap.as_dict().items()},
                "location_um": None if net.location_um is None else [_r(v) for v in net.location_um],
                "junctions": {
                    t: {"area_um2": _r(j.area_um2), "field_perimeter_um": _r(j.field_perimeter_um),
                        "gate_perimeter_um": _r(j.gate_perimeter_um)}
                    for t, j in sorted(net.junctions.items())
                },
            }
        )
    return out


def devices_json(circuit: Circuit) -> list[dict]:
    return [
        {
            "name": d.name,
            "type": d.type,
            "drain": d.drain,
            "gate": d.gate,
            "source": d.source,
            "w_um": _r(d.w_um),
            "l_um": _r(d.l_um),
            "ad_um2": _r(d.ad_um2),
            "as_um2": _r(d.as_um2),
            "pd_um": _r(d.pd_um),
            "ps_um": _r(d.ps_um),
            "location_um": None if d.location_um is None else [_r(v) for v in d.location_um],
        }
        for d in circuit.devices
    ]


def worst_case_json(wc) -> dict | None:
    if wc is None:
        return None
    return {
        "inputs": {k: int(v) for k, v in sorted(wc.inputs.items())},
        "shared_nodes": list(wc.shared_nodes),
        "v_final": _r(wc.v_final),
        "v_final_linear": _r(wc.v_final_linear),
        "droop_v": _r(wc.droop_v),
    }


def stage_json(result, circuit: Circuit) -> dict:
    """One entry of ``stages[]`` from an :class:`analyze.analysis.StageResult`."""
    st = result.stage
    return {
        "dynamic_node": st.dynamic_node,
        "polarity": st.polarity,
        "clock": st.clock,
        "footed": st.footed,
        "footer": st.footer,
        "inputs": list(st.inputs),
        "internal_nodes": list(st.internal_nodes),
        "keepers": list(st.keepers),
        "receivers": [{"nmos": r.nmos, "pmos": r.pmos, "output": r.output} for r in st.receivers],
        "secondary_precharge": dict(sorted(st.secondary_precharge.items())),
        "location_um": None if st.location_um is None else [_r(v) for v in st.location_um],
        "threshold_v": _r(result.threshold_v),
        "margin_v": _r(result.margin_v),
        "status": result.status,
        "counted_patterns": int(result.counted_patterns),
        "worst_case": worst_case_json(result.worst_case),
        "flags": [
            {
                "node": f.node,
                "action": f.action,
                "v_final_after": _r(f.v_final_after),
                "location_um": None if f.location_um is None else [_r(v) for v in f.location_um],
                "between": list(f.between),
            }
            for f in result.flags
        ],
        "flag_note": result.flag_note,
    }


def dumps(report: dict) -> str:
    """JSON text with a trailing newline, keys in insertion order."""
    return json.dumps(report, indent=2, ensure_ascii=False) + "\n"
