"""Per-part words kept as small integer codes, and per-part details made on demand.

A check over a million parts has a status per part (``pass``, ``fail``, ``unknown``)
and sometimes a side note (``toward V+``). As numpy strings those cost tens of bytes
per part and a tenth of a second per million to build; as ``int8`` codes into a short
tuple of words they cost one byte (nothing at all when every part has the same word)
and a word is looked up only for the rows that are shown.

Likewise the intermediate values a check keeps for ``picker why`` (the gain at DC, the
phase at the top frequency, ...) are computed when first read, not for every part of
every ``pick``.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Mapping, Sequence
from typing import Any

import numpy as np
import numpy.typing as npt

Array = npt.NDArray[np.float64]
Codes = npt.NDArray[np.int8]


class Words(Sequence[str]):
    """One word per part, stored as codes into ``words``.

    Reads like a sequence of str: ``w[i]`` is a word, ``w[mask]`` and ``w[rows]`` are
    Words again, ``w == "fail"`` is a boolean array, ``np.asarray(w)`` a string array.
    ``codes`` may be given as a function, called when the words are first read (a note
    most picks never show costs nothing).
    """

    __slots__ = ("_codes", "_make", "words")

    def __init__(self, codes: npt.ArrayLike | Callable[[], npt.ArrayLike],
                 words: Sequence[str]) -> None:
        self._make = codes if callable(codes) else None
        self._codes: Codes | None = None if callable(codes) else np.asarray(codes, np.int8)
        self.words: tuple[str, ...] = tuple(words)

    @property
    def codes(self) -> Codes:
        if self._codes is None:
            assert self._make is not None
            self._codes = np.asarray(self._make(), dtype=np.int8)
            self._make = None
        return self._codes

    @classmethod
    def same(cls, word: str, n: int) -> Words:
        """The same word for n parts (a read-only broadcast: no memory per part)."""
        return cls(np.broadcast_to(np.int8(0), (n,)), (word,))

    def __len__(self) -> int:
        return len(self.codes)

    def __getitem__(self, index: Any) -> Any:
        if isinstance(index, int | np.integer):
            return self.words[self.codes[index]]
        return Words(self.codes[index], self.words)

    def __iter__(self) -> Iterator[str]:
        words = self.words
        return (words[c] for c in self.codes.tolist())

    def code(self, word: str) -> int:
        """The code of ``word`` (-1 when no part has it)."""
        return self.words.index(word) if word in self.words else -1

    def __eq__(self, other: object) -> Any:
        if isinstance(other, str):
            return self.codes == self.code(other)
        if isinstance(other, Words | Sequence):
            return list(self) == list(other)
        return NotImplemented

    def __ne__(self, other: object) -> Any:
        if isinstance(other, str):
            return self.codes != self.code(other)
        eq = self.__eq__(other)
        return eq if eq is NotImplemented else not eq

    __hash__ = None  # type: ignore[assignment]

    def __array__(self, dtype: Any = None, copy: Any = None) -> npt.NDArray[Any]:
        out = np.asarray(self.words if self.words else ("",))[self.codes]
        return out if dtype is None else out.astype(dtype)

    def __repr__(self) -> str:
        shown = list(self[:6]) if len(self) > 6 else list(self)
        return f"Words({shown}{' ...' if len(self) > 6 else ''}, n={len(self)})"


def choose(pick_b: npt.NDArray[np.bool_], a: Words, b: Words) -> Words:
    """Per part, b's word where ``pick_b`` else a's (one word list for both)."""
    if a.words == b.words:
        words, b_codes = a.words, b.codes
    else:
        words = a.words + tuple(w for w in b.words if w not in a.words)
        remap = np.array([words.index(w) for w in b.words], dtype=np.int8)
        b_codes = remap[b.codes]
    ca, cb = _constant(a.codes), _constant(b_codes)
    if ca is not None and cb is not None:  # one word per side (e.g. "toward V+"/"toward V-")
        if ca == cb:
            return Words(a.codes, words)
        if (ca, cb) == (0, 1):
            return Words(np.asarray(pick_b, dtype=bool).view(np.int8), words)
    return Words(np.where(pick_b, b_codes, a.codes), words)


def _constant(codes: Codes) -> int | None:
    """The code of a one-word broadcast (stride 0), else None."""
    if codes.ndim == 1 and len(codes) and codes.strides == (0,):
        return int(codes[0])
    return None


Value = Array | Callable[[], Array]


class Details(Mapping[str, Array]):
    """Named per-part arrays, each given as an array or a function computed on first read."""

    __slots__ = ("_items",)

    def __init__(self, items: Mapping[str, Value] | None = None) -> None:
        self._items: dict[str, Value] = dict(items._items if isinstance(items, Details)
                                             else (items or {}))

    def __getitem__(self, name: str) -> Array:
        value = self._items[name]
        if callable(value):
            value = value()
            self._items[name] = value
        return value

    def __iter__(self) -> Iterator[str]:
        return iter(self._items)

    def __len__(self) -> int:
        return len(self._items)

    def merged(self, other: Mapping[str, Value]) -> Details:
        """Both sets of details (other's win on a name clash), nothing computed."""
        out = Details(self)
        out._items.update(other._items if isinstance(other, Details) else other)
        return out


__all__ = ["Details", "Words", "choose"]
