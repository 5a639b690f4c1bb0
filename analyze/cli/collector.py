"""Python's cyclic garbage collector during one big run.

A block of a million transistors is millions of small records (nets,
devices, stages) that live until the command ends.  With the default
thresholds the collector walks the young ones after every 700
allocations and, as they pile up, the old generation too: a fifth of
the time of a whole ``check`` of such a block went there.
:func:`big_run` raises the young-generation threshold for the run, and
:func:`settled` moves everything alive into the permanent generation
(:func:`gc.freeze`) once a phase has built what the rest only reads, so
the collector never walks it again.  Garbage with reference cycles made
later is still collected, only less often.

Examples
--------
>>> import gc
>>> before = gc.get_threshold()
>>> with big_run():
...     settled()
...     gc.get_threshold()[0] >= 50_000
True
>>> gc.get_threshold() == before, gc.get_freeze_count()
(True, 0)
"""

from __future__ import annotations

import gc
from contextlib import contextmanager

__all__ = ["big_run", "settled", "YOUNG_THRESHOLD"]

#: Allocations between two collections of the youngest generation during a big run.
YOUNG_THRESHOLD = 50_000


@contextmanager
def big_run():
    """Raise the young-generation threshold for the block; on leaving,
    restore the thresholds and unfreeze what :func:`settled` froze."""
    before = gc.get_threshold()
    gc.set_threshold(max(YOUNG_THRESHOLD, before[0]), *before[1:])
    try:
        yield
    finally:
        gc.set_threshold(*before)
        gc.unfreeze()


def settled() -> None:
    """Everything alive now is kept until the run ends: never walk it again."""
    gc.freeze()
