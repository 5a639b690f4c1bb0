"""The physics of charge sharing.

Modules: :mod:`~analyze.physics.charge` (node charge Q(V) with depletion
junctions), :mod:`~analyze.physics.threshold` (pass limit with body effect,
receiver switching threshold), :mod:`~analyze.physics.regions` (which
precharged node can feed which discharged region),
:mod:`~analyze.physics.redistribution` (the final-voltage solver),
:mod:`~analyze.physics.sharing` (a stage as switches and nodes).

May import: :mod:`extract`, :mod:`analyze.stages`.
"""
