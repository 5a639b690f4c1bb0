"""``check BLOCK --scheduler ADDRESS``: the distinct stage contexts of one
block on a Dask distributed cluster.

The client (this process) reads, extracts and recognises the block as for
the local run.  The analysis of a stage reads only what its context key
holds (:mod:`analyze.search.contexts`), so the client computes the key of
every stage, sends each distinct key once to the workers, in chunks, and
takes a result in placeholder names back per key; every stage with that
key gets the result renamed to its own nets and devices, exactly as
:class:`~analyze.search.contexts.StageContexts` does on one machine.  The
JSON report is therefore byte-identical to the local run's.

What stays on the client: reading and extraction, recognition, the keys,
the renaming and the reports; the stages that have no key (constraint
names that match two of their nets without regard to case) and those whose
context analysis raised (analysed in their own names, so that an error
names the real stage).  With ``[models]`` in the tech file the analysis is
not shared between contexts at all (device tables are measured per stage
with ngspice), so the whole run stays on the client: :func:`block_solver`
is not used and ``check`` says so in a warning.

The workers read no file: a task carries its keys, the tech file as read
by the client (a small picklable record) and the constraints file's name
for messages.  They need the same dynshare version, checked with every
chunk as for libraries (:func:`analyze.cli.cluster.on_worker`).

Dask is imported only through :mod:`analyze.cli.cluster`, and this module
only when ``--scheduler`` is given.
"""

from __future__ import annotations

from contextlib import contextmanager

from analyze.cli.cluster import cluster_client, on_worker, run_chunks
from analyze.cli.library import work_chunks
from analyze.search.contexts import analyse_contexts

__all__ = ["block_solver"]


def _context_chunk(analyse, tech, path: str, version: str, keys: list):
    """Worker side: ``("ok", results)`` of the context ``keys`` (one per
    key, None where the analysis raised), or ``("refused", why)``."""
    return on_worker(version, lambda: analyse_contexts(analyse, keys, tech, path))


@contextmanager
def block_solver(address: str, steps=None):
    """Connect to the scheduler at ``address``; give the ``solve`` function
    of :meth:`analyze.search.contexts.StageContexts.prefetch` that runs on
    its workers.

    Parameters
    ----------
    address : str
        The scheduler, e.g. ``tcp://10.0.0.5:8786``.
    steps : analyze.cli.progress.Steps or None
        Shows the contexts analysed on the cluster as a counted step.

    Yields
    ------
    callable
        ``solve(analyse, keys, tech, path)`` yielding ``(key, result)`` as
        the chunks come back.

    Raises
    ------
    InputError
        On entering: the scheduler cannot be reached or has no worker.
        While solving: a worker failed or refused (another dynshare
        version).  One line naming ADDRESS and ``--scheduler``.

    Notes
    -----
    Connecting comes first, before the block is read, so that a wrong
    address is reported at once.  Chunks as for libraries
    (:func:`analyze.cli.library.work_chunks`: at most 16 keys, about 8
    chunks per worker).  Cost on the client: pickling each distinct key
    once (about a kilobyte for a stage of a few devices) and its result
    back; the analysis runs on the workers.
    """
    from extract.writers.numbers import tool_version

    with cluster_client(address) as client:

        def solve(analyse, keys, tech, path):
            tick = steps.counted(f"analysing stage contexts on {address}", len(keys)) if steps else None
            args = (analyse, tech, path, tool_version())
            for chunk, results in run_chunks(client, address, _context_chunk, args, keys, work_chunks):
                for key, result in zip(chunk, results):
                    yield key, result
                    if tick:
                        tick()

        yield solve
