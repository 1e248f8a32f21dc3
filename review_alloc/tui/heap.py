"""Keeping the interpreter's full garbage collections off the chair's keys.

A full (oldest generation) collection walks every tracked object: on the 1,500-paper sample
that is some 230,000 objects (the loaded libraries, the session and its revisions, the tables'
rows and Textual's line caches) and takes 0.15-0.3 s, and Python starts one whenever enough new
objects have survived - that is, in the middle of whatever key the chair pressed. Almost all of
those objects live as long as the app does, so the app sets them aside with `gc.freeze()`
once they have settled: at start, and then every second after collecting the young garbage
(a few milliseconds). Full collections then walk only what is new and stay short.

The price: a reference cycle that becomes garbage after it was set aside (a closed dialog, a
faded notice) is freed only when the app ends (`release`), not before; the sessions and
tables, the bulk of the memory, have no cycles and are freed as usual by reference counting.
"""

from __future__ import annotations

import gc

SETTLE_EVERY = 1.0
"""Seconds between two settlings of the heap while the app runs."""


def start() -> None:
    """Collect everything once and set every live object aside (the app has just opened)."""
    gc.collect()
    gc.freeze()


def settle() -> None:
    """Collect the young garbage, then set the objects that survived aside."""
    gc.collect(1)
    gc.freeze()


def release() -> None:
    """Hand every object set aside back to the collector (the app is closing)."""
    gc.unfreeze()
