"""Pre-layout (schematic) against post-layout (layout).

Modules: :mod:`~analyze.compare.groups` (parallel devices merged, one side of
a matching), :mod:`~analyze.compare.refine` (colour refinement),
:mod:`~analyze.compare.match` (the net and device mapping),
:mod:`~analyze.compare.mismatch` (why two circuits do not match),
:mod:`~analyze.compare.comparison` (droop before and after, attribution).

May import: :mod:`extract`, :mod:`analyze.stages`, :mod:`analyze.physics`,
:mod:`analyze.search`.
"""
