"""Ordered lists of parts that cost one index array until they are read.

A pick over a catalogue sorts hundreds of thousands of parts into accepted, rejected
and unverified; only the first few of each are shown. ``Entries`` keeps the order as
row numbers and builds an entry (label, failing checks, margin) only for the rows that
are read. ``order_rows`` sorts rows by numeric keys with numpy (ties by label).
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Sequence
from typing import Any, Generic, TypeVar, overload

import numpy as np
import numpy.typing as npt

T = TypeVar("T")
Rows = npt.NDArray[np.intp]
_BATCH = 1024


class Entries(Sequence[T], Generic[T]):
    """A sequence of entries in a fixed order, each made from its row when read.

    Compares equal to a list with the same entries; slices are Entries again.
    """

    __slots__ = ("_make", "rows")

    def __init__(self, rows: npt.ArrayLike, make: Callable[[Rows], list[T]]) -> None:
        self.rows: Rows = np.asarray(rows, dtype=np.intp)
        self._make = make

    def __len__(self) -> int:
        return len(self.rows)

    @overload
    def __getitem__(self, index: int) -> T: ...

    @overload
    def __getitem__(self, index: slice) -> Entries[T]: ...

    def __getitem__(self, index: int | slice) -> T | Entries[T]:
        if isinstance(index, slice):
            return Entries(self.rows[index], self._make)
        row = self.rows[index]  # IndexError past the end, negative from the end
        return self._make(np.array([row], dtype=np.intp))[0]

    def __iter__(self) -> Iterator[T]:
        for start in range(0, len(self.rows), _BATCH):
            yield from self._make(self.rows[start:start + _BATCH])

    def __eq__(self, other: object) -> bool:
        if isinstance(other, Sequence) and not isinstance(other, str):
            return len(self) == len(other) and list(self) == list(other)
        return NotImplemented

    __hash__ = None  # type: ignore[assignment]

    def __repr__(self) -> str:
        return f"Entries(n={len(self)})"


def label_rank(labels: npt.NDArray[Any]) -> Rows:
    """Each label's place in sorted order (rows read ORDER BY label are already sorted)."""
    n = len(labels)
    if n < 2 or bool(np.all(labels[1:] >= labels[:-1])):
        return np.arange(n, dtype=np.intp)
    rank = np.empty(n, dtype=np.intp)
    rank[np.argsort(labels, kind="stable")] = np.arange(n, dtype=np.intp)
    return rank


def order_rows(rows: Rows, keys: Sequence[npt.NDArray[np.float64]], rank: Rows) -> Rows:
    """``rows`` sorted by ``keys`` (first key first, ascending, NaN last), ties by label rank.

    The keys and rank are per part (indexed by row).
    """
    if len(rows) < 2:
        return rows
    cols = [rank[rows]] + [np.asarray(k)[rows] for k in reversed(keys)]
    return rows[np.lexsort(cols)]  # type: ignore[no-any-return]


__all__ = ["Entries", "label_rank", "order_rows"]
