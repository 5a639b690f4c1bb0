"""The ngspice measurements a characterisation needs, one deck each.

Every function takes a :class:`~analyze.simulator.models.PrunedModels`
file and one device of it, builds a deck with many copies of the device
(one per bias or geometry, each with its own sources) so that a single
ngspice process measures them all, and returns numpy arrays.  Polarity:
``sign`` is +1 for an nmos and −1 for a pmos; voltages are written with
it, results are magnitudes.

Bias conventions (all at the deck's temperature):

- threshold: |Vds| = 50 mV, gate swept 0…VDD in 0.5 mV steps, one copy per
  source–body reverse bias;
- saturation current: |Vgs| = |Vds| = VDD, Vsb = 0;
- gate overlap: gate–drain capacitance with Vgs = Vds = Vsb = 0;
- gate oxide: gate capacitance of a W = L = 5 µm device at |Vgs| = VDD;
- junction: drain–body capacitance with the device off (Vgs = Vds = 0),
  the body at reverse bias V, read as the AC current in the body source.

AC measurements are at 1 MHz, where C = |Im I| / (2π f) for a 1 V source.
"""

from __future__ import annotations

import numpy as np

from analyze.simulator.instances import transistor_line
from analyze.simulator.models import PrunedModels
from analyze.simulator.ngspice import deck, run_deck

__all__ = [
    "THRESHOLD_VDS",
    "AC_FREQUENCY",
    "JUNCTION_GEOMETRIES",
    "measure_threshold_sweep",
    "measure_saturation_current",
    "measure_gate_capacitance",
    "measure_junction",
    "inverter_transfer",
]

#: |Vds| of the threshold sweep, V.
THRESHOLD_VDS = 0.05
#: Frequency of the AC capacitance measurements, Hz.
AC_FREQUENCY = 1e6
#: (W µm, AD µm², field perimeter µm) of the junction devices: a reference
#: and one with more of each part, so that bottom, field sidewall and
#: gate-edge sidewall separate.  PD = field perimeter + W (PD includes the
#: gate edge, as in SPICE level 1 and BSIM4 ``permod=1``).
JUNCTION_GEOMETRIES = ((1.0, 1.0, 3.0), (1.0, 4.0, 3.0), (1.0, 1.0, 9.0), (4.0, 1.0, 3.0))
_OXIDE_SIDE_UM = 5.0
_OVERLAP_W_UM = 5.0


def _line(pruned: PrunedModels, device: str, name, nodes, w, l, ad=0.0, pd=0.0):
    return transistor_line(str(name), nodes, device, pruned.kinds[device.lower()], pruned.scale,
                           w, l, ad, 0.0, pd, 0.0)


def _options(temp_c: float) -> list[str]:
    return [f".temp {temp_c:g}"]


def measure_threshold_sweep(pruned: PrunedModels, device: str, sign: int, w_um: float, l_um: float,
                            vdd: float, vsb, temp_c: float = 27.0, purpose: str = "threshold sweep"):
    """Drain current against gate voltage at several body biases.

    Parameters
    ----------
    pruned : PrunedModels
    device : str
        A device of ``pruned``.
    sign : int
        +1 nmos, −1 pmos.
    w_um, l_um : float
        Device size, µm.
    vdd : float
        The sweep's end, V.
    vsb : array_like
        Source–body reverse biases, V.
    temp_c : float
        Temperature, °C.
    purpose : str
        Named in an error.

    Returns
    -------
    (numpy.ndarray, numpy.ndarray)
        |Vgs| (n,) and |Id| (n, len(vsb)).

    Raises
    ------
    InputError
        From :func:`analyze.simulator.ngspice.run_deck`.

    Notes
    -----
    One DC sweep of the shared gate source over every copy; cost is the
    sweep's 2·VDD/1 mV points times the copies.
    """
    vsb = np.asarray(vsb, dtype=float)
    circuit = ["Vg g 0 0"]
    for k, v in enumerate(vsb):
        circuit += [_line(pruned, device, f"t{k}", (f"d{k}", "g", "0", f"b{k}"), w_um, l_um),
                    f"Vd{k} d{k} 0 {sign * THRESHOLD_VDS:g}", f"Vb{k} b{k} 0 {-sign * v:.9g}"]
    commands = [f"dc Vg 0 {sign * vdd:.9g} {sign * 0.5e-3:g}",
                "wrdata vt.txt " + " ".join(f"i(Vd{k})" for k in range(len(vsb)))]
    result = run_deck(deck(purpose, pruned.path, circuit, commands, _options(temp_c)), purpose, tables=["vt.txt"])
    table = result.tables["vt.txt"]
    return np.abs(table[:, 0]), np.abs(table[:, 1:])


def measure_saturation_current(pruned: PrunedModels, device: str, sign: int, w_um: float, l_um: float,
                               vdd: float, temp_c: float = 27.0, purpose: str = "saturation current") -> float:
    """|Id| at |Vgs| = |Vds| = VDD, Vsb = 0, in A.  See
    :func:`measure_threshold_sweep` for the parameters."""
    circuit = [_line(pruned, device, "s", ("d", "g", "0", "0"), w_um, l_um),
               f"Vd d 0 {sign * vdd:.9g}", f"Vg g 0 {sign * vdd:.9g}"]
    commands = ["op", "let idsat = abs(i(Vd))", "print idsat"]
    result = run_deck(deck(purpose, pruned.path, circuit, commands, _options(temp_c)), purpose, expect=["idsat"])
    return result.scalar("idsat")


def measure_gate_capacitance(pruned: PrunedModels, device: str, sign: int, l_um: float, vdd: float,
                             temp_c: float = 27.0, purpose: str = "gate capacitance") -> dict:
    """Gate–drain overlap of a W = 5 µm, L = ``l_um`` device (off) and the
    gate capacitance of a 5 µm × 5 µm device in strong inversion.

    Returns
    -------
    dict
        ``cgd_f`` (F), ``w_overlap_um``, ``cgg_f`` (F), ``side_um``.
    """
    w = _OVERLAP_W_UM
    side = _OXIDE_SIDE_UM
    circuit = [_line(pruned, device, "ov", ("dov", "gov", "0", "0"), w, l_um), "Vdov dov 0 0",
               "Vgov gov 0 dc 0 ac 1",
               _line(pruned, device, "ox", ("0", "gox", "0", "0"), side, side),
               f"Vgox gox 0 dc {sign * vdd:.9g} ac 1"]
    omega = f"(2*pi*{AC_FREQUENCY:g})"
    commands = [f"ac lin 1 {AC_FREQUENCY:g} {AC_FREQUENCY:g}",
                f"let cgd = abs(imag(i(Vdov)))/{omega}", f"let cgg = abs(imag(i(Vgox)))/{omega}",
                "print cgd", "print cgg"]
    result = run_deck(deck(purpose, pruned.path, circuit, commands, _options(temp_c)), purpose,
                      expect=["cgd", "cgg"])
    return {"cgd_f": result.scalar("cgd"), "w_overlap_um": w, "cgg_f": result.scalar("cgg"), "side_um": side}


def measure_junction(pruned: PrunedModels, device: str, sign: int, l_um: float, reverse_v,
                     geometries=JUNCTION_GEOMETRIES, temp_c: float = 27.0,
                     purpose: str = "junction capacitance") -> np.ndarray:
    """Drain–body capacitance of each geometry at each reverse bias.

    Parameters
    ----------
    pruned, device, sign, l_um, temp_c, purpose
        As for :func:`measure_threshold_sweep`.
    reverse_v : array_like
        Reverse biases of the drain junction, V.
    geometries : sequence of (W, AD, field perimeter)
        µm, µm², µm.  PD is written as field perimeter + W.

    Returns
    -------
    numpy.ndarray
        F, shape (len(geometries), len(reverse_v)).

    Notes
    -----
    The body is biased (−V for an nmos, +V for a pmos) with drain, gate
    and source at 0 V DC, so the device stays off; the AC source is on the
    drain only, and the current read in the body source is the drain–body
    capacitance alone (gate overlap current goes to the gate source).
    """
    reverse_v = np.asarray(reverse_v, dtype=float)
    circuit, commands = [], [f"ac lin 1 {AC_FREQUENCY:g} {AC_FREQUENCY:g}"]
    omega = f"(2*pi*{AC_FREQUENCY:g})"
    for i, (w, ad, field) in enumerate(geometries):
        for k, v in enumerate(reverse_v):
            n = f"{i}_{k}"
            circuit += [_line(pruned, device, f"j{n}", (f"d{n}", "0", "0", f"b{n}"), w, l_um, ad, field + w),
                        f"Vd{n} d{n} 0 dc 0 ac 1", f"Vb{n} b{n} 0 {-sign * v:.9g}"]
            commands += [f"let c{n} = abs(imag(i(Vb{n})))/{omega}", f"print c{n}"]
    names = [f"c{i}_{k}" for i in range(len(geometries)) for k in range(len(reverse_v))]
    result = run_deck(deck(purpose, pruned.path, circuit, commands, _options(temp_c)), purpose, expect=names)
    return np.array([[result.scalar(f"c{i}_{k}") for k in range(len(reverse_v))] for i in range(len(geometries))])


def inverter_transfer(pruned: PrunedModels, nmos: str, pmos: str, wn: float, ln: float, wp: float, lp: float,
                      vdd: float, temp_c: float = 27.0, purpose: str = "inverter transfer curve"):
    """The DC transfer curve of a static inverter.

    Parameters
    ----------
    pruned : PrunedModels
        Holding both devices.
    nmos, pmos : str
        Device names.
    wn, ln, wp, lp : float
        Sizes, µm.
    vdd : float
        V.

    Returns
    -------
    (numpy.ndarray, numpy.ndarray)
        Input and output voltages, 1 mV steps from 0 to VDD.
    """
    circuit = ["Vdd vdd 0 " + f"{vdd:.9g}", "Vin in 0 0",
               _line(pruned, nmos, "n", ("out", "in", "0", "0"), wn, ln),
               _line(pruned, pmos, "p", ("out", "in", "vdd", "vdd"), wp, lp)]
    commands = [f"dc Vin 0 {vdd:.9g} 1m", "wrdata vtc.txt v(out)"]
    result = run_deck(deck(purpose, pruned.path, circuit, commands, _options(temp_c)), purpose, tables=["vtc.txt"])
    table = result.tables["vtc.txt"]
    return table[:, 0], table[:, 1]
