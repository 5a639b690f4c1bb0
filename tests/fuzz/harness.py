"""Run fuzz cases under caps and judge each run.

Each case runs in a child forked from this (already imported) process, so
a case costs milliseconds of start-up, not a fresh interpreter: the child
moves into a fresh folder holding the case's files, caps its address
space (4 GB by default) and its time (``signal.alarm``), sends stdout and
stderr to files and calls :func:`analyze.cli.main.main`.

A run is judged against the README's promises ("Hostile and broken
inputs"): the child was not killed (a signal is a crash, SIGALRM a hang);
the exit status is 0, 1 or 2; with 2, standard error is exactly one line
``error: ...`` under 300 characters that is no internal error; with 0 or
1, every output the case asked for exists, with 2 none does; every JSON
output parses as strict JSON (no NaN); no input changed and no temporary
file is left.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import resource
import signal
import shutil
import tempfile
import time
from dataclasses import dataclass

__all__ = ["Verdict", "run_case", "run_many", "names_no_place"]

#: A layout error names its place: a record and byte offset, a cell, or byte 0 (not a layout at all).
#: Source: the README, "Hostile and broken inputs" (``error: FILE: PLACE: what``).
PLACE = re.compile(r"error: cell\.(gds|oas): (record \d+ \(byte \d+|cell \S|byte 0:)")


def names_no_place(verdict) -> bool:
    """A layout run that ended in an error line naming no place (choosing
    among several top cells is a question, not a fault: it needs none)."""
    return (verdict.kind in ("gds", "oasis") and verdict.status == 2 and not PLACE.match(verdict.stderr)
            and "top cells, choose one with --cell" not in verdict.stderr)


@dataclass
class Verdict:
    kind: str
    seed: int
    status: int | None
    problem: str | None  # None: the run kept every promise
    seconds: float
    stderr: str


def _strict(text: str):
    def refuse(name):
        raise ValueError(f"not JSON: {name}")
    return json.loads(text, parse_constant=refuse)


def _child(case, folder: str, mem_bytes: int, seconds: int) -> None:
    os.chdir(folder)
    out = os.open("stdout", os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
    err = os.open("stderr", os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
    os.dup2(out, 1)
    os.dup2(err, 2)
    try:
        resource.setrlimit(resource.RLIMIT_AS, (mem_bytes, mem_bytes))
    except (ValueError, OSError):
        pass
    os.environ.update(case.env)
    signal.signal(signal.SIGALRM, signal.SIG_DFL)
    signal.alarm(seconds)
    code = 99
    try:
        import sys
        from analyze.cli.main import main

        sys.stdout = open(1, "w", closefd=False)
        sys.stderr = open(2, "w", closefd=False)
        code = main(list(case.argv))
        sys.stdout.flush()
        sys.stderr.flush()
    except BaseException as exc:  # anything escaping main() is a failure of the promise
        try:
            os.write(2, f"ESCAPED {type(exc).__name__}: {exc}\n".encode())
        except OSError:
            pass
        code = 98
    os._exit(code)


def _start(case, mem_bytes, seconds):
    folder = tempfile.mkdtemp(prefix="dynshare-fuzz-")
    for name, data in case.files.items():
        with open(os.path.join(folder, name), "wb") as fh:
            fh.write(data)
    before = {n: hashlib.sha256(d).hexdigest() for n, d in case.files.items()}
    pid = os.fork()
    if pid == 0:
        _child(case, folder, mem_bytes, seconds)
    return pid, folder, before, time.monotonic()


def _judge(case, folder, before, status, elapsed) -> Verdict:
    def read(name):
        try:
            with open(os.path.join(folder, name), encoding="utf-8", errors="replace") as fh:
                return fh.read()
        except OSError:
            return ""

    err = read("stderr")
    problem = None
    code = None
    if os.WIFSIGNALED(status):
        sig = os.WTERMSIG(status)
        problem = "hang (time cap)" if sig == signal.SIGALRM else f"crash (signal {sig})"
    else:
        code = os.WEXITSTATUS(status)
        lines = err.strip("\n").split("\n") if err.strip() else []
        if code not in (0, 1, 2):
            problem = f"exit status {code}"
        elif "Traceback" in err or "internal error" in err:
            problem = "internal error"
        elif code == 2 and (len(lines) != 1 or not lines[0].startswith("error: ")):
            problem = f"{len(lines)} stderr lines with exit 2"
        elif code == 2 and len(lines[0]) >= 300:
            problem = f"error line of {len(lines[0])} characters"
        elif code != 2 and any(ln.startswith("error:") for ln in lines):
            problem = "error line without exit 2"
    if problem is None and code is not None:
        present = [o for o in case.outputs if os.path.exists(os.path.join(folder, o))]
        if code in (0, 1) and len(present) != len(case.outputs):
            problem = f"missing outputs {sorted(set(case.outputs) - set(present))}"
        elif code == 2 and present:
            problem = f"outputs left after exit 2: {present}"
        json_outputs = {case.argv[i + 1] for i, a in enumerate(case.argv[:-1]) if a == "--json"}
        for o in present:
            if o in json_outputs:
                try:
                    _strict(read(o))
                except ValueError as exc:
                    problem = f"{o}: {exc}"
        if "-" in case.argv and code in (0, 1) and case.argv[case.argv.index("-") - 1] == "--json":
            try:
                _strict(read("stdout"))
            except ValueError as exc:
                problem = f"stdout JSON: {exc}"
    if problem is None:
        for name, digest in before.items():
            path = os.path.join(folder, name)
            if not os.path.isfile(path):
                problem = f"input {name} gone"
            else:
                with open(path, "rb") as fh:
                    if hashlib.sha256(fh.read()).hexdigest() != digest:
                        problem = f"input {name} changed"
        left = [n for n in os.listdir(folder) if n.startswith(".dynshare-")]
        if left:
            problem = f"temporary files left: {left}"
    shutil.rmtree(folder, ignore_errors=True)
    return Verdict(case.kind, case.seed, code, problem, elapsed, err.strip()[:400])


def run_case(case, mem_bytes: int = 4 << 30, seconds: int = 30) -> Verdict:
    """Run one case and judge it."""
    return run_many([case], 1, mem_bytes, seconds)[0]


def run_many(cases, jobs: int = 2, mem_bytes: int = 4 << 30, seconds: int = 30) -> list[Verdict]:
    """Run ``cases`` with up to ``jobs`` children at a time; verdicts in case order."""
    pending = list(enumerate(cases))
    running: dict[int, tuple] = {}
    verdicts: dict[int, Verdict] = {}
    while pending or running:
        while pending and len(running) < jobs:
            i, case = pending.pop(0)
            pid, folder, before, t0 = _start(case, mem_bytes, seconds)
            running[pid] = (i, case, folder, before, t0)
        pid, status = os.wait()
        if pid not in running:
            continue
        i, case, folder, before, t0 = running.pop(pid)
        verdicts[i] = _judge(case, folder, before, status, time.monotonic() - t0)
    return [verdicts[i] for i in range(len(cases))]
