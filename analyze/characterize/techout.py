"""The text of a tech file whose ``[mos.*]`` tables were fitted.

Every table of the input is kept with its values (comments and layout of
the input are not: the file is written anew); ``[mos.nmos]`` and
``[mos.pmos]`` get the fitted numbers, each with a comment block saying
where they came from and how well they fit; ``[models] corners`` names the
one corner the file is for, ``[models] temperature`` the temperature it was
fitted at (so that the analysis and ``--simulate`` run there too), and
``[models] library`` is rewritten relative to the output's folder so the
new file finds the same library.

Examples
--------
>>> print(toml_text({"process": {"name": "p", "vdd": 1.8}, "nets": {"power": ["VDD"]}}), end="")
[process]
name = "p"
vdd = 1.8
<BLANKLINE>
[nets]
power = ["VDD"]
"""

from __future__ import annotations

import json
import math
import os
import re

try:  # Python >= 3.11
    import tomllib
except ModuleNotFoundError:  # pragma: no cover - Python 3.10
    import tomli as tomllib

from analyze.characterize.process import CornerFit, DeviceFit
from extract.writers.numbers import tool_version

__all__ = ["toml_text", "fitted_tech_text", "MOS_KEY_ORDER"]

#: Order of the keys in a written ``[mos.*]`` table.
MOS_KEY_ORDER = ("models", "vt0", "gamma", "phi", "kp", "cox", "cgo", "cj", "mj", "pb", "cjsw", "mjsw", "pbsw",
                 "cjswg", "mjswg", "pbswg")
_BARE = re.compile(r"[A-Za-z0-9_-]+\Z")


def _key(key: str) -> str:
    return key if _BARE.match(key) else json.dumps(key, ensure_ascii=False)


def _value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if not math.isfinite(value):
            raise ValueError(f"cannot write {value} in a tech file")
        return repr(value)
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False)
    if isinstance(value, list):
        return "[" + ", ".join(_value(v) for v in value) + "]"
    raise ValueError(f"cannot write a {type(value).__name__} in a tech file")


def toml_text(data: dict, comments: dict | None = None) -> str:
    """TOML text of nested tables of strings, numbers, booleans and arrays.

    Parameters
    ----------
    data : dict
        Tables (dicts) at the top level; inside them scalar keys and
        nested tables.
    comments : dict of str to list of str, optional
        Comment lines to write before the table of that dotted path.

    Returns
    -------
    str

    Notes
    -----
    Scalar keys of a table come before its sub-tables; a table with only
    sub-tables gets no header of its own.  Linear in the size of ``data``.
    """
    comments = comments or {}
    out: list[str] = []

    def table(path: list[str], body: dict):
        scalars = {k: v for k, v in body.items() if not isinstance(v, dict)}
        name = ".".join(_key(p) for p in path)
        if scalars or not any(isinstance(v, dict) for v in body.values()):
            if out:
                out.append("")
            out.extend(f"# {line}" if line else "#" for line in comments.get(name, []))
            out.append(f"[{name}]")
            out.extend(f"{_key(k)} = {_value(v)}" for k, v in scalars.items())
        for k, v in body.items():
            if isinstance(v, dict):
                table(path + [k], v)

    for key, body in data.items():
        if not isinstance(body, dict):
            raise ValueError(f"top-level key {key!r} is not a table")
        table([key], body)
    return "\n".join(out) + "\n"


def _fit_comments(fit: CornerFit, dev: DeviceFit) -> list[str]:
    corner = fit.corner if fit.corner else "(library loaded whole)"
    e0, e1 = dev.junction_error
    return [
        f"Fitted by dynshare {tool_version()} characterize to the SPICE models of",
        f"{fit.library}, section {corner}, device {dev.device},",
        f"with ngspice at {fit.temp_c:g} C, L = {fit.length_um:g} um, W = {fit.width_um:g} um, VDD = {fit.vdd:g} V.",
        f"vt0/gamma/phi: body-effect fit to constant-current VT at Vsb 0..VDD, rms {dev.vt_rms_mv:.2f} mV, "
        f"largest {dev.vt_max_mv:.2f} mV.",
        f"kp: from Idsat = {dev.idsat_ua:.4g} uA at |Vgs| = |Vds| = VDD (square law, drawn W/L).",
        "cox: 5 um x 5 um gate in inversion; cgo: gate-drain capacitance per um at 0 V.",
        f"junctions: depletion-formula fit, largest error {100 * e0:.2f} % at 0 V and {100 * e1:.2f} % at VDD.",
    ]


def fitted_tech_text(source_text: str, fit: CornerFit, out_path: str) -> str:
    """The fitted tech file for one corner.

    Parameters
    ----------
    source_text : str
        The input tech file (valid TOML; validated by the caller).
    fit : CornerFit
    out_path : str
        Where the text will be written (for the library's relative path).

    Returns
    -------
    str
        TOML; ``extract.techfile.parse_tech`` accepts it.

    Notes
    -----
    ``[mos.*] models`` (the names a schematic uses) are kept from the
    input; when the input has none, the library's device name is listed.
    Linear in the size of the input.
    """
    data = tomllib.loads(source_text)
    models = dict(data.get("models", {}))
    folder = os.path.dirname(os.path.abspath(out_path))
    try:
        models["library"] = os.path.relpath(fit.library, folder)
    except ValueError:  # another drive (Windows)
        models["library"] = fit.library
    models["corners"] = [fit.corner] if fit.corner else []
    # the analysis and --simulate then run at the temperature of the fit
    models["temperature"] = float(fit.temp_c)
    data["models"] = models
    mos = dict(data.get("mos", {}))
    comments = {}
    for dev in (fit.nmos, fit.pmos):
        old = mos.get(dev.type, {})
        names = list(old.get("models", [])) or [dev.device]
        table = {"models": names, **{k: dev.params[k] for k in MOS_KEY_ORDER[1:]}}
        mos[dev.type] = table
        comments[f"mos.{dev.type}"] = _fit_comments(fit, dev)
    data["mos"] = mos
    head = [f"# Tech file written by dynshare {tool_version()} characterize: the input's tables, with",
            "# [mos.nmos] and [mos.pmos] fitted to the foundry models (see the comments there).", ""]
    return "\n".join(head) + toml_text(data, comments)
