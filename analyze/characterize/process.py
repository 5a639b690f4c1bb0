"""Fitting a tech file's ``[mos.*]`` tables to a foundry's models.

For one corner of a model library, :func:`characterize_corner` measures
each device type with ngspice (:mod:`analyze.characterize.measure`) on the
pruned models and fits the level-1 numbers dynshare uses
(:mod:`analyze.characterize.fits`):

- ``vt0, gamma, phi``: the body-effect formula fitted to constant-current
  thresholds (0.1 µA·W/L at |Vds| = 50 mV) at seven source–body biases
  0…VDD, on a W = ``width_um``, L = ``length_um`` device;
- ``kp``: from the saturation current of that device at
  |Vgs| = |Vds| = VDD, Vsb = 0, through the square law
  Id = kp/2 · W/L · (VDD − |vt0|)² (Shichman–Hodges, SPICE level 1;
  Rabaey, Digital Integrated Circuits, ch. 3, from memory), so
  kp = 2·Id·L / (W·(VDD − |vt0|)²) with drawn W and L;
- ``cgo``: gate–drain capacitance per µm of width of a W = 5 µm,
  L = ``length_um`` device with every terminal at 0 V;
- ``cox``: (Cgg − 2·cgo·W)/(W·L) of a 5 µm × 5 µm device at |Vgs| = VDD;
- ``cj, mj, pb`` (bottom), ``cjsw, mjsw, pbsw`` (field edges),
  ``cjswg, mjswg, pbswg`` (gate edge): the drain–body capacitance of four
  geometries at seven reverse biases 0…VDD, fitted as a whole to
  C = Σ C0·part/(1 + V/PB)^M (the SPICE depletion formula for each part).

Results are cached: the key is the pruned model file's content, the
corner, the sizes, VDD, the temperature and the tool version.

Examples
--------
>>> fit = DeviceFit("nmos", "nch", {"vt0": 0.5}, 1.2, 2.0, 100.0, (0.01, -0.02))
>>> DeviceFit.from_json(fit.to_json()) == fit
True
"""

from __future__ import annotations

import hashlib
import json
import os
import tempfile
from dataclasses import asdict, dataclass

import numpy as np
from scipy.optimize import least_squares

from analyze.characterize.fits import constant_current_vt, fit_body_effect, fit_depletion
from analyze.characterize.measure import (
    JUNCTION_GEOMETRIES,
    inverter_transfer,
    measure_gate_capacitance,
    measure_junction,
    measure_saturation_current,
    measure_threshold_sweep,
)
from analyze.simulator.models import PrunedModels, cache_dir, prune_models
from extract.errors import InputError
from extract.tech import Models
from extract.writers.numbers import tool_version

__all__ = ["DeviceFit", "CornerFit", "characterize_corner", "default_length_um", "inverter_threshold",
           "BIAS_POINTS", "JUNCTION_KEYS"]

#: Number of bias points, 0…VDD, of the threshold and junction fits.
BIAS_POINTS = 7
#: The junction keys, in the order of the fit vector.
JUNCTION_KEYS = ("cj", "pb", "mj", "cjsw", "pbsw", "mjsw", "cjswg", "pbswg", "mjswg")
_CACHE_FORMAT = 2


@dataclass(frozen=True)
class DeviceFit:
    """The fitted parameters of one device type and how well they fit.

    Parameters
    ----------
    type : str
        ``"nmos"`` or ``"pmos"``.
    device : str
        The library's device name.
    params : dict of str to float
        Tech-file keys in tech-file units (vt0 negative for a pmos).
    vt_rms_mv, vt_max_mv : float
        Residual of the body-effect fit, mV.
    idsat_ua : float
        The saturation current kp came from, µA.
    junction_error : tuple of float
        Largest relative error of the fitted junction capacitance over the
        fit's geometries at 0 V and at VDD reverse bias.
    """

    type: str
    device: str
    params: dict
    vt_rms_mv: float
    vt_max_mv: float
    idsat_ua: float
    junction_error: tuple

    def to_json(self) -> dict:
        """A JSON-ready dict."""
        return asdict(self)

    @classmethod
    def from_json(cls, data: dict) -> "DeviceFit":
        """The inverse of :meth:`to_json`."""
        return cls(**{**data, "junction_error": tuple(data["junction_error"])})


@dataclass(frozen=True)
class CornerFit:
    """Both device types at one corner.

    Parameters
    ----------
    library : str
    corner : str or None
        None: the library loaded whole.
    vdd, length_um, width_um, temp_c : float
        The conditions of the fit.
    nmos, pmos : DeviceFit
    cached : bool
        True when read from the cache without simulating.
    """

    library: str
    corner: str | None
    vdd: float
    length_um: float
    width_um: float
    temp_c: float
    nmos: DeviceFit
    pmos: DeviceFit
    cached: bool = False

    def to_json(self) -> dict:
        """A JSON-ready dict (without ``cached``)."""
        return {"library": self.library, "corner": self.corner, "vdd": self.vdd, "length_um": self.length_um,
                "width_um": self.width_um, "temp_c": self.temp_c, "nmos": self.nmos.to_json(),
                "pmos": self.pmos.to_json()}

    @classmethod
    def from_json(cls, data: dict, cached: bool = False) -> "CornerFit":
        """The inverse of :meth:`to_json`."""
        return cls(data["library"], data["corner"], data["vdd"], data["length_um"], data["width_um"],
                   data["temp_c"], DeviceFit.from_json(data["nmos"]), DeviceFit.from_json(data["pmos"]),
                   cached)


def default_length_um(models: Models, pruned: PrunedModels) -> float:
    """The channel length to characterise at.

    Parameters
    ----------
    models : Models
        ``length_um`` (``[models] length``) wins when given.
    pruned : PrunedModels
        Otherwise the larger of the two devices' smallest binned ``lmin``
        (the shortest channel both devices are modelled for).

    Returns
    -------
    float
        µm.

    Raises
    ------
    InputError
        When neither is known (naming ``[models] length``).
    """
    if models.length_um:
        return float(models.length_um)
    found = [pruned.min_length_m.get(d.lower()) for d in (models.nmos, models.pmos)]
    if any(v is None for v in found):
        raise InputError(models.library, "the models are not binned, so the channel length to characterise "
                                         "at is not known; give [models] length or --length")
    return round(max(found) * 1e6, 6)


def _vt(pruned, device, sign, width, length, vdd, temp, what) -> tuple[float, float, float, float, float]:
    vsb = np.linspace(0.0, vdd, BIAS_POINTS)
    vg, current = measure_threshold_sweep(pruned, device, sign, width, length, vdd, vsb, temp,
                                          purpose=f"threshold of {device} ({what})")
    vts = np.array([constant_current_vt(vg, current[:, k], 0.1e-6 * width / length) for k in range(vsb.size)])
    if not np.all(np.isfinite(vts)):
        raise InputError(pruned.library, f"{device} ({what}) does not reach 0.1 uA*W/L with |Vgs| up to VDD = "
                                         f"{vdd:g} V; is it the right device type?")
    fit = fit_body_effect(vsb, vts)
    return fit.vt0, fit.gamma, fit.phi, fit.rms_v, fit.max_v


def _junction(pruned, device, sign, length, vdd, temp, what):
    v = np.linspace(0.0, vdd, BIAS_POINTS)
    caps = measure_junction(pruned, device, sign, length, v, JUNCTION_GEOMETRIES, temp,
                            purpose=f"junction capacitance of {device} ({what})") * 1e15  # fF
    if not np.all(caps > 1e-9):
        raise InputError(pruned.library, f"{device} ({what}): the models give no junction capacitance for "
                                         "the drain geometry AD/PD; cannot fit cj, cjsw, cjswg")
    geo = np.array([[ad, field, w] for (w, ad, field) in JUNCTION_GEOMETRIES])
    parts = np.linalg.lstsq(geo, caps, rcond=None)[0]  # fF per um2, um, um at each bias
    start = []
    for i in range(3):
        dep = fit_depletion(v, np.maximum(parts[i], 1e-9))
        start += [dep.c0, dep.pb, dep.m]

    def model(x):
        out = np.zeros_like(caps)
        for i in range(3):
            out += geo[:, i:i + 1] * x[3 * i] / (1 + v[None, :] / x[3 * i + 1]) ** x[3 * i + 2]
        return out

    lower = [0, 0.05, 0] * 3
    upper = [np.inf, 5.0, 0.99] * 3
    start = np.clip(start, lower, [1e6, 5.0, 0.99] * 3)
    sol = least_squares(lambda x: (model(x) / caps - 1).ravel(), start, bounds=(lower, upper),
                        xtol=1e-14, ftol=1e-14, gtol=1e-14)
    rel = model(sol.x) / caps - 1
    err = (float(np.max(np.abs(rel[:, 0]))), float(np.max(np.abs(rel[:, -1]))))
    return dict(zip(JUNCTION_KEYS, (float(x) for x in sol.x))), err


def _fit_device(pruned, kind, device, vdd, length, width, temp, what) -> DeviceFit:
    sign = 1 if kind == "nmos" else -1
    vt0, gamma, phi, rms, worst = _vt(pruned, device, sign, width, length, vdd, temp, what)
    if vt0 >= vdd:
        raise InputError(pruned.library, f"{device} ({what}): fitted |vt0| {vt0:.3f} V is not below VDD")
    idsat = measure_saturation_current(pruned, device, sign, width, length, vdd, temp,
                                       purpose=f"saturation current of {device} ({what})")
    kp = 2 * idsat * length / (width * (vdd - vt0) ** 2) * 1e6  # uA/V^2
    gate = measure_gate_capacitance(pruned, device, sign, length, vdd, temp,
                                    purpose=f"gate capacitance of {device} ({what})")
    cgo = gate["cgd_f"] * 1e15 / gate["w_overlap_um"]
    side = gate["side_um"]
    cox = (gate["cgg_f"] * 1e15 - 2 * cgo * side) / (side * side)
    junction, err = _junction(pruned, device, sign, length, vdd, temp, what)
    params = {"vt0": sign * vt0, "gamma": gamma, "phi": phi, "kp": kp, "cox": cox, "cgo": cgo, **junction}
    params = {k: 0.0 if abs(v) < 1e-9 else float(f"{v:.6g}") for k, v in params.items()}
    return DeviceFit(kind, device, params, rms * 1e3, worst * 1e3, idsat * 1e6, err)


def _file_hash(path: str) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def characterize_corner(models: Models, corner: str | None, vdd: float, length_um: float | None = None,
                        width_um: float = 1.0, temp_c: float = 27.0) -> CornerFit:
    """Fit both device types of ``models`` at one corner.

    Parameters
    ----------
    models : Models
        Library and the nmos/pmos device names.
    corner : str or None
        The section; None loads the library whole.
    vdd : float
        Supply, V: the top of every bias range.
    length_um : float or None
        Channel length; None: :func:`default_length_um`.
    width_um : float
        Width of the threshold and saturation-current device, µm.
    temp_c : float
        Simulation temperature, °C.

    Returns
    -------
    CornerFit

    Raises
    ------
    InputError
        From pruning (library, section, device) or simulation (ngspice
        missing, a failed run), or a device that never turns on.

    Notes
    -----
    Four ngspice runs per device type (a DC sweep of seven copies, one
    operating point, one AC point of two devices, one AC point of 28
    copies), each loading only the pruned models: about 2 s per corner.
    A cached corner costs one hash of the pruned file.
    """
    pruned = prune_models(models, corner, [models.nmos, models.pmos])
    length = float(length_um) if length_um else default_length_um(models, pruned)
    key_text = json.dumps([_file_hash(pruned.path), corner, vdd, length, width_um, temp_c, tool_version(),
                           _CACHE_FORMAT, models.nmos.lower(), models.pmos.lower()])
    key = hashlib.sha256(key_text.encode()).hexdigest()[:24]
    path = os.path.join(cache_dir("characterize"), f"{key}.json")
    try:
        with open(path, encoding="utf-8") as fh:
            data = json.load(fh)
        if data.get("key") == key_text:
            return CornerFit.from_json(data["fit"], cached=True)
    except (OSError, ValueError, KeyError, TypeError):
        pass
    what = corner or "whole library"
    fits = {kind: _fit_device(pruned, kind, getattr(models, kind), vdd, length, width_um, temp_c, what)
            for kind in ("nmos", "pmos")}
    result = CornerFit(os.path.abspath(models.library), corner, vdd, length, width_um, temp_c,
                       fits["nmos"], fits["pmos"])
    fd, tmp = tempfile.mkstemp(prefix=".dynshare-", dir=os.path.dirname(path))
    with os.fdopen(fd, "w", encoding="utf-8") as fh:
        json.dump({"key": key_text, "fit": result.to_json()}, fh)
    os.replace(tmp, path)
    return result


def inverter_threshold(models: Models, corner: str | None, wn: float, ln: float, wp: float, lp: float,
                       vdd: float, temp_c: float = 27.0) -> float:
    """The switching threshold of a static inverter, simulated.

    Parameters
    ----------
    models : Models
        Library and device names.
    corner : str or None
        Section, or None for the whole library.
    wn, ln, wp, lp : float
        nmos and pmos W and L, µm.
    vdd : float
        Supply, V.
    temp_c : float
        °C.

    Returns
    -------
    float
        VM, the input voltage at which the output equals the input, V.

    Raises
    ------
    InputError
        As :func:`characterize_corner`.

    Notes
    -----
    A DC sweep of the input in 1 mV steps (ngspice on the pruned models);
    VM is interpolated linearly where Vout − Vin changes sign.  The
    square-law estimate of the same quantity is in the README
    ("threshold_v"); this is the models' answer.
    """
    pruned = prune_models(models, corner, [models.nmos, models.pmos])
    vin, vout = inverter_transfer(pruned, models.nmos, models.pmos, wn, ln, wp, lp, vdd, temp_c,
                                  purpose=f"inverter threshold ({corner or 'whole library'})")
    diff = vout - vin
    j = int(np.nonzero(diff <= 0)[0][0])
    return float(vin[j - 1] + diff[j - 1] * (vin[j] - vin[j - 1]) / (diff[j - 1] - diff[j]))
