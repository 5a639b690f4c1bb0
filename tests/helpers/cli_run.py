"""Run the ``dynshare`` command line in a new process on this tree."""

import os
import subprocess
import sys

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))


def run_dynshare(*args, cwd=ROOT, env=None, timeout=300):
    """``python -m analyze ARGS`` with this tree first on PYTHONPATH:
    (exit status, stdout, stderr)."""
    full = dict(os.environ, PYTHONPATH=ROOT + os.pathsep + os.environ.get("PYTHONPATH", ""), **(env or {}))
    p = subprocess.run([sys.executable, "-m", "analyze", *map(str, args)], capture_output=True, text=True,
                       timeout=timeout, cwd=cwd, env=full)
    return p.returncode, p.stdout, p.stderr
