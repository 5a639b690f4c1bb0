"""``check LIB --all-cells --scheduler ADDRESS``: the cells of a library on
a Dask distributed cluster; and what every ``--scheduler`` run shares: the
connection (:func:`cluster_client`), chunks of work sent out and taken back
(:func:`run_chunks`), the worker-side version check (:func:`on_worker`).
One block's stage contexts go out through the same functions
(:mod:`analyze.cli.cluster_block`).

The client (this process) reads the library once to list its cells, as for
the local run, then connects to the scheduler at ADDRESS, sends the cells
out in chunks and takes the outcomes back as they finish.  The report is
assembled here from the same outcomes in the same order as with
``--jobs N``, so the JSON report is byte-identical.

The workers read the input files themselves, by path: the library, tech
and constraints files must be visible to every worker under the same
absolute path (a shared filesystem).  The client sends the SHA-256 of each
file with every chunk; a worker that cannot read a file, or reads other
bytes, refuses the chunk and the run stops with one ``error:`` line.  A
worker running another dynshare version is refused the same way.

Dask is imported only here, and this module only when ``--scheduler`` is
given: the local run does not pay for it.
"""

from __future__ import annotations

import hashlib
import os
import threading
from contextlib import contextmanager

from extract.errors import InputError

__all__ = ["CONNECT_TIMEOUT_S", "file_digest", "as_given", "on_worker", "cluster_client", "run_chunks", "cluster_map"]

#: Seconds to wait for the scheduler to answer, and for a first worker
#: (the environment variable ``DYNSHARE_SCHEDULER_TIMEOUT`` overrides it).
CONNECT_TIMEOUT_S = 10

_DIGESTS: dict = {}
_LOCK = threading.Lock()


def file_digest(path: str) -> str:
    """SHA-256 of a file's bytes, in hex.

    Parameters
    ----------
    path : str

    Returns
    -------
    str
        64 hex digits.

    Raises
    ------
    OSError
        The file cannot be read.

    Notes
    -----
    Read in 1 MiB blocks: memory stays flat, cost is one pass over the file
    (a few hundred MB/s).

    Examples
    --------
    >>> import tempfile, os
    >>> with tempfile.NamedTemporaryFile("wb", delete=False) as f:
    ...     _ = f.write(b"abc")
    >>> file_digest(f.name)[:16]  # SHA-256 of "abc" (FIPS 180-2, appendix B.1)
    'ba7816bf8f01cfea'
    >>> os.unlink(f.name)
    """
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def as_given(text: str | None, names: dict[str, str]) -> str | None:
    """``text`` with each absolute path of ``names`` put back as the user
    gave it (workers open absolute paths; reports name the files as given).

    Parameters
    ----------
    text : str or None
    names : dict
        Absolute path → path as given.

    Returns
    -------
    str or None

    Notes
    -----
    Longest paths first, so that a path that is a prefix of another is not
    replaced inside it.  Cost: one ``str.replace`` per path.

    Examples
    --------
    >>> as_given("/w/lib.gds: cell A: no such cell", {"/w/lib.gds": "lib.gds"})
    'lib.gds: cell A: no such cell'
    """
    if text is None:
        return None
    for absolute in sorted(names, key=len, reverse=True):
        if absolute != names[absolute]:
            text = text.replace(absolute, names[absolute])
    return text


def _refusal(resolved: tuple, digests: tuple, version: str) -> str | None:
    """Why this worker cannot run the chunk (None: it can).  The files are
    hashed once per worker process."""
    from extract.writers.numbers import tool_version

    mine = tool_version()
    if mine != version:
        return f"runs dynshare {mine}, the client {version} (install the same version on the workers)"
    key = (resolved, digests)
    if key not in _DIGESTS:
        why = None
        for path, digest in zip(resolved, digests):
            if path is None:
                continue
            try:
                if file_digest(path) != digest:
                    why = f"reads other bytes at {path} than the client"
            except OSError as exc:
                why = f"cannot read {path} ({exc.strerror or exc})"
            if why is not None:
                why += ": the input files must be visible to every worker under the same path (a shared filesystem)"
                break
        _DIGESTS[key] = why
    return _DIGESTS[key]


def on_worker(version: str, work, resolved: tuple = (), digests: tuple = ()):
    """Worker side of every task: ``("ok", work())``, or ``("refused", why)``
    when this worker runs another dynshare version than the client's
    ``version`` or does not read the client's bytes at the paths
    ``resolved`` (their SHA-256 ``digests``).

    One task at a time per worker process (a lock): the checks hold the
    GIL, so threads of one worker would only take turns, and what a task
    opened (a library) is shared.

    Examples
    --------
    >>> from extract.writers.numbers import tool_version
    >>> on_worker(tool_version(), lambda: 42)
    ('ok', 42)
    >>> on_worker("0.0-other", lambda: 42)[1].startswith("worker a worker runs dynshare")
    True
    """
    with _LOCK:
        why = _refusal(tuple(resolved), tuple(digests), version)
        if why is not None:
            try:
                from distributed import get_worker

                who = get_worker().address
            except Exception:  # not inside a worker (called directly)
                who = "a worker"
            return "refused", f"worker {who} {why}"
        return "ok", work()


def _cluster_chunk(check, given: tuple, resolved: tuple, digests: tuple, version: str, cells: list[str]):
    """Worker side: ``("ok", outcomes)`` of ``cells``, or ``("refused", why)``."""
    names = {r: g for r, g in zip(resolved, given) if r is not None}

    def work():
        outcomes = []
        for cell in cells:
            out = check(resolved[0], resolved[1], cell, resolved[2])
            out.error = as_given(out.error, names)
            out.findings = [as_given(f, names) for f in out.findings]
            outcomes.append(out)
        return outcomes

    return on_worker(version, work, resolved, digests)


def _timeout(address: str) -> float:
    text = os.environ.get("DYNSHARE_SCHEDULER_TIMEOUT")
    if text is None:
        return CONNECT_TIMEOUT_S
    try:
        value = float(text)
    except ValueError:
        value = -1.0
    if not value > 0:
        raise InputError(address, f"DYNSHARE_SCHEDULER_TIMEOUT must be a positive number of seconds, got {text!r}",
                         "--scheduler")
    return value


@contextmanager
def cluster_client(address: str):
    """A Dask ``Client`` of the scheduler at ``address`` with at least one
    worker, closed on leaving.

    Raises
    ------
    InputError
        Dask distributed is not installed, the scheduler does not answer,
        or no worker joins within the timeout (:data:`CONNECT_TIMEOUT_S`):
        one line naming ADDRESS and ``--scheduler``.
    """
    import logging

    try:
        from distributed import Client
    except ImportError:
        raise InputError(address, "needs the Dask distributed package (pip install 'dynshare[cluster]')",
                         "--scheduler") from None
    # the scheduler's refusals are reported as one line below, not logged
    logging.getLogger("distributed").setLevel(logging.CRITICAL)
    timeout = _timeout(address)
    try:
        client = Client(address, timeout=timeout)
    except Exception as exc:
        raise InputError(address, f"cannot reach the scheduler ({type(exc).__name__}: {exc})",
                         "--scheduler") from None
    try:
        try:
            client.wait_for_workers(1, timeout=timeout)
        except Exception:
            raise InputError(address, f"no worker joined the scheduler within {timeout:g} s",
                             "--scheduler") from None
        yield client
    finally:
        client.close()


def run_chunks(client, address: str, task, args: tuple, items: list, chunking):
    """Run ``task(*args, chunk)`` on the workers for chunks of ``items``;
    yield ``(chunk, value)`` as they finish.

    Parameters
    ----------
    client : distributed.Client
        From :func:`cluster_client`.
    address : str
        The scheduler (for messages).
    task : callable
        Module-level (the workers import it by name); returns what
        :func:`on_worker` returns.
    args : tuple
        Sent with every chunk (pickled once per task).
    items : list
    chunking : callable
        ``chunking(items, workers)`` → list of lists, one task each;
        ``workers`` is how many the scheduler has at the start.

    Yields
    ------
    (list, object)
        A chunk and the ``work()`` value of :func:`on_worker` for it.

    Raises
    ------
    InputError
        A task failed (a lost worker, dynshare missing there) or a worker
        refused it: one line naming ADDRESS and ``--scheduler``.

    Notes
    -----
    One task per chunk, submitted at once; the scheduler hands them to
    workers as they free up (workers that join later take some too).
    Cost: a few ms of scheduling per chunk and the pickled arguments and
    results each way.
    """
    if not items:
        return
    from distributed import as_completed

    chunks = chunking(items, max(1, len(client.scheduler_info().get("workers", {}))))
    futures = {client.submit(task, *args, ch, pure=False): ch for ch in chunks}
    for fut in as_completed(list(futures)):
        try:
            kind, value = fut.result()
        except Exception as exc:
            raise InputError(address, f"a worker failed ({type(exc).__name__}: {exc}); the workers need "
                             "dynshare and its dependencies installed", "--scheduler") from None
        if kind == "refused":
            raise InputError(address, value, "--scheduler")
        yield futures[fut], value


def cluster_map(address: str, check, files: tuple, cells: list[str], chunking):
    """Outcomes of ``cells`` from the workers of the scheduler at
    ``address``, as they finish.

    Parameters
    ----------
    address : str
        The scheduler, e.g. ``tcp://10.0.0.5:8786``.
    check : callable
        ``check(path, tech_path, cell, constraints_path)`` gives a cell's
        outcome (with ``error`` and ``findings``) and never raises for bad
        input; a module-level function, so that the workers import it by
        name (:func:`analyze.cli.library.check_cell_in_library`).
    files : tuple
        ``(path, tech_path, constraints_path or None)`` as the user named
        them (relative to this process's working folder, or absolute).
    cells : list of str
    chunking : callable
        ``chunking(cells, workers)`` → list of lists of cells, one task
        each; ``workers`` is how many the scheduler has at the start.

    Yields
    ------
    CellOutcome
        In finishing order; the caller sorts them.

    Raises
    ------
    InputError
        The scheduler cannot be reached, has no worker, or a worker cannot
        run the chunk (another dynshare, the files not visible, a worker
        lost): one line naming ADDRESS and ``--scheduler``.

    Notes
    -----
    One task per chunk, submitted at once; the scheduler hands them to
    workers as they free up (workers that join later take some too).  Cost
    on top of the checks: a few ms of scheduling per chunk, a pickled list
    of outcomes each way, and one SHA-256 pass over the input files per
    worker process.

    Examples
    --------
    >>> list(cluster_map("tcp://127.0.0.1:1", print, ("lib.gds", "t.toml", None), [], None))  # nothing to send
    []
    """
    if not cells:
        return
    from extract.writers.numbers import tool_version

    given = tuple(files)
    resolved = tuple(None if p is None else os.path.abspath(p) for p in given)
    digests = tuple(None if p is None else file_digest(p) for p in resolved)
    with cluster_client(address) as client:
        args = (check, given, resolved, digests, tool_version())
        for _chunk, outcomes in run_chunks(client, address, _cluster_chunk, args, cells, chunking):
            yield from outcomes
