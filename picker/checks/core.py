"""The data of a check: the parts' columns, one check's result over all parts, a table.

A check result is data: for each part a status (``pass``, ``fail``, ``unknown``), what
the stage needs, what the part has, and the margin (has/need, or need/has for limits
from above; >= 1 exactly when passing, NaN when unknown). Statuses, senses and side
notes are ``int8`` codes into a short tuple of words (at a million parts: 0.36 ms per
check instead of 13 ms for numpy strings); a word is looked up only for a row shown.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass, field, replace
from functools import cached_property
from typing import Any, Literal

import numpy as np
import numpy.typing as npt

from picker.fields import NUMERIC, tech_ib_double_c
from picker.quantities import Kind

Status = Literal["pass", "fail", "unknown"]
Array = npt.NDArray[np.float64]
Codes = npt.NDArray[np.int8]
Strings = npt.NDArray[np.object_]

#: Status words by code: 0 fail, 1 unknown, 2 pass (so the smaller code is the worse).
STATUS_WORDS: tuple[Status, ...] = ("fail", "unknown", "pass")


class Parts(Mapping[str, Array]):
    """The numeric columns of a parts table as float arrays (NaN = unknown).

    Built from a DataFrame indexed by label (Store.parts_frame) or from plain columns
    (``Parts.from_columns``). A field the table does not hold reads as all unknown.
    """

    def __init__(self, frame: Any) -> None:
        labels = frame.index.to_numpy(dtype=object)
        cols = {name: frame[name].to_numpy(dtype=float, na_value=np.nan)
                for name in NUMERIC if name in frame.columns}
        if "tech" in frame.columns and "ib_tech_double_c" not in cols:  # derived from text
            cols["ib_tech_double_c"] = np.array(
                [tech_ib_double_c(t) for t in frame["tech"].tolist()], dtype=float)
        self._set(labels, cols)

    @classmethod
    def from_columns(cls, labels: npt.ArrayLike, columns: Mapping[str, npt.ArrayLike]) -> Parts:
        """Parts from labels and float columns named by field (missing fields unknown)."""
        out = object.__new__(cls)
        out._set(np.asarray(labels, dtype=object),
                 {k: np.asarray(v, dtype=float) for k, v in columns.items() if k in NUMERIC})
        return out

    def _set(self, labels: npt.NDArray[Any], cols: dict[str, Array]) -> None:
        if len(labels) and not all(isinstance(x, str) for x in labels[:1000].tolist()):
            labels = np.array([str(x) for x in labels.tolist()], dtype=object)
        self.labels: Strings = labels
        self._cols = cols
        self._memo: dict[Any, Any] = {}

    def __getitem__(self, name: str) -> Array:
        col = self._cols.get(name)
        if col is None:
            if name not in NUMERIC:
                raise KeyError(name)
            if name == "available" and "qty" in self._cols:  # derived: on hand - reserved
                reserved = self._cols.get("reserved")
                col = self._cols["qty"] - (0.0 if reserved is None else reserved)
            else:
                col = np.full(len(self.labels), np.nan)
            self._cols[name] = col
        return col

    def __iter__(self) -> Iterator[str]:
        return iter(NUMERIC)

    def __len__(self) -> int:
        return len(self.labels)

    def memo(self, key: Any, make: Callable[[], Any]) -> Any:
        """A value computed once per Parts (e.g. the loop coefficients two checks share)."""
        if key not in self._memo:
            self._memo[key] = make()
        return self._memo[key]

    def forget(self) -> None:
        """Drop the memo (values two checks shared; recomputed if asked again)."""
        self._memo.clear()

    def take(self, index: npt.ArrayLike) -> Parts:
        """The same columns for a subset of rows."""
        idx = np.asarray(index)
        out = object.__new__(Parts)
        out._set(self.labels[idx], {k: v[idx] for k, v in self._cols.items()})
        return out

    def assuming(self, values: Mapping[str, float]) -> tuple[Parts, dict[str, npt.NDArray[np.bool_]]]:
        """These parts with ``values`` taken where a field is blank, and per field where
        that happened (the user's explicit assumption; outputs mark it)."""
        if not values:
            return self, {}
        cols = dict(self._cols)
        masks = {}
        for name, v in values.items():
            col = self[name]
            blank = np.isnan(col)
            masks[name] = blank
            cols[name] = np.where(blank, v, col)
        out = object.__new__(Parts)
        out._set(self.labels, cols)
        return out, masks

    def row(self, i: int) -> dict[str, float]:
        """Every known column of part i as plain floats (NaN = unknown)."""
        return {k: float(v[i]) for k, v in self._cols.items()}


@dataclass(frozen=True)
class Coded:
    """One word per part as int8 codes into ``words`` (``coded[i]`` is a word)."""

    codes: Codes
    words: tuple[str, ...]

    @classmethod
    def same(cls, word: str, n: int) -> Coded:
        """The same word for n parts (a read-only broadcast: no memory per part)."""
        return cls(np.broadcast_to(np.int8(0), (n,)), (word,))

    def __getitem__(self, i: int) -> str:
        return self.words[int(self.codes[i])]

    def __len__(self) -> int:
        return len(self.codes)


def merged(pick_b: npt.NDArray[np.bool_], a: Coded, b: Coded) -> Coded:
    """Per part b's word where ``pick_b``, else a's."""
    words = a.words + tuple(w for w in b.words if w not in a.words)
    remap = np.array([words.index(w) for w in b.words], dtype=np.int8)
    one_a, one_b = a.codes.strides == (0,), b.codes.strides == (0,)
    if one_a and one_b and len(a.codes):  # one word each side (the usual case)
        wa, wb = int(a.codes[0]), int(remap[b.codes[0]])
        if wa == wb:
            return Coded(a.codes, words)
        if (wa, wb) == (0, 1):
            return Coded(pick_b.view(np.int8), words)
    return Coded(np.where(pick_b, remap[b.codes], a.codes).astype(np.int8), words)


@dataclass(frozen=True)
class CheckResult:
    """One check over all parts (arrays aligned with the parts' labels)."""

    name: str
    kind: Kind  # unit of need and has
    sense: Coded  # ">=": has must reach need; "<=": has must stay below need
    need: Array
    has: Array
    margin: Array
    note: Coded  # short per-part remark ("" when none)
    # further per-part figures a record carries besides need and has (e.g. the power a
    # part dissipates, W): JSON key -> array aligned with the parts (SI units)
    figures: Mapping[str, Array] = field(default_factory=dict)

    @cached_property
    def code(self) -> Codes:
        """Per part 0 fail, 1 unknown, 2 pass (margin >= 1 passes; NaN is unknown)."""
        return status_codes(self.margin)

    def status(self, i: int) -> Status:
        """Part i's status."""
        return STATUS_WORDS[int(status_codes(self.margin[i:i + 1])[0])]

    def statuses(self) -> list[Status]:
        """Every part's status (words for all rows: for small tables)."""
        return [STATUS_WORDS[c] for c in self.code.tolist()]

    def record(self, i: int) -> dict[str, Any]:
        """The JSON record of part i: status, need, has, margin (SI units), and
        ``assumed`` when the verdict rests on a stated assumption (see ``assumed``)."""
        out = {"status": self.status(i), "need": _num(self.need[i]),
               "has": _num(self.has[i]), "margin": _num(self.margin[i])}
        out.update({k: _num(v[i]) for k, v in self.figures.items()})
        return _with_assumed(out, self.note[i])

    def with_figures(self, **figures: Array) -> CheckResult:
        """This result carrying further per-part figures in its records (``figures``)."""
        return replace(self, figures={**self.figures, **figures})


#: A note of the form ``"...; assumed: WHAT"`` marks a verdict resting on an assumption
#: (a default or a figure the user opted in to); JSON records carry WHAT as ``assumed``.
ASSUMED = "assumed: "


def _with_assumed(record: dict[str, Any], note: str) -> dict[str, Any]:
    k = note.find(ASSUMED)
    if k >= 0:
        record["assumed"] = note[k + len(ASSUMED):]
    return record


def status_codes(margin: Array) -> Codes:
    """0 fail, 1 unknown, 2 pass per margin."""
    with np.errstate(invalid="ignore"):
        code = np.where(margin >= 1, 2, 0).astype(np.int8)
    code[np.isnan(margin)] = 1
    return code


def _plain(x: Array) -> list[float | None]:
    """Floats as a list, None where not finite (JSON has no NaN or infinity)."""
    values: list[float | None] = x.tolist()
    for k in np.flatnonzero(~np.isfinite(x)).tolist():
        values[k] = None
    return values


def _num(x: float) -> float | None:
    x = float(x)
    return x if np.isfinite(x) else None


def at_least(need: npt.ArrayLike, has: npt.ArrayLike) -> Array:
    """Margin has/need of a 'has >= need' limit (need 0: ±inf by the sign of has)."""
    if np.ndim(need) == 0 and float(need) != 0:  # type: ignore[arg-type]  # one need for all
        with np.errstate(invalid="ignore"):
            return np.asarray(has, float) / float(need)  # type: ignore[arg-type]
    need_a, has_a = np.broadcast_arrays(np.asarray(need, float), np.asarray(has, float))
    with np.errstate(divide="ignore", invalid="ignore"):
        m = has_a / need_a
        zero = np.where(has_a >= 0, np.inf, -np.inf)
    return np.where((need_a == 0) & ~np.isnan(has_a), zero, m)


def at_most(need: npt.ArrayLike, has: npt.ArrayLike) -> Array:
    """Margin need/has of a 'has <= need' limit (has 0: inf)."""
    if np.ndim(need) == 0 and float(need) > 0:  # type: ignore[arg-type]  # need/0 is inf
        with np.errstate(divide="ignore", invalid="ignore"):
            return float(need) / np.asarray(has, float)  # type: ignore[arg-type]
    need_a, has_a = np.broadcast_arrays(np.asarray(need, float), np.asarray(has, float))
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(has_a == 0, np.inf, need_a / has_a)


def result(name: str, kind: Kind, sense: str, need: npt.ArrayLike, has: npt.ArrayLike,
           note: Coded | str = "") -> CheckResult:
    """A check's result from what is needed and what each part has.

    ``need`` may be one number for all parts (kept as a read-only broadcast).
    """
    has_a = np.asarray(has, dtype=float)
    n = has_a.shape[0]
    need_a = np.broadcast_to(np.asarray(need, dtype=float), has_a.shape)
    margin = (at_least if sense == ">=" else at_most)(need if np.ndim(need) == 0 else need_a,
                                                        has_a)
    words = Coded.same(note, n) if isinstance(note, str) else note
    return CheckResult(name, kind, Coded.same(sense, n), need_a, has_a, margin, words)


def worse(a: CheckResult, b: CheckResult) -> CheckResult:
    """Per part the worse of two partial results of one check (e.g. the two rails).

    Worse is fail < unknown < pass, and the smaller margin between equals (a on a tie).
    On margins (fail < 1 <= pass, unknown NaN), b is worse where mb < ma (both known),
    or a is unknown and b fails, or b is unknown and a passes.
    """
    ma, mb = a.margin, b.margin
    with np.errstate(invalid="ignore"):
        pick_b = mb < ma
        unknown_a, unknown_b = np.isnan(ma), np.isnan(mb)
        if unknown_a.any():
            pick_b |= unknown_a & (mb < 1)
        if unknown_b.any():
            pick_b |= unknown_b & (ma >= 1)
    need = a.need if _same(a.need, b.need) else np.where(pick_b, b.need, a.need)
    return CheckResult(a.name, a.kind, merged(pick_b, a.sense, b.sense), need,
                       np.where(pick_b, b.has, a.has), np.where(pick_b, mb, ma),
                       merged(pick_b, a.note, b.note))


def _same(x: Array, y: Array) -> bool:
    """Both the same one value broadcast to every part (no per-part memory)."""
    return (x.ndim == 1 and y.ndim == 1 and x.strides == (0,) and y.strides == (0,)
            and len(x) == len(y) and (len(x) == 0 or bool(x[0] == y[0])))


def unknown_unless_failing(r: CheckResult, missing: npt.NDArray[np.bool_]) -> CheckResult:
    """``r`` with every part that lacks a needed value and does not fail made unknown.

    A value left out of a part is never taken as ideal: a check that a part passes only
    with an assumed value is unverified; a check it fails on what is known fails.
    The margin becomes NaN (unknown); ``has`` keeps what the known values give. Only the
    rows with a missing value are touched (a few percent of a catalogue), and the margin
    is changed in place: every check's margin is its own new array.
    """
    rows = np.flatnonzero(missing)
    with np.errstate(invalid="ignore"):
        hide = rows[~(r.margin[rows] < 1)]
    r.margin[hide] = np.nan
    return r


@dataclass(frozen=True)
class CheckTable:
    """All applicable checks over all parts, in report order."""

    labels: Strings
    results: dict[str, CheckResult]
    ranked: frozenset[str]  # checks that measure headroom (enter the ranking margin)

    def __len__(self) -> int:
        return len(self.labels)

    def names_with(self, status: Status, rows: npt.ArrayLike) -> list[list[str]]:
        """For each of the given rows, the check names with the given status."""
        idx = np.asarray(rows, dtype=int)
        names = list(self.results)
        if not names:
            return [[] for _ in idx]
        code = STATUS_WORDS.index(status)
        mask = np.stack([status_codes(self.results[n].margin[idx]) == code for n in names],
                        axis=1).tolist()
        return [[n for n, hit in zip(names, row, strict=True) if hit] for row in mask]

    def any_status(self, status: Status) -> npt.NDArray[np.bool_]:
        code = STATUS_WORDS.index(status)
        out = np.zeros(len(self.labels), dtype=bool)
        for r in self.results.values():
            out |= r.code == code
        return out

    def verdicts(self) -> tuple[npt.NDArray[np.bool_], npt.NDArray[np.bool_]]:
        """Per part: does any check fail (margin < 1); is any check unknown (NaN)."""
        fail = np.zeros(len(self.labels), dtype=bool)
        unknown = np.zeros(len(self.labels), dtype=bool)
        with np.errstate(invalid="ignore"):
            for r in self.results.values():
                fail |= r.margin < 1
                unknown |= np.isnan(r.margin)
        return fail, unknown

    def verdict(self, i: int) -> Literal["pass", "fail", "unknown"]:
        """Part i's verdict: fail if any check fails, else unknown if any is unknown."""
        codes = {int(r.code[i]) for r in self.results.values()}
        return STATUS_WORDS[min(codes)] if codes else "pass"

    def rank_margin(self) -> Array:
        """Per part, the smallest margin over the ranked checks (NaN-skipping)."""
        ms = [r.margin for n, r in self.results.items() if n in self.ranked]
        if not ms:
            return np.full(len(self.labels), np.inf)
        out = ms[0].copy()
        for m in ms[1:]:
            np.fmin(out, m, out=out)
        return out

    def limiting(self, i: int) -> str:
        """The ranked check with part i's smallest margin ("-" when none)."""
        best, name = np.inf, "-"
        for n, r in self.results.items():
            m = float(r.margin[i])
            if n in self.ranked and m < best:
                best, name = m, n
        return name

    def records(self, i: int) -> dict[str, dict[str, Any]]:
        return {n: r.record(i) for n, r in self.results.items()}

    def records_for(self, rows: npt.ArrayLike) -> list[dict[str, dict[str, Any]]]:
        """``records(i)`` for each of ``rows``, built column by column (plain values)."""
        idx = np.asarray(rows, dtype=np.intp)
        cols = {}
        for n, r in self.results.items():
            cols[n] = ([STATUS_WORDS[c] for c in r.code[idx].tolist()],
                       _plain(r.need[idx]), _plain(r.has[idx]), _plain(r.margin[idx]),
                       [r.note.words[c] for c in r.note.codes[idx].tolist()],
                       {f: _plain(v[idx]) for f, v in r.figures.items()})
        return [{n: _with_assumed({"status": st[k], "need": need[k], "has": has[k],
                                   "margin": m[k], **{f: v[k] for f, v in fig.items()}},
                                  note[k])
                 for n, (st, need, has, m, note, fig) in cols.items()} for k in range(len(idx))]


def joined(labels: Strings, pieces: list[tuple[npt.NDArray[np.intp], CheckTable]]) -> CheckTable:
    """One table over ``labels`` from tables over disjoint groups of its rows (each piece:
    the rows it covers, its table), e.g. parts checked each with its own network.

    Checks keep the report order of their first appearance; a check a group's stage does
    not run reads as not applying there (margin inf, need and has unknown)."""
    n = len(labels)
    names: list[str] = []
    for _, t in pieces:
        names += [k for k in t.results if k not in names]
    out: dict[str, CheckResult] = {}
    for name in names:
        first = next(t.results[name] for _, t in pieces if name in t.results)
        need, has = np.full(n, np.nan), np.full(n, np.nan)
        margin = np.full(n, np.inf)
        sense_w: list[str] = []
        note_w: list[str] = [""]
        sense_c, note_c = np.zeros(n, np.int8), np.zeros(n, np.int8)
        figs: dict[str, Array] = {}
        for rows, t in pieces:
            r = t.results.get(name)
            if r is None:
                continue
            need[rows], has[rows], margin[rows] = r.need, r.has, r.margin
            for words, coded, codes in ((sense_w, r.sense, sense_c), (note_w, r.note, note_c)):
                for w in coded.words:
                    if w not in words:
                        words.append(w)
                remap = np.array([words.index(w) for w in coded.words], np.int8)
                codes[rows] = remap[np.asarray(coded.codes)]
            for f, v in r.figures.items():
                figs.setdefault(f, np.full(n, np.nan))[rows] = v
        out[name] = CheckResult(name, first.kind, Coded(sense_c, tuple(sense_w or [">="])),
                                need, has, margin, Coded(note_c, tuple(note_w)), figs)
    ranked = frozenset().union(*[t.ranked for _, t in pieces]) if pieces else frozenset()
    return CheckTable(labels, out, ranked)


__all__ = ["ASSUMED", "STATUS_WORDS", "Array", "CheckResult", "CheckTable", "Coded", "Parts", "Status",
           "at_least", "at_most", "joined", "merged", "result", "status_codes", "unknown_unless_failing",
           "worse"]
