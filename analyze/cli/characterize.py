"""The ``characterize`` command: a tech file's ``[mos.*]`` tables fitted
to the foundry models named in its ``[models]`` table, one output file per
corner, a text report and optionally JSON."""

from __future__ import annotations

import os
import sys

from analyze.cli.output import OutputSet, check_outputs
from extract.errors import InputError

__all__ = ["corner_outputs", "characterize_text", "run"]


def corner_outputs(out: str, corners: list) -> list[str]:
    """The output path of each corner.

    Parameters
    ----------
    out : str
        ``--out``.
    corners : list of str or None
        The corners characterised (None: the library loaded whole).

    Returns
    -------
    list of str
        ``out`` itself for a single corner; for several, the corner put
        before the suffix (``out.toml`` -> ``out.tt.toml``, ``out.ss.toml``).

    Examples
    --------
    >>> corner_outputs("fit.toml", ["tt"]), corner_outputs("a/fit.toml", ["tt", "ss"])
    (['fit.toml'], ['a/fit.tt.toml', 'a/fit.ss.toml'])
    >>> corner_outputs("fit", ["tt", "ff"])
    ['fit.tt', 'fit.ff']
    """
    if len(corners) == 1:
        return [out]
    stem, suffix = os.path.splitext(out)
    return [f"{stem}.{c}{suffix}" for c in corners]


def _device_lines(dev) -> list[str]:
    p = dev.params
    e0, e1 = dev.junction_error
    return [
        f"  {dev.type} {dev.device}:",
        f"    vt0 {p['vt0']:.4f} V  gamma {p['gamma']:.4f} V^0.5  phi {p['phi']:.4f} V"
        f"   (VT fit rms {dev.vt_rms_mv:.2f} mV, largest {dev.vt_max_mv:.2f} mV)",
        f"    kp {p['kp']:.2f} uA/V^2 (Idsat {dev.idsat_ua:.1f} uA)  cox {p['cox']:.3f} fF/um^2"
        f"  cgo {p['cgo']:.4f} fF/um",
        f"    bottom    cj {p['cj']:.4f} fF/um^2  mj {p['mj']:.3f}  pb {p['pb']:.3f} V",
        f"    field     cjsw {p['cjsw']:.4f} fF/um  mjsw {p['mjsw']:.3f}  pbsw {p['pbsw']:.3f} V",
        f"    gate edge cjswg {p['cjswg']:.4f} fF/um  mjswg {p['mjswg']:.3f}  pbswg {p['pbswg']:.3f} V",
        f"    junction fit: largest error {100 * e0:.2f} % at 0 V, {100 * e1:.2f} % at VDD",
    ]


def characterize_text(fit, out_path: str) -> str:
    """The terminal block of one corner."""
    corner = fit.corner or "(whole library)"
    cached = "  [from cache]" if fit.cached else ""
    lines = [f"corner {corner}: L = {fit.length_um:g} um, W = {fit.width_um:g} um, {fit.temp_c:g} C, "
             f"VDD = {fit.vdd:g} V{cached}"]
    lines += _device_lines(fit.nmos) + _device_lines(fit.pmos)
    lines.append(f"  wrote {out_path}")
    return "\n".join(lines) + "\n"


def run(args) -> int:
    """Run ``dynshare characterize``; returns the exit status (0)."""
    from analyze.characterize.process import characterize_corner
    from analyze.characterize.techout import fitted_tech_text
    from analyze.simulator.models import prune_models
    from analyze.report.json_report import dumps, input_name
    from extract.techfile import load_tech, parse_tech
    from extract.writers.numbers import tool_version

    tech = load_tech(args.tech, mos_optional=True)
    if tech.models is None:
        raise InputError(args.tech, "characterize needs a [models] table naming the model library "
                                    "and the nmos/pmos devices", "models")
    models = tech.models
    corners = list(args.corner or models.corners or [None])
    lowered = [c.lower() for c in corners if c]
    if len(set(lowered)) != len(lowered):
        raise InputError(args.tech, "a corner is given twice", "--corner")
    outputs = corner_outputs(args.out, corners)
    check_outputs({f"--out ({c})" if c else "--out": o for c, o in zip(corners, outputs)} | {"--json": args.json},
                  [args.tech, models.library])
    if args.length is not None and not 0 < args.length <= 1000:
        raise InputError(args.tech, f"must be a length in um, > 0 and at most 1000, got {args.length:g}", "--length")
    if args.width is not None and not 0 < args.width <= 1000:
        raise InputError(args.tech, f"must be a width in um, > 0 and at most 1000, got {args.width:g}", "--width")
    with open(args.tech, encoding="utf-8-sig") as fh:
        source = fh.read()
    length = args.length or models.length_um
    temp_c = models.temperature_c if args.temp is None else args.temp
    if not -273.15 < temp_c <= 500.0:
        raise InputError(args.tech, f"must be a temperature in °C above -273.15 and at most 500, got {temp_c:g}",
                         "--temp")
    for corner in corners:  # every section and device found before anything is simulated
        prune_models(models, corner, [models.nmos, models.pmos])
    texts, fits = [], []
    for corner, out in zip(corners, outputs):
        fit = characterize_corner(models, corner, tech.vdd, length, args.width or 1.0, temp_c)
        text = fitted_tech_text(source, fit, out)
        parse_tech(text, out)  # the file must be one that check accepts
        texts.append(text)
        fits.append(fit)
    report = "".join(characterize_text(f, o) for f, o in zip(fits, outputs))
    if args.json != "-":
        sys.stdout.write(report)
    files = OutputSet()
    for out, text in zip(outputs, texts):
        files.add(out, text)
    if args.json:
        files.add(args.json, dumps({"tool": "dynshare", "version": tool_version(), "tech": input_name(args.tech),
                               "corners": [dict(f.to_json(), output=o, cached=f.cached)
                                           for f, o in zip(fits, outputs)]}))
    files.commit()
    return 0
