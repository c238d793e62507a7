"""Pausing Python's cyclic garbage collector while many small records are made.

A large audit makes hundreds of thousands of findings (frozen dataclasses that refer to shared
modes and excitations, never to themselves) and the text of each. While they accumulate, every
full collection walks all of them again, which on a 20,000-panel project costs several seconds
and frees nothing. Reference counting still frees everything as usual while the collector is
paused; any cycle made meanwhile is collected once it resumes.
"""

from __future__ import annotations

import gc
from collections.abc import Iterator
from contextlib import contextmanager


@contextmanager
def collector_paused() -> Iterator[None]:
    """Pause the cyclic collector inside the block (restored as it was, also on error)."""
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()
