"""The physics of charge sharing.

Modules: :mod:`~analyze.physics.charge` (node charge Q(V) with depletion
junctions), :mod:`~analyze.physics.threshold` (pass limit with body effect,
receiver switching threshold), :mod:`~analyze.physics.regions` (which
precharged node can feed which discharged region),
:mod:`~analyze.physics.redistribution` (the final-voltage solver),
:mod:`~analyze.physics.sharing` (a stage as switches and nodes),
:mod:`~analyze.physics.device_tables`,
:mod:`~analyze.physics.table_measurement` and
:mod:`~analyze.physics.device_charge` (the foundry models' device charges,
the ngspice decks that measure them, what the solver needs of them per
stage), :mod:`~analyze.physics.settling` (the solver with them), :mod:`~analyze.physics.lookup` (one-point table
lookup, numpy.interp's numbers), :mod:`~analyze.physics.creep` (the creep
past the pass limit and its stiff ODE solver).

May import: :mod:`extract`, :mod:`analyze.stages`.
"""
