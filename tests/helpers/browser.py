"""Open pages in headless Chromium for the tests, and read its screenshots.

Chromium (Debian packages ``chromium`` and ``chromium-driver``) is driven
directly: ``--dump-dom`` prints the DOM the browser built from a file,
``--screenshot`` writes what it drew as a PNG.  Every run gets a fresh
profile directory and no network services.  :func:`read_png` is a small
PNG decoder (zlib plus the five row filters of the PNG specification,
ISO/IEC 15948 / W3C PNG, section 9), so the tests need no imaging library.

Tests that use this carry ``@pytest.mark.browser`` and call
:func:`require_chromium`: it skips them when Chromium is missing on a
developer machine but fails them when ``CI=true``.
"""

from __future__ import annotations

import os
import shutil
import struct
import subprocess
import tempfile
import zlib

import numpy as np
import pytest

__all__ = ["find_chromium", "require_chromium", "dump_dom", "screenshot", "read_png"]

_NAMES = ("chromium", "chromium-browser")
_FLAGS = (
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--disable-extensions",
    "--hide-scrollbars",
    "--mute-audio",
)


def find_chromium() -> str | None:
    """Path of the Chromium executable, or None."""
    for name in _NAMES:
        path = shutil.which(name) or (f"/usr/bin/{name}" if os.access(f"/usr/bin/{name}", os.X_OK) else None)
        if path:
            return path
    return None


def require_chromium() -> str:
    """The Chromium path; skip the test without it, fail under ``CI=true``."""
    path = find_chromium()
    if path:
        return path
    if os.environ.get("CI", "").lower() == "true":
        pytest.fail("chromium is required when CI=true (apt-get install -y chromium chromium-driver)")
    pytest.skip("chromium not installed")


def _run(args: list[str], timeout: float) -> subprocess.CompletedProcess:
    exe = require_chromium()
    with tempfile.TemporaryDirectory(prefix="dynshare-chromium-") as profile:
        proc = subprocess.run(
            [exe, *_FLAGS, f"--user-data-dir={profile}", *args],
            capture_output=True,
            timeout=timeout,
            stdin=subprocess.DEVNULL,
        )
    return proc


def _url(path: str) -> str:
    return "file://" + os.path.abspath(path)


def dump_dom(html_path: str, timeout: float = 120.0) -> str:
    """The DOM Chromium built from ``html_path``, serialised as HTML."""
    proc = _run(["--dump-dom", _url(html_path)], timeout)
    out = proc.stdout.decode("utf-8", "replace")
    if proc.returncode != 0 or "<html" not in out:
        raise AssertionError(f"chromium --dump-dom failed ({proc.returncode}):\n{proc.stderr.decode()[-3000:]}")
    return out


def screenshot(html_path: str, png_path: str, size: tuple[int, int] = (1000, 1400), timeout: float = 120.0) -> str:
    """Draw ``html_path`` at ``size`` (width, height px) into ``png_path``."""
    if os.path.exists(png_path):
        os.remove(png_path)
    proc = _run([f"--screenshot={os.path.abspath(png_path)}", f"--window-size={size[0]},{size[1]}",
                 _url(html_path)], timeout)
    if not os.path.exists(png_path):
        raise AssertionError(f"chromium wrote no screenshot ({proc.returncode}):\n{proc.stderr.decode()[-3000:]}")
    return png_path


def _paeth_rows(cur: bytearray, prev: bytes, bpp: int) -> None:
    for i in range(len(cur)):
        a = cur[i - bpp] if i >= bpp else 0
        b = prev[i]
        c = prev[i - bpp] if i >= bpp else 0
        p = a + b - c
        pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
        pred = a if pa <= pb and pa <= pc else (b if pb <= pc else c)
        cur[i] = (cur[i] + pred) & 0xFF


def read_png(path: str) -> np.ndarray:
    """Decode an 8-bit, non-interlaced PNG (grey, RGB, grey+alpha, RGBA).

    Returns
    -------
    numpy.ndarray
        ``(height, width, channels)`` uint8.

    Notes
    -----
    Chunks are read by the layout of the PNG specification (length, type,
    data, CRC); the IDAT data is inflated with zlib and each scanline
    un-filtered by its filter byte: 0 None, 1 Sub, 2 Up, 3 Average,
    4 Paeth (PNG spec section 9.2-9.4).  None, Sub and Up are vectorised;
    Average and Paeth run byte by byte.
    """
    with open(path, "rb") as fh:
        data = fh.read()
    if data[:8] != b"\x89PNG\r\n\x1a\n":
        raise ValueError(f"{path}: not a PNG file")
    pos, idat, header = 8, [], None
    while pos < len(data):
        (n,) = struct.unpack(">I", data[pos:pos + 4])
        kind, body = data[pos + 4:pos + 8], data[pos + 8:pos + 8 + n]
        pos += 12 + n
        if kind == b"IHDR":
            header = struct.unpack(">IIBBBBB", body)
        elif kind == b"IDAT":
            idat.append(body)
        elif kind == b"IEND":
            break
    if header is None:
        raise ValueError(f"{path}: no IHDR chunk")
    width, height, depth, colour, _, _, interlace = header
    channels = {0: 1, 2: 3, 4: 2, 6: 4}.get(colour)
    if depth != 8 or channels is None or interlace:
        raise ValueError(f"{path}: only 8-bit non-interlaced grey/RGB(A) PNG is supported")
    raw = zlib.decompress(b"".join(idat))
    stride = width * channels
    out = np.zeros((height, stride), dtype=np.uint8)
    prev = np.zeros(stride, dtype=np.uint8)
    for r in range(height):
        start = r * (stride + 1)
        ftype = raw[start]
        line = np.frombuffer(raw, dtype=np.uint8, count=stride, offset=start + 1)
        if ftype == 0:
            cur = line.copy()
        elif ftype == 1:
            cur = (np.cumsum(line.reshape(width, channels), axis=0, dtype=np.uint64) & 0xFF).astype(np.uint8).ravel()
        elif ftype == 2:
            cur = line + prev
        elif ftype == 3:
            buf = bytearray(line.tobytes())
            p = prev.tobytes()
            for i in range(stride):
                left = buf[i - channels] if i >= channels else 0
                buf[i] = (buf[i] + ((left + p[i]) >> 1)) & 0xFF
            cur = np.frombuffer(bytes(buf), dtype=np.uint8)
        elif ftype == 4:
            buf = bytearray(line.tobytes())
            _paeth_rows(buf, prev.tobytes(), channels)
            cur = np.frombuffer(bytes(buf), dtype=np.uint8)
        else:
            raise ValueError(f"{path}: bad filter type {ftype} in row {r}")
        out[r] = cur
        prev = cur
    return out.reshape(height, width, channels)
