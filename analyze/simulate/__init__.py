"""Simulation of the worst cases with the foundry's models.

Modules: :mod:`~analyze.simulate.deck` (a stage as an ngspice deck: devices,
capacitors, clock and input waveforms, measurements),
:mod:`~analyze.simulate.run` (the worst few patterns of each stage, run per
corner, read back as :class:`~analyze.simulate.run.SimulatedCase`).

May import: :mod:`extract`, :mod:`analyze.stages`, :mod:`analyze.simulator`,
:mod:`analyze.physics`, :mod:`analyze.search`.
"""
