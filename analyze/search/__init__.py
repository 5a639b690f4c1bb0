"""Input patterns and the exact worst case.

Modules: :mod:`~analyze.search.constraints` (the constraints file),
:mod:`~analyze.search.patterns` (constraint blocks, enumeration, counting),
:mod:`~analyze.search.cases` (input-arrival cases: which inputs change at
the start of evaluation),
:mod:`~analyze.search.worstcase` (brute force and branch-and-bound),
:mod:`~analyze.search.flags` (nodes that need a precharge device),
:mod:`~analyze.search.foundry` (the worst case with the foundry models),
:mod:`~analyze.search.foundry_flags` (flags proven with the foundry models),
:mod:`~analyze.search.contexts` (a stage's context key: the analysis once
per distinct context, results renamed),
:mod:`~analyze.search.analysis` (the public entry points).

May import: :mod:`extract`, :mod:`analyze.stages`, :mod:`analyze.physics`.
"""
