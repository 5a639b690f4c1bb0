"""From layout or netlist to the circuit model.

``extract`` turns a GDSII/OASIS cell (with a tech file) or a SPICE/CDL netlist
into a :class:`extract.circuit.Circuit`: devices with W/L and AD/AS/PD/PS, nets
with their capacitance by part.  It never imports ``analyze``.

Top level (the shared vocabulary, imported by every subpackage):

- :mod:`extract.circuit` -- the circuit model dataclasses;
- :mod:`extract.tech`, :mod:`extract.techfile` -- the tech file and its reader;
- :mod:`extract.capacitance` -- the area-perimeter formulas;
- :mod:`extract.errors` -- ``InputError`` and ``Finding``;
- :mod:`extract.limits`, :mod:`extract.inputfile` -- the work limits; reading an
  input file (regular files only, within a size).

Subpackages, in pipeline order (each imports only the top level and, where
said, the one before it):

- :mod:`extract.layout` -- GDSII/OASIS geometry to devices and nets;
- :mod:`extract.netlist` -- SPICE/CDL netlists to the same circuit model;
- :mod:`extract.writers` -- SPICE and SPEF output of a circuit.
"""
