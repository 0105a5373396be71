"""Finished results of costly requests about one cell version, kept for the next asker.

A page reload asks again for the same joint maps and the same target check of
the same cell version; each :class:`~posebridge.api.cell_store.CellSnapshot`
keeps a :class:`ResultMemo`, so the answer is served from memory instead of
computed again. The memo belongs to the snapshot: any change of the cell makes
a new snapshot with an empty memo, so a kept result can never be out of date.
Entries are keyed by what was asked (the request's kind and canonical JSON)
and the oldest used one is dropped beyond :data:`MEMO_ENTRIES`.
"""

from __future__ import annotations

import threading
from collections import OrderedDict

from pydantic import BaseModel

__all__ = ["MEMO_ENTRIES", "ResultMemo"]

MEMO_ENTRIES = 16
"""Results kept per cell version (joint maps of a few joint pairs and hold values, the check)."""


class ResultMemo:
    """A small least-recently-used store of results, safe to use from several threads."""

    def __init__(self, entries: int = MEMO_ENTRIES) -> None:
        self._entries = entries
        self._results: OrderedDict[tuple[str, str], BaseModel] = OrderedDict()
        self._lock = threading.Lock()

    def get(self, kind: str, request: str) -> BaseModel | None:
        """Return the kept result of ``kind`` for ``request`` (canonical JSON), or None."""
        with self._lock:
            result = self._results.get((kind, request))
            if result is not None:
                self._results.move_to_end((kind, request))
            return result

    def put(self, kind: str, request: str, result: BaseModel) -> None:
        """Keep ``result`` of ``kind`` for ``request``, dropping the least recently used."""
        with self._lock:
            self._results[(kind, request)] = result
            self._results.move_to_end((kind, request))
            while len(self._results) > self._entries:
                self._results.popitem(last=False)
