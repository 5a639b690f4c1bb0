"""Netlist reading: SPICE and CDL text to a circuit.

Modules: :mod:`~extract.netlist.cards` (physical lines to cards),
:mod:`~extract.netlist.expressions` (safe ``.param`` arithmetic),
:mod:`~extract.netlist.library` (subcircuit definitions of a file),
:mod:`~extract.netlist.flatten` (elaboration to a flat circuit, pre-layout
junction estimates), :mod:`~extract.netlist.reader` (the entry points).

May import: the top level of :mod:`extract`.  Never :mod:`extract.layout`,
:mod:`extract.writers` or ``analyze``.
"""
