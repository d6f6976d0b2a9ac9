"""Lazily made thread pools shared by the package (one per purpose, made on first use)."""

from __future__ import annotations

import threading
from concurrent.futures import Future, ThreadPoolExecutor
from concurrent.futures import wait as _wait

_POOLS: dict[str, ThreadPoolExecutor] = {}
_LOCK = threading.Lock()


def pool(name: str, workers: int) -> ThreadPoolExecutor:
    """The pool called ``name`` (threads ``floorwidget-<name>``), made on first use."""
    with _LOCK:
        p = _POOLS.get(name)
        if p is None:
            p = _POOLS[name] = ThreadPoolExecutor(max_workers=workers,
                                                  thread_name_prefix=f"floorwidget-{name}")
        return p


def settled(f: Future | None, timeout: float | None = None) -> bool:
    """Wait up to ``timeout`` seconds for ``f``; ``True`` when it is done (or there is none)."""
    if f is None:
        return True
    _wait([f], timeout)
    return f.done()
