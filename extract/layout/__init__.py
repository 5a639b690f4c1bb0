"""Layout extraction: GDSII/OASIS polygons and a tech file to a circuit.

Modules, in the order the pipeline runs them: :mod:`~extract.layout.gdsii`
(the GDSII record grammar, checked first), :mod:`~extract.layout.reader`
(read, check, flatten), :mod:`~extract.layout.geometry` (vectorised shapely
helpers), :mod:`~extract.layout.devices` (channels, W/L, source/drain pieces),
:mod:`~extract.layout.connectivity` (conductors joined through cuts, net
names), :mod:`~extract.layout.pipeline` (the steps in order, capacitance per
net).

May import: the top level of :mod:`extract` (circuit, tech, capacitance,
errors).  Never :mod:`extract.netlist`, :mod:`extract.writers` or ``analyze``.
"""
