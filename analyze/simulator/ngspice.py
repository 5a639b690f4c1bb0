"""Running ngspice in batch mode and reading back what a deck printed.

A deck is plain SPICE text whose ``.control`` block prints the numbers the
caller wants, with ``print NAME`` (``NAME = VALUE``) or
``print line NAME`` (``NAME = ( V1 V2 ... )``), and writes tables with
``wrdata FILE VEC ...``.  :func:`run_deck` runs it with ``ngspice -b`` in
a fresh temporary folder and returns the values as numpy arrays.

Several analyses in one ngspice process is the normal use: the model
library is loaded once, and the control block runs ``op``, ``dc``, ``ac``,
``tran`` or ``alter`` as often as it likes, printing under distinct names.
:func:`control` writes the block's boilerplate (no prompts, twelve
digits, ``quit``) around the caller's lines, and :func:`deck` a whole
deck around a model include, a circuit and a control block.

ngspice's exit status is not a reliable verdict (it is 1 for a deck with
only a control block, 0 for some failed analyses), so success is judged
from the output: every name the caller expects must have been printed,
and the simulator's own complaints ("timestep too small", "singular
matrix", ...) are errors.

Examples
--------
>>> text = deck("divider", None, ["V1 a 0 1", "R1 a b 1k", "R2 b 0 1k"],
...             ["op", "print v(b)"])
>>> text.splitlines()[0], text.splitlines()[-1]
('* divider', '.end')
>>> parse_values("v(b) = 5.000000000000e-01\\nx = ( 1 2\\n 3 )\\n")["x"]
array([1., 2., 3.])
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import tempfile
import threading
from collections.abc import Iterable
from dataclasses import dataclass, field

import numpy as np

from extract.errors import InputError

__all__ = [
    "NGSPICE",
    "SimulationResult",
    "control",
    "deck",
    "parse_values",
    "read_table",
    "run_deck",
    "runs_started",
]

#: The program run; tests may point it elsewhere.
NGSPICE = "ngspice"

#: Messages of ngspice that mean an analysis or the deck failed.  A
#: transient "singular matrix" warning during gmin stepping is not one
#: (stepping may still succeed); the abort that follows a real failure is.
_FAILURES = re.compile(
    r"^\s*error\b|timestep too small|simulation\(s\) aborted|simulation interrupted|"
    r"dc solution failed|undefined parameter|unknown subckt|could not find include file|"
    r"unable to find definition of model|could not find a valid modelname|fatal",
    re.I | re.M,
)
#: Lines worth quoting when a run failed.
_TELLING = re.compile(_FAILURES.pattern + r"|singular matrix|no convergence|stepping failed", re.I)
_NONCONVERGENCE = re.compile(r"timestep too small|singular matrix|no convergence|stepping failed|"
                             r"dc solution failed", re.I)
_NUMBER = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"
_SCALAR = re.compile(rf"^([A-Za-z_][\w.()#:\[\]@]*) = ({_NUMBER})\s*$", re.M)
_LINE = re.compile(rf"^([A-Za-z_][\w.()#:\[\]@]*) = \(\s*((?:{_NUMBER}\s*)*)\)", re.M)

_lock = threading.Lock()
_runs = 0


def runs_started() -> int:
    """How many ngspice processes this Python process has started.

    Returns
    -------
    int
        A counter, so callers and tests can see that a cached result did
        not simulate again.

    Examples
    --------
    >>> runs_started() >= 0
    True
    """
    return _runs


@dataclass
class SimulationResult:
    """What one ngspice run printed.

    Parameters
    ----------
    values : dict of str to numpy.ndarray
        Every ``NAME = VALUE`` (one element) and ``NAME = ( ... )`` printed,
        names in lower case; a name printed twice keeps the last value.
    tables : dict of str to numpy.ndarray
        Each requested ``wrdata`` file, rows by columns.
    columns : dict of str to list of str
        Column names of each table (from ``set wr_vecnames``), or ``[]``.
    log : str
        Standard output and error of the run.
    """

    values: dict[str, np.ndarray] = field(default_factory=dict)
    tables: dict[str, np.ndarray] = field(default_factory=dict)
    columns: dict[str, list[str]] = field(default_factory=dict)
    log: str = ""

    def scalar(self, name: str) -> float:
        """The single value printed as ``name`` (case-insensitive)."""
        return float(self.values[name.lower()][-1])


def control(lines: Iterable[str]) -> list[str]:
    """A ``.control`` block around ``lines``.

    Parameters
    ----------
    lines : iterable of str
        Control commands: analyses, ``let``, ``print``, ``alter``, ``wrdata``.

    Returns
    -------
    list of str
        ``.control``, settings (no prompts, 12 digits, one scale column
        and a header line in ``wrdata`` files), ``lines``, ``quit``, ``.endc``.

    Examples
    --------
    >>> control(["op"])[-3:]
    ['op', 'quit', '.endc']
    """
    return [".control", "set noaskquit", "set numdgt=12", "set wr_singlescale", "set wr_vecnames",
            *lines, "quit", ".endc"]


def deck(title: str, include: str | None, circuit: Iterable[str], commands: Iterable[str],
         options: Iterable[str] = ()) -> str:
    """A whole deck: title, model include, circuit, control block.

    Parameters
    ----------
    title : str
        One line; written as a comment (ngspice takes the first line as the title).
    include : str or None
        Path of a model file to ``.include`` (quoted), or None.
    circuit : iterable of str
        Element and ``.param`` lines.
    commands : iterable of str
        The control commands (see :func:`control`).
    options : iterable of str
        Extra dot lines before the circuit (``.temp 27``, ``.option ...``).

    Returns
    -------
    str
    """
    head = [f"* {title}"]
    if include:
        head.append(f'.include "{include}"')
    return "\n".join([*head, *options, *circuit, *control(commands), ".end"]) + "\n"


def parse_values(text: str) -> dict[str, np.ndarray]:
    """The ``NAME = VALUE`` and ``NAME = ( V ... )`` lines of ngspice output.

    Parameters
    ----------
    text : str
        ngspice's standard output.

    Returns
    -------
    dict of str to numpy.ndarray
        Lower-case names; a later line with the same name wins.

    Notes
    -----
    Two regular-expression scans; linear in the output length.
    """
    out: dict[str, tuple[int, np.ndarray]] = {}
    for m in _SCALAR.finditer(text):
        out[m.group(1).lower()] = (m.start(), np.array([float(m.group(2))]))
    for m in _LINE.finditer(text):
        values = np.array([float(v) for v in m.group(2).split()])
        name = m.group(1).lower()
        if name not in out or out[name][0] < m.start():
            out[name] = (m.start(), values)
    return {k: v for k, (_, v) in out.items()}


def read_table(path: str) -> tuple[np.ndarray, list[str]]:
    """A ``wrdata`` file as an array, with its header names when present.

    Parameters
    ----------
    path : str

    Returns
    -------
    (numpy.ndarray, list of str)
        Rows by columns (2-D even for one row); the names of the header
        line written under ``set wr_vecnames``, else ``[]``.
    """
    with open(path, encoding="utf-8", errors="replace") as fh:
        lines = [ln for ln in fh.read().splitlines() if ln.strip()]
    names: list[str] = []
    if lines and not re.match(rf"\s*{_NUMBER}(\s|$)", lines[0]):
        names = lines[0].split()
        lines = lines[1:]
    rows = [[float(v) for v in ln.split()] for ln in lines]
    return np.array(rows, dtype=float).reshape(len(rows), -1), names


def _last_message(log: str) -> str:
    """The simulator's most telling line: the last failure message, else
    the last non-empty line."""
    lines = [ln.strip().strip('"') for ln in log.splitlines() if ln.strip()]
    generic = re.compile(r"aborted|interrupted|error on line|fatal error in ngspice", re.I)
    bad = [ln for ln in lines if _TELLING.search(ln) and not generic.search(ln)]
    bad = bad or [ln for ln in lines if _TELLING.search(ln)]
    if bad:
        return bad[-1][:200]
    return lines[-1][:200] if lines else "no output"


def _environment() -> dict:
    """The environment ngspice runs in: the caller's, with
    ``OMP_NUM_THREADS=1`` unless it is set (see :func:`run_deck`)."""
    env = dict(os.environ)
    env.setdefault("OMP_NUM_THREADS", "1")
    return env


def run_deck(text: str, purpose: str, expect: Iterable[str] = (), tables: Iterable[str] = (),
             timeout: float = 600.0) -> SimulationResult:
    """Run a deck with ``ngspice -b`` and read what it printed.

    Parameters
    ----------
    text : str
        The deck (see :func:`deck`).  It runs in a temporary folder, so
        ``wrdata`` names are plain file names; includes must be absolute.
    purpose : str
        What the deck is for, in a few words; names the problem when the
        simulation fails (``"VT of sky130_fd_pr__nfet_01v8 at tt"``).
    expect : iterable of str
        Names that must appear among the printed values.
    tables : iterable of str
        ``wrdata`` file names to read back.
    timeout : float
        Seconds before the run is abandoned.

    Returns
    -------
    SimulationResult

    Raises
    ------
    InputError
        ``ngspice: not found on PATH`` when the program is missing; else,
        naming ``purpose``, when ngspice reports a failed analysis, times
        out, or does not print an expected value or write a table — with
        the simulator's last message.

    Notes
    -----
    One process per call; the cost is ngspice's (model loading dominates
    for foundry libraries, which is why callers put many analyses in one
    deck).  ngspice runs with ``OMP_NUM_THREADS=1`` unless the caller's
    environment sets it: Debian's ngspice is built with OpenMP, whose
    threads do not pay on the few devices of a deck here, and decks run
    side by side (``--simulate``) oversubscribe the cores with them (on
    our 2-core machine, 16 sky130 cases two decks at a time: a median
    6.9 s with the default threads, 4.2 s with one each; one deck at a
    time, one thread was no slower).
    """
    global _runs
    program = shutil.which(NGSPICE)
    if program is None:
        raise InputError("ngspice", "not found on PATH; install it (Debian: apt-get install ngspice)")
    expect = [e.lower() for e in expect]
    tables = list(tables)
    with tempfile.TemporaryDirectory(prefix="dynshare-sim-") as tmp:
        path = os.path.join(tmp, "deck.cir")
        with open(path, "w", encoding="utf-8") as fh:
            fh.write(text)
        with _lock:
            _runs += 1
        try:
            proc = subprocess.run([program, "-b", path], capture_output=True, text=True,
                                  timeout=timeout, cwd=tmp, errors="replace", env=_environment())
        except subprocess.TimeoutExpired:
            raise InputError(purpose, f"ngspice did not finish within {timeout:g} s") from None
        log = proc.stdout + "\n" + proc.stderr
        values = parse_values(proc.stdout)
        found_tables, columns = {}, {}
        for name in tables:
            file = os.path.join(tmp, name)
            if os.path.exists(file):
                found_tables[name], columns[name] = read_table(file)
    failure = _FAILURES.search(log)
    missing = [e for e in expect if e not in values] + [t for t in tables if t not in found_tables]
    if failure or missing:
        what = "did not converge" if _NONCONVERGENCE.search(log) else "failed"
        detail = f"; missing {', '.join(missing[:3])}" if missing and not failure else ""
        raise InputError(purpose, f"ngspice simulation {what}{detail}: {_last_message(log)}")
    return SimulationResult(values=values, tables=found_tables, columns=columns, log=log)
