"""The machine report: plain dicts in the documented JSON layout.

Keys are the documented ones (README, "JSON report"); values are
rounded to 1e-6 of their unit so that the same input gives byte-identical
files.
"""

from __future__ import annotations

import os
import math

from extract.circuit import Circuit
from extract.errors import InputError
from extract.writers.numbers import tool_version

from analyze.report.json_text import Rows, json_pieces

__all__ = ["input_name", 
    "rounded",
    "loc_json",
    "header",
    "nets_json",
    "devices_json",
    "net_json",
    "device_json",
    "findings_json",
    "extract_report",
    "worst_case_json",
    "flags_json",
    "stage_json",
    "dumps",
    "dump_pieces",
]


def input_name(path: str | None) -> str | None:
    """How a report names an input file: its file name alone, so that a
    report does not depend on the folder the command ran in.

    >>> input_name("../cells/DYN_NAND3.sp"), input_name("/abs/lib.gds"), input_name(None)
    ('DYN_NAND3.sp', 'lib.gds', None)
    """
    if not path:
        return path
    return os.path.basename(os.path.normpath(str(path))) or str(path)


def rounded(x: float, nd: int = 6) -> float:
    """Round for the report (and turn -0.0 into 0.0).

    >>> rounded(1 / 3), rounded(-0.0)
    (0.333333, 0.0)
    """
    v = round(float(x), nd)
    return 0.0 if v == 0 else v


def loc_json(loc) -> list[float] | None:
    """A location in µm as ``[x, y]``, rounded, or None.

    >>> loc_json((1.23456789, 2.0)), loc_json(None)
    ([1.234568, 2.0], None)
    """
    return None if loc is None else [rounded(v) for v in loc]


def header(cell: str, vdd: float) -> dict:
    return {"tool": "dynshare", "version": tool_version(), "cell": cell, "vdd": rounded(vdd)}


def net_json(net) -> dict:
    """One element of ``nets[]``."""
    return {
        "name": net.name,
        "role": net.role,
        "cap_ff": rounded(net.cap_ff),
        "parts_ff": {k: rounded(v) for k, v in net.cap.as_dict().items()},
        "location_um": loc_json(net.location_um),
        "junctions": {
            t: {"area_um2": rounded(j.area_um2), "field_perimeter_um": rounded(j.field_perimeter_um),
                "gate_perimeter_um": rounded(j.gate_perimeter_um)}
            for t, j in sorted(net.junctions.items())
        },
    }


def device_json(d) -> dict:
    """One element of ``devices[]``."""
    return {
        "name": d.name,
        "type": d.type,
        "drain": d.drain,
        "gate": d.gate,
        "source": d.source,
        "w_um": rounded(d.w_um),
        "l_um": rounded(d.l_um),
        "ad_um2": rounded(d.ad_um2),
        "as_um2": rounded(d.as_um2),
        "pd_um": rounded(d.pd_um),
        "ps_um": rounded(d.ps_um),
        "location_um": loc_json(d.location_um),
    }


def nets_json(circuit: Circuit) -> Rows:
    """``nets[]``, made element by element while written (:class:`Rows`)."""
    nets = circuit.nets
    return Rows(lambda: map(net_json, nets.values()), len(nets))


def devices_json(circuit: Circuit) -> Rows:
    """``devices[]``, made element by element while written (:class:`Rows`)."""
    devices = circuit.devices
    return Rows(lambda: map(device_json, devices), len(devices))


def couplings_json(circuit: Circuit) -> list[dict]:
    """``couplings[]``: capacitance between two signal nets (netlists with
    coupling capacitors), also counted in both nets' ``wire`` part."""
    return [{"nets": [c.net_a, c.net_b], "cap_ff": rounded(c.cap_ff), "elements": c.elements}
            for c in circuit.couplings]


def worst_case_json(wc) -> dict | None:
    if wc is None:
        return None
    return {
        "inputs": {k: int(v) for k, v in sorted(wc.inputs.items())},
        "shared_nodes": list(wc.shared_nodes),
        "v_final": rounded(wc.v_final),
        "v_final_linear": rounded(wc.v_final_linear),
        "droop_v": rounded(wc.droop_v),
        **({"case": wc.case} if getattr(wc, "case", None) else {}),
    }


def findings_json(findings) -> list[dict]:
    """``findings[]``: each warning's message and location."""
    return [{"message": f.message, "location_um": loc_json(f.location_um)} for f in findings]


def extract_report(circuit: Circuit, tech) -> dict:
    """The whole ``extract --json`` report."""
    report = header(circuit.cell, tech.vdd)
    report["nets"] = nets_json(circuit)
    report["devices"] = devices_json(circuit)
    report["couplings"] = couplings_json(circuit)
    report["findings"] = findings_json(circuit.findings)
    return report


def flags_json(flags) -> list[dict]:
    """``flags[]`` of a stage (check and compare)."""
    return [
        {
            "node": f.node,
            "action": f.action,
            "v_final_after": rounded(f.v_final_after),
            "location_um": loc_json(f.location_um),
            "between": list(f.between),
        }
        for f in flags
    ]


def stage_json(result, circuit: Circuit) -> dict:
    """One entry of ``stages[]`` from an :class:`analyze.search.analysis.StageResult`."""
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
        "location_um": loc_json(st.location_um),
        "threshold_v": rounded(result.threshold_v),
        "margin_v": rounded(result.margin_v),
        "status": result.status,
        "counted_patterns": None if result.counted_patterns is None else int(result.counted_patterns),
        "worst_case": worst_case_json(result.worst_case),
        "flags": flags_json(result.flags),
        "flag_note": result.flag_note,
        "model": result.physics,
        **({"model_note": result.physics_note} if result.physics_note else {}),
        **({"analysis_status": result.analysis_status, "simulation": simulation_json(result.simulation),
            "simulation_notes": list(result.simulation_notes)}
           if result.simulation else {}),
    }


def simulation_json(sims) -> list[dict]:
    """``simulation[]`` of a stage: each simulated pattern, arrival case and corner."""
    opt = lambda v: None if v is None else rounded(v)  # noqa: E731
    return [
        {
            "corner": s.corner,
            "case": s.case,
            "inputs": {k: int(v) for k, v in sorted(s.inputs.items())},
            "v_min": rounded(s.v_min),
            "t_min_ns": rounded(s.t_min_ns),
            "receiver_peak_v": opt(s.receiver_peak_v),
            "threshold_v": rounded(s.threshold_v),
            "margin_v": rounded(s.margin_v),
            "status": s.status,
            "v_min_without_keeper": opt(s.v_min_without_keeper),
            "margin_without_keeper_v": opt(s.margin_without_keeper_v),
        }
        for s in sims
    ]


def dumps(report: dict) -> str:
    """JSON text with a trailing newline, keys in insertion order
    (``json.dumps(indent=2)``'s text; :class:`Rows` written as lists).

    A NaN or an infinity is not JSON: it raises :class:`InputError` naming
    the key path (the analysis refuses such numbers earlier, naming their
    cause; this is the last guard).

    >>> dumps({"a": [1.5]})
    '{\\n  "a": [\\n    1.5\\n  ]\\n}\\n'
    >>> dumps({"stages": [{"margin_v": float("nan")}]})
    Traceback (most recent call last):
    ...
    extract.errors.InputError: report: stages[0].margin_v: is nan, not a finite number; no report is written
    """
    return "".join(dump_pieces(report))


def dump_pieces(report: dict):
    """:func:`dumps` in pieces (:func:`analyze.report.json_text.json_pieces`),
    for writing a big report without holding its text; a non-finite
    number raises :class:`InputError` as in :func:`dumps`."""
    try:
        yield from json_pieces(report)
    except ValueError:  # only a non-finite float: find where, for the message
        _refuse_non_finite(report, "")
        raise


def _refuse_non_finite(value, path: str) -> None:
    """Walk a report (dicts, lists, numbers); iterative, O(size)."""
    stack = [(value, path)]
    while stack:
        item, where = stack.pop()
        if isinstance(item, float) and not math.isfinite(item):
            raise InputError("report", f"is {item}, not a finite number; no report is written", where or "report")
        if isinstance(item, dict):
            stack.extend((v, f"{where}.{k}" if where else str(k)) for k, v in item.items())
        elif isinstance(item, (list, tuple, Rows)):
            stack.extend((v, f"{where}[{i}]") for i, v in enumerate(item))
