"""Read a SPICE or CDL netlist into the circuit model.

:func:`read_schematic` reads the netlist of a transistor-level cell — a
designer's schematic, a foundry library's CDL or SPICE, or a post-layout
netlist written by an extractor — and returns the same
:class:`~extract.circuit.Circuit` the layout extractor produces, with
junctions from AD/AS/PD/PS (estimated from the tech file's ``[prelayout]``
rules where the netlist leaves them out), so pre-layout and post-layout can
be analysed alike.  :func:`read_netlist_library` and :func:`circuit_of` do
the same for many cells of one file, reading it once.

The accepted netlist
--------------------
- ``.subckt NAME port... [params:] [name=value...]`` ... ``.ends [NAME]``
  in any case; one level of definition (no ``.subckt`` inside another).
- ``.param name=expr ...`` at the top (global) or inside a subcircuit
  (local); expressions as in :mod:`extract.netlist.expressions`.  Each
  ``.param`` may use the parameters defined before it.
- ``M``: ``Mname drain gate source bulk model [W= L= AD= AS= PD= PS= M= MULT= NF=]``.
- ``X`` of a device: ``Xname d g s b DEVICE [w= l= ...]`` where DEVICE is
  listed in ``[mos.nmos] models`` or ``[mos.pmos] models`` (any case): a
  transistor, as foundry libraries write them.
- ``C``: ``Cname node node value`` (or ``C=value``; ``M=`` multiplies).
  Between two signal nets it is also kept as coupling capacitance.
- ``R``: ``Rname node node ...`` joins the two nodes into one net.
- ``X``: ``Xname node... subckt [name=value...] [M=k]``, a subcircuit of
  the file (or of a file it includes), flattened with hierarchical names
  ``X1/MN3``, ``X1/n1``.  CDL's ``Xname node... / subckt`` (a ``/`` field
  before the name, or ``/subckt``) is the same line.
- ``.model NAME nmos|pmos ...`` gives a model name a type (its parameters
  are not used: the tech file has them).  ``.global`` nets are not
  prefixed.  Node ``0`` is SPICE's ground: it becomes the tech file's
  first ground net.
- ``.include FILE`` and ``.lib FILE SECTION`` are followed, relative to the
  including file, when they bring subcircuits; model libraries are skipped
  unread, with one warning.  Include cycles are refused.
- Lengths: ``.option scale=`` in the file, else ``[netlist] scale`` of the
  tech file, else 1 (SPICE, SI units) or 1e-6 (a ``.cdl`` file: µm, as CDL
  writes them).  ``*.PININFO`` and other ``*.`` lines of CDL are comments.
- Outside any ``.subckt``, element lines and simulator commands (a test
  bench: sources, ``.tran``, ``.control``...``.endc``) are ignored;
  ``.end`` ends the file.
- Rejected with a message naming the file and line: elements other than
  M, C, R, X inside a subcircuit (V, I, L, D, ...), unknown model names,
  unknown subcircuits, wrong node counts, recursive instantiation, bad
  values.

Which subcircuit is the cell: the ``subckt`` argument; otherwise the only
one that no other subcircuit instantiates.

Notes
-----
Reading is one pass over the cards (:mod:`extract.netlist.cards`) building
subcircuit definitions (:mod:`extract.netlist.library`), then a recursive
elaboration (:mod:`extract.netlist.flatten`) that is linear in the number
of flattened elements.
"""

from __future__ import annotations

from extract.circuit import Circuit
from extract.netlist.flatten import flatten
from extract.netlist.library import Library, choose_top, parse_library
from extract.tech import Tech

__all__ = ["read_schematic", "parse_schematic", "read_netlist_library", "netlist_cells", "circuit_of"]


def parse_schematic(text: str, path: str, tech: Tech, subckt: str | None = None) -> Circuit:
    """Like :func:`read_schematic`, from text.

    Examples
    --------
    >>> from extract.tech import MosParams, NetRoles, Tech
    >>> n = MosParams("nmos", 0.45, 0.4, 0.8, 200, 8, 0, 1.0, 0.25, 0.25, 0.5, 0.33, 0.8, 0.8)
    >>> t = Tech("t", 1.8, NetRoles(), {}, {"nmos": n, "pmos": n})
    >>> c = parse_schematic(".subckt S a y VSS\\nM1 y a VSS VSS nmos W=1u L=0.2u NF=2\\n.ends", "s.sp", t)
    >>> [(d.name, d.w_um, d.l_um) for d in c.devices]
    [('M1.1', 0.5, 0.2), ('M1.2', 0.5, 0.2)]
    >>> c.nets["y"].labelled, c.nets["VSS"].role
    (True, 'ground')
    """
    lib = parse_library(text, path)
    top = choose_top(lib, path, subckt)
    return flatten(lib, top, tech, path)


def read_schematic(path, tech: Tech, subckt: str | None = None) -> Circuit:
    """Read a SPICE netlist file into a flat :class:`~extract.circuit.Circuit`.

    Parameters
    ----------
    path : str or os.PathLike
        The netlist.  Never written.
    tech : Tech
        Device types of model names, capacitance parameters, net roles,
        ``[prelayout]`` estimation rules.
    subckt : str, optional
        The cell's subcircuit; default: the only top-level one.

    Returns
    -------
    Circuit
        ``source`` is ``path``; ports are labelled nets; devices from ``M``
        lines (split by ``M=`` and ``NF=``), nets with zero-bias
        capacitance by part.

    Raises
    ------
    InputError
        File missing or unreadable; any error of the netlist, with its line.
    """
    path = str(path)
    lib = read_netlist_library(path)
    return circuit_of(lib, tech, path, subckt)


def read_netlist_library(path) -> Library:
    """Read a netlist file (and what it includes) once, for many cells.

    Raises
    ------
    InputError
        File missing or unreadable; any structural error, with its line.
    """
    from extract.inputfile import read_input
    from extract.limits import MAX_NETLIST_BYTES

    path = str(path)
    data = read_input(path, "netlist", MAX_NETLIST_BYTES)
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        text = data.decode("latin-1")
    return parse_library(text, path)


def netlist_cells(lib: Library, tech: Tech) -> list[str]:
    """The cells of a netlist library: every subcircuit it defines, in file
    order, except device subcircuits named in ``[mos.*] models``.

    Examples
    --------
    >>> from extract.tech import MosParams, NetRoles, Tech
    >>> n = MosParams("nmos", 0.45, 0.4, 0.8, 200, 8, 0, 1.0, 0.25, 0.25, 0.5, 0.33, 0.8, 0.8, ("nfet",))
    >>> t = Tech("t", 1.8, NetRoles(), {}, {"nmos": n, "pmos": n})
    >>> lib = parse_library(".subckt nfet d g s b\\n.ends\\n.subckt INV a y\\n.ends\\n.subckt BUF a y\\n.ends", "l.sp")
    >>> netlist_cells(lib, t)
    ['INV', 'BUF']
    """
    devices = {m.lower() for p in tech.mos.values() for m in p.models}
    return [s.name for key, s in lib.subckts.items() if key not in devices]


def circuit_of(lib: Library, tech: Tech, path: str, subckt: str | None = None) -> Circuit:
    """The flat circuit of one cell of a library read by
    :func:`read_netlist_library` (``subckt`` as in :func:`read_schematic`)."""
    top = choose_top(lib, path, subckt)
    return flatten(lib, top, tech, path)
