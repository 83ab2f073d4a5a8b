"""Bounded per-process caches of solver state, keyed by content, and one call that empties them all.

Solver set-up that many solves share (a shooter with its coarse scan, an atlas, an onset and its
condensed family, parsed couplings) is built once per process and kept in a :class:`Memo`. The
key of an entry is the full content its value is built from (a model's spec and the solver
settings that matter), never an object's identity or the order of requests, and the value is a
function of the key alone; so a result does not depend on which requests came before, or on
whether an entry was dropped and built again.

Each Memo holds at most ``maxsize`` entries; when full it drops the least recently used one.
:func:`clear_all` empties every Memo of the process (a cold start for benchmarks and tests).
"""
from __future__ import annotations

import weakref
from collections import OrderedDict
from collections.abc import Callable, Hashable
from typing import Any

#: every Memo of the process (weakly held: a Memo that is no longer referenced drops out)
_INSTANCES: weakref.WeakSet = weakref.WeakSet()


class Memo:
    """A keyed cache of at most ``maxsize`` values, least recently used dropped first.

    Parameters
    ----------
    name : str
        What the entries are (for ``repr`` and diagnostics).
    maxsize : int
        Largest number of entries kept (>= 1).
    """

    def __init__(self, name: str, maxsize: int):
        if maxsize < 1:
            raise ValueError(f"Memo {name!r}: maxsize must be >= 1, got {maxsize}")
        self.name, self.maxsize = name, maxsize
        self._entries: OrderedDict = OrderedDict()
        _INSTANCES.add(self)

    def get(self, key: Hashable, build: Callable[[], Any]) -> Any:
        """The value stored under ``key``; built by ``build()`` and stored first when missing. An
        exception raised by ``build`` propagates and stores nothing."""
        try:
            self._entries.move_to_end(key)
            return self._entries[key]
        except KeyError:
            pass
        value = build()
        self._entries[key] = value
        while len(self._entries) > self.maxsize:
            self._entries.popitem(last=False)
        return value

    def __contains__(self, key: Hashable) -> bool:
        return key in self._entries

    def __len__(self) -> int:
        return len(self._entries)

    def clear(self) -> None:
        """Drop every entry."""
        self._entries.clear()

    def __repr__(self) -> str:
        return f"Memo({self.name!r}, {len(self)}/{self.maxsize} entries)"


def clear_all() -> None:
    """Empty every :class:`Memo` of the process."""
    for memo in list(_INSTANCES):
        memo.clear()


__all__ = ["Memo", "clear_all"]
