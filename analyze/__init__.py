"""Charge-sharing analysis of the dynamic stages of a circuit.

Subpackages, from the bottom up; each may import the ones before it and
:mod:`extract`, never one after it:

1. :mod:`analyze.stages` -- recognition of dynamic stages (precharge,
   evaluation network, footer, keeper, receiver) and clock inference;
   beside it, :mod:`analyze.simulator` -- ngspice runs on a foundry model
   library pruned to the devices needed (the two import only
   :mod:`extract`, not each other);
   then :mod:`analyze.characterize` -- tech-file device parameters fitted
   to foundry models (may import the simulator and the stages);
2. :mod:`analyze.physics` -- node charge, pass limits, receiver threshold,
   the final-voltage solver;
3. :mod:`analyze.search` -- input patterns, constraints, the exact worst
   case and precharge flags;
4. :mod:`analyze.compare` -- schematic against layout: matching, mismatch
   messages, droop attribution;
5. :mod:`analyze.report` -- JSON, text and HTML reports;
6. :mod:`analyze.cli` -- the ``dynshare`` command line and its commands.

``python -m analyze`` runs the command line.
"""
