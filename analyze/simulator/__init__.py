"""Running the foundry's SPICE models with ngspice.

Modules: :mod:`~analyze.simulator.ngspice` (run a deck in batch mode, read
back printed values and ``wrdata`` tables), :mod:`~analyze.simulator.models`
(a model library cut down to the devices a job needs, cached on disk),
:mod:`~analyze.simulator.instances` (the instance line of an extracted
device for that library).

May import: :mod:`extract`.  Nothing else of ``analyze``.
"""
