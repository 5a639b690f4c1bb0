"""The instance line of a transistor for a foundry model library.

A foundry library defines a device either as a subcircuit (instantiated
with an ``X`` line) or as a ``.model`` card (an ``M`` line); its lengths
are metres unless it sets ``.option scale`` (sky130: ``scale=1.0u``, so
``w=0.65`` means 0.65 µm).  :func:`instance_line` writes W, L, AD, AS, PD
and PS (µm and µm² in dynshare) in whichever units the library expects.

Examples
--------
>>> from extract.circuit import Device
>>> d = Device("M1", "nmos", "x", "a", "n1", 1.0, 0.15, ad_um2=0.5, as_um2=0.25, pd_um=3.0, ps_um=2.0)
>>> instance_line(d, "nch", "model", None, bulk="VSS")
'M1 x a n1 VSS nch w=1u l=0.15u ad=0.5p as=0.25p pd=3u ps=2u'
>>> instance_line(d, "sky130_fd_pr__nfet_01v8", "subckt", 1e-6, bulk="VSS")
'X1 x a n1 VSS sky130_fd_pr__nfet_01v8 w=1 l=0.15 ad=0.5 as=0.25 pd=3 ps=2'
"""

from __future__ import annotations

from extract.circuit import Device
from extract.errors import InputError
from extract.writers.numbers import fixed

__all__ = ["instance_line", "transistor_line"]


def _lengths(scale: float | None, values: dict[str, tuple[float, int]]) -> list[str]:
    """``key=value`` words: µm (power 1) or µm² (power 2) in the library's units."""
    out = []
    for key, (value, power) in values.items():
        if scale is None:
            out.append(f"{key}={fixed(value)}{'u' if power == 1 else 'p'}")
        else:
            out.append(f"{key}={fixed(value * (1e-6 / scale) ** power)}")
    return out


def transistor_line(name: str, nodes: tuple[str, str, str, str], device: str, kind: str, scale: float | None,
                    w_um: float, l_um: float, ad_um2: float = 0.0, as_um2: float = 0.0,
                    pd_um: float = 0.0, ps_um: float = 0.0) -> str:
    """One transistor instance line.

    Parameters
    ----------
    name : str
        Instance name without the element letter (``"1"`` gives ``X1``/``M1``).
    nodes : tuple of str
        Drain, gate, source, bulk.
    device : str
        The library's device name.
    kind : str
        ``"subckt"`` (an ``X`` line) or ``"model"`` (an ``M`` line), as
        :class:`analyze.simulator.models.PrunedModels` ``.kinds`` says.
    scale : float or None
        The library's ``.option scale`` (metres per unit), or None for SI
        values with suffixes (``1u``, ``0.5p``).
    w_um, l_um, ad_um2, as_um2, pd_um, ps_um : float
        Geometry in µm and µm²; PD/PS include the gate edge.

    Returns
    -------
    str

    Raises
    ------
    InputError
        An unknown ``kind``, or W or L not positive.

    Notes
    -----
    Numbers are written positional with six significant digits
    (:func:`extract.writers.numbers.fixed`); O(1).
    """
    if kind not in ("subckt", "model"):
        raise InputError(device, f"unknown device kind {kind!r} (subckt or model)")
    if not (w_um > 0 and l_um > 0):
        raise InputError(device, f"instance {name}: W and L must be positive, got W={w_um} L={l_um}")
    letter = "X" if kind == "subckt" else "M"
    words = _lengths(scale, {"w": (w_um, 1), "l": (l_um, 1), "ad": (ad_um2, 2), "as": (as_um2, 2),
                             "pd": (pd_um, 1), "ps": (ps_um, 1)})
    return " ".join([f"{letter}{name}", *nodes, device, *words])


def instance_line(device: Device, library_device: str, kind: str, scale: float | None, bulk: str) -> str:
    """The line of an extracted :class:`~extract.circuit.Device`.

    Parameters
    ----------
    device : Device
        Its name loses a leading ``M``/``X`` (``M1`` -> ``X1`` for a subcircuit).
    library_device : str
        The library's name for its type (``Models.nmos`` or ``Models.pmos``).
    kind, scale
        As for :func:`transistor_line`.
    bulk : str
        The bulk net.

    Returns
    -------
    str
    """
    name = device.name[1:] if device.name[:1] in "MmXx" and len(device.name) > 1 else device.name
    return transistor_line(name, (device.drain, device.gate, device.source, bulk), library_device, kind,
                           scale, device.w_um, device.l_um, device.ad_um2, device.as_um2, device.pd_um,
                           device.ps_um)
