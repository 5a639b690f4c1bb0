"""Dynamic-stage recognition.

Modules: :mod:`~analyze.stages.stage` (the recognised stage),
:mod:`~analyze.stages.topology` (indices of a circuit's devices by net),
:mod:`~analyze.stages.logic` (switch networks as Boolean functions: is a
net always driven?), :mod:`~analyze.stages.static` (which nets of a circuit
are static), :mod:`~analyze.stages.clocks` (clock inference),
:mod:`~analyze.stages.recognize` (stages and half-recognised structures).

May import: :mod:`extract`.  Nothing else of ``analyze``.
"""
