"""Lazily made thread pools shared by the package (one per purpose, made on first use)."""

from __future__ import annotations

import threading
from concurrent.futures import ThreadPoolExecutor

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
