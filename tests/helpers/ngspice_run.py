"""Run ngspice in batch mode and read back measured values.

Used only by the tests (ngspice, Debian package ``ngspice``, is the
reference simulator).  A deck's ``.control`` block should ``print`` or
``echo`` lines of the form ``NAME = VALUE``; :func:`run_deck` returns them
as a dict of floats.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import tempfile

import pytest

__all__ = ["have_ngspice", "require_ngspice", "run_deck"]

_VALUE = re.compile(r"^\s*([A-Za-z_][\w.]*)\s*=\s*([-+0-9.eE]+)", re.M)


def have_ngspice() -> bool:
    return shutil.which("ngspice") is not None


def require_ngspice() -> None:
    """Skip the calling test when ngspice is missing, except under CI
    (``CI=true``), where a missing reference simulator is a failure."""
    if have_ngspice():
        return
    if os.environ.get("CI", "").lower() == "true":
        pytest.fail("ngspice is required when CI=true (apt-get install -y ngspice)")
    pytest.skip("ngspice not installed")


def run_deck(deck: str, timeout: float = 120.0) -> dict[str, float]:
    """Run ``deck`` with ``ngspice -b`` and return every ``NAME = VALUE``
    it printed (names lower-cased).  Raises AssertionError with the
    simulator's output when it fails or prints nothing."""
    require_ngspice()
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "deck.cir")
        with open(path, "w") as fh:
            fh.write(deck)
        proc = subprocess.run(
            ["ngspice", "-b", path], capture_output=True, text=True, timeout=timeout, cwd=tmp
        )
    out = proc.stdout + proc.stderr
    values = {m.group(1).lower(): float(m.group(2)) for m in _VALUE.finditer(proc.stdout)}
    if not values:
        raise AssertionError(f"ngspice printed no values:\n{out[-3000:]}")
    return values
