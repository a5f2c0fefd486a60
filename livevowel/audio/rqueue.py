"""A bounded hand-off queue that drops the oldest item instead of blocking.

Built on :class:`collections.deque` with ``maxlen``: in CPython ``append``
and ``popleft`` are atomic (they run under the interpreter lock without
calling back into Python), so one producer thread and one consumer thread
need no lock of their own. When the queue is full the oldest item falls out
and :attr:`dropped` counts it (the count may be off by one under a race
between a full check and a concurrent pop, which only makes it conservative).
"""

from __future__ import annotations

from collections import deque
from typing import Generic, Iterable, TypeVar

T = TypeVar("T")


class DropOldestQueue(Generic[T]):
    """Bounded FIFO; ``put`` never blocks, ``get_all`` empties it.

    Parameters
    ----------
    maxlen : int
        Capacity in items (at least 1).
    """

    def __init__(self, maxlen: int) -> None:
        if int(maxlen) < 1:
            raise ValueError(f"maxlen must be at least 1, got {maxlen}")
        self.maxlen = int(maxlen)
        self._d: deque = deque(maxlen=self.maxlen)
        self.dropped = 0
        self.put_count = 0

    def put(self, item: T) -> None:
        """Append; if full, the oldest item is discarded and counted."""
        if len(self._d) >= self.maxlen:
            self.dropped += 1
        self._d.append(item)
        self.put_count += 1

    def put_many(self, items: Iterable[T]) -> None:
        """``put`` each item in order."""
        for item in items:
            self.put(item)

    def get(self) -> T | None:
        """The oldest item, or ``None`` when empty."""
        try:
            return self._d.popleft()
        except IndexError:
            return None

    def get_all(self) -> list[T]:
        """Every item now queued, oldest first (the queue is left empty)."""
        out = []
        pop = self._d.popleft
        while True:
            try:
                out.append(pop())
            except IndexError:
                return out

    def __len__(self) -> int:
        return len(self._d)
