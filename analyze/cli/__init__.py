"""The ``dynshare`` command line.

Modules: :mod:`~analyze.cli.main` (argument parsing, exit status),
:mod:`~analyze.cli.commands` (one function per command),
:mod:`~analyze.cli.check`, :mod:`~analyze.cli.compare`,
:mod:`~analyze.cli.library`, :mod:`~analyze.cli.demo` (the commands' work),
:mod:`~analyze.cli.cluster` (``check --all-cells`` on a Dask distributed cluster),
:mod:`~analyze.cli.output` (atomic writes, inputs never overwritten),
:mod:`~analyze.cli.progress` (progress of long steps on a terminal),
:mod:`~analyze.cli.collector` (the garbage collector during a big run).

May import: everything.  Nothing imports it but ``analyze.__main__``.
"""
