"""Writers of a circuit: SPICE subcircuit and IEEE 1481 SPEF.

Modules: :mod:`~extract.writers.numbers` (number and name formatting, tool
version), :mod:`~extract.writers.spice`, :mod:`~extract.writers.spef`.

May import: the top level of :mod:`extract`.  Never ``analyze``.
"""
