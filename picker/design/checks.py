"""Every part checked against a stage, vectorised over the whole parts table.

A check result is data: for each part a status (``pass``, ``fail``, ``unknown``),
what the stage needs, what the part has, and the margin (has/need, or need/has for
limits from above; >= 1 exactly when passing). A missing parameter the check needs
gives ``unknown``, never a silent pass; a check that fails on what is known fails.

Check names are part of the interface: swing, common_mode, slew, gain_accuracy,
output_current, supply, offset, noise, stock. ``offset`` and ``noise`` apply only when
the requirement sets ``offset_max_v`` / ``noise_max_v``. The physics of
gain_accuracy, offset and noise is in picker.design.accuracy.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any, Literal

import numpy as np
import numpy.typing as npt

from picker.design.coded import Details, Words, choose
from picker.fields import NUMERIC
from picker.quantities import Kind

CheckName = Literal["swing", "common_mode", "slew", "gain_accuracy", "output_current",
                    "supply", "offset", "noise", "stock"]
CHECKS: tuple[CheckName, ...] = ("swing", "common_mode", "slew", "gain_accuracy",
                                 "output_current", "supply", "offset", "noise", "stock")
Status = Literal["pass", "fail", "unknown"]
Array = npt.NDArray[np.float64]
Strings = npt.NDArray[np.str_]

# checks left out of the ranking margin (logistics, not electrical headroom)
# stock is logistics and supply is a rating (runs on these rails or not): neither is headroom
NOT_RANKED: frozenset[str] = frozenset({"stock", "supply"})

class Parts(Mapping[str, Array]):
    """The numeric columns of a parts table as float arrays (NaN = unknown).

    Built from a DataFrame indexed by label (Store.parts_frame) or from plain columns
    (``Parts.from_columns``). A field the table does not hold reads as all unknown
    (made when first asked for, so reading only the needed columns saves memory).
    """

    def __init__(self, frame: Any) -> None:
        labels = frame.index.to_numpy(dtype=object)
        cols = {name: frame[name].to_numpy(dtype=float, na_value=np.nan)
                for name in NUMERIC if name in frame.columns}
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
            col = self._cols[name] = np.full(len(self.labels), np.nan)
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


@dataclass(frozen=True)
class CheckResult:
    """One check over all parts (arrays aligned with the parts' labels)."""

    name: CheckName
    kind: Kind  # unit of need and has
    sense: Words  # ">=": has must reach need; "<=": has must stay below need
    need: Array
    has: Array
    margin: Array
    detail: Mapping[str, Array] = field(default_factory=Details)  # values for `why`, lazy
    note: Words | None = None  # short per-part remark ("" when none)
    fields: tuple[str, ...] = ()  # part fields this check needs for this stage

    @cached_property
    def code(self) -> npt.NDArray[np.int8]:
        """Per part 0 fail, 1 unknown, 2 pass (margin >= 1 passes; NaN is unknown)."""
        return _codes(self.margin)

    @property
    def status(self) -> Words:
        """Per part ``pass``, ``fail`` or ``unknown`` (words built only when read)."""
        return Words(self.code, STATUS_WORDS)

    def record(self, i: int) -> dict[str, Any]:
        """The JSON record of part i: status, need, has, margin (SI units)."""
        return {"status": str(self.status[i]), "need": _num(self.need[i]),
                "has": _num(self.has[i]), "margin": _num(self.margin[i])}


def _plain(x: Array) -> list[float | None]:
    """Floats as a list, None where not finite (JSON has no NaN or infinity)."""
    values: list[float | None] = x.tolist()
    for k in np.flatnonzero(~np.isfinite(x)).tolist():
        values[k] = None
    return values


def _num(x: float) -> float | None:
    x = float(x)
    return x if np.isfinite(x) else None


STATUS_WORDS: tuple[Status, ...] = ("fail", "unknown", "pass")  # codes 0, 1, 2


def _codes(margin: Array) -> npt.NDArray[np.int8]:
    with np.errstate(invalid="ignore"):
        code = (margin >= 1).view(np.int8) * np.int8(2)
    code += np.isnan(margin)  # NaN >= 1 is False: 0 + 1
    return code  # type: ignore[no-any-return]


def at_least(need: npt.ArrayLike, has: npt.ArrayLike) -> Array:
    """Margin has/need of a 'has >= need' limit (need 0: ±inf by the sign of has)."""
    if np.ndim(need) == 0 and float(need) != 0:  # type: ignore[arg-type]  # one need for all
        with np.errstate(invalid="ignore"):
            return np.asarray(has, float) / float(need)  # type: ignore[arg-type, no-any-return]
    need, has = np.broadcast_arrays(np.asarray(need, float), np.asarray(has, float))
    with np.errstate(divide="ignore", invalid="ignore"):
        m = has / need
    zero = np.where(has >= 0, np.inf, -np.inf)
    return np.where((need == 0) & ~np.isnan(has), zero, m)  # type: ignore[no-any-return]


def at_most(need: npt.ArrayLike, has: npt.ArrayLike) -> Array:
    """Margin need/has of a 'has <= need' limit (has 0: inf)."""
    if np.ndim(need) == 0 and float(need) > 0:  # type: ignore[arg-type]  # need/0 is inf
        with np.errstate(divide="ignore", invalid="ignore"):
            return float(need) / np.asarray(has, float)  # type: ignore[arg-type, no-any-return]
    need, has = np.broadcast_arrays(np.asarray(need, float), np.asarray(has, float))
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(has == 0, np.inf, need / has)  # type: ignore[no-any-return]


def worse(a: CheckResult, b: CheckResult) -> CheckResult:
    """Element-wise the worse of two partial results of the same check.

    Worse is fail < unknown < pass, and the smaller margin between equals (a on a tie).
    On margins: a known shortfall wins (fmin skips an unknown side), else an unknown
    side (minimum keeps NaN), else the smaller; a few whole-column operations.
    """
    if _same_lower_limit(a, b):  # has >= the same need on both sides: compare has itself
        need = float(a.need[0])
        with np.errstate(invalid="ignore"):
            has = _worse_of(a.has, b.has, need)
        margin = has / need
        return _assembled(a, b, has, margin, lambda: _not_a(has, a.has), same_need=True)
    with np.errstate(invalid="ignore"):
        margin = _worse_of(a.margin, b.margin, 1.0)
    pick_b = _not_a(margin, a.margin)
    has = a.has if _same_constant(a.has, b.has) else select_where(pick_b, a.has, b.has)
    return _assembled(a, b, has, margin, lambda: pick_b, same_need=False)


def _worse_of(x: Array, y: Array, limit: float) -> Array:
    """Per part the worse of two values that pass at >= limit (see worse())."""
    low = np.fmin(x, y)
    return select_where(low < limit, np.minimum(x, y), low)


def _not_a(chosen: Array, a: Array) -> npt.NDArray[np.bool_]:
    """Where the chosen value is not a's (NaN counts as equal to NaN)."""
    return ~((chosen == a) | (np.isnan(chosen) & np.isnan(a)))


def _assembled(a: CheckResult, b: CheckResult, has: Array, margin: Array,
               pick_b: Callable[[], npt.NDArray[np.bool_]], same_need: bool) -> CheckResult:
    """The combined result; per-part need, sense and note follow the chosen side."""
    n = len(has)
    need = a.need if same_need or _same_constant(a.need, b.need) else select_where(
        pick_b(), a.need, b.need)
    sense = a.sense if _constant_word(a.sense) == _constant_word(b.sense) is not None \
        else choose(pick_b(), a.sense, b.sense)
    note = None
    if a.note is not None or b.note is not None:
        na = a.note if a.note is not None else Words.same("", n)
        nb = b.note if b.note is not None else Words.same("", n)
        note = Words(lambda: choose(pick_b(), na, nb).codes,
                     na.words + tuple(w for w in nb.words if w not in na.words))
    return CheckResult(a.name, a.kind, sense, need, has, margin,
                       Details(a.detail).merged(b.detail), note,
                       tuple(dict.fromkeys(a.fields + b.fields)))


def _same_lower_limit(a: CheckResult, b: CheckResult) -> bool:
    """Both sides need the same positive amount, has >= need (e.g. swing up and down)."""
    return (_same_constant(a.need, b.need) and float(a.need[0]) > 0
            and _constant_word(a.sense) == _constant_word(b.sense) == ">=")


def _constant_word(w: Words) -> str | None:
    codes = w.codes
    return w.words[int(codes[0])] if codes.ndim == 1 and len(codes) and codes.strides == (0,) \
        else None


def select_where(pick_b: npt.NDArray[np.bool_], x: Array, y: Array) -> Array:
    """np.where(pick_b, y, x) for float64, without branches.

    np.where mispredicts a branch per part when the choice is random (two sides of a
    check close to each other), several times slower than this bit blend:
    x ^ ((x ^ y)·pick_b) on the 64-bit patterns (exact for every value, NaN and inf too).
    """
    xb = np.ascontiguousarray(x, dtype=np.float64).view(np.int64)
    t = np.bitwise_xor(xb, np.asarray(y, dtype=np.float64).view(np.int64))
    t *= pick_b
    t ^= xb
    return t.view(np.float64)  # type: ignore[no-any-return]


def _same_constant(x: Any, y: Any) -> bool:
    """Both are broadcasts (stride 0) of the same single value."""
    return (isinstance(x, np.ndarray) and isinstance(y, np.ndarray) and x.ndim == 1
            and y.ndim == 1 and x.strides == (0,) and y.strides == (0,) and len(x) > 0
            and len(x) == len(y) and bool(x[0] == y[0]))


def result(name: CheckName, kind: Kind, sense: str, need: npt.ArrayLike, has: npt.ArrayLike,
           detail: Mapping[str, Any] | None = None, note: Words | str | None = None,
           fields: tuple[str, ...] = ()) -> CheckResult:
    """A check's result from what is needed and what each part has.

    ``need`` may be one number for all parts (kept as a read-only broadcast, no copy);
    ``note`` one word for all parts or Words; ``detail`` values may be functions,
    computed only when read.
    """
    has_a = np.asarray(has, dtype=float)
    n = has_a.shape[0] if has_a.ndim else 1
    need_a = np.broadcast_to(np.asarray(need, dtype=float), has_a.shape)
    margin = (at_least if sense == ">=" else at_most)(need if np.ndim(need) == 0 else need_a,
                                                        has_a)
    words = Words.same(note, n) if isinstance(note, str) else note
    return CheckResult(name, kind, Words.same(sense, n), need_a, has_a, margin,
                       Details(detail), words, fields)


@dataclass(frozen=True)
class CheckTable:
    """All applicable checks over all parts."""

    labels: Strings
    results: dict[CheckName, CheckResult]

    def __len__(self) -> int:
        return len(self.labels)

    def statuses(self) -> dict[CheckName, Words]:
        return {n: r.status for n, r in self.results.items()}

    def names_with(self, status: Status, rows: npt.ArrayLike) -> list[list[CheckName]]:
        """For each of the given rows, the check names with the given status."""
        idx = np.asarray(rows, dtype=int)
        names = list(self.results)
        if not names:
            return [[] for _ in idx]
        code = STATUS_WORDS.index(status)
        mask = np.stack([_codes(self.results[n].margin[idx]) == code for n in names],
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

    def rank_margin(self) -> Array:
        """Per part, the smallest margin over the checks that measure headroom (not stock, supply)."""
        ms = [r.margin for n, r in self.results.items() if n not in NOT_RANKED]
        if not ms:
            return np.full(len(self.labels), np.inf)
        out = ms[0].copy()
        for m in ms[1:]:
            np.fmin(out, m, out=out)  # NaN-skipping
        return out

    def records(self, i: int) -> dict[str, dict[str, Any]]:
        return {n: r.record(i) for n, r in self.results.items()}

    def records_for(self, rows: npt.ArrayLike) -> list[dict[str, dict[str, Any]]]:
        """``records(i)`` for each of ``rows``, built column by column (plain Python values)."""
        idx = np.asarray(rows, dtype=np.intp)
        cols = {}
        for n, r in self.results.items():
            words = STATUS_WORDS
            cols[n] = (
                [words[c] for c in r.code[idx].tolist()],
                _plain(r.need[idx]), _plain(r.has[idx]), _plain(r.margin[idx]))
        return [{n: {"status": st[k], "need": need[k], "has": has[k], "margin": m[k]}
                 for n, (st, need, has, m) in cols.items()} for k in range(len(idx))]


CheckFn = Callable[[Parts, Any], CheckResult]

#: Every part column each check reads (whatever the stage), to read no more than needed.
READS: dict[CheckName, tuple[str, ...]] = {
    "swing": ("out_head_pos_v", "out_head_neg_v"),
    "common_mode": ("cm_head_pos_v", "cm_head_neg_v"),
    "slew": ("slew_v_per_s",),
    "gain_accuracy": ("aol_v_per_v", "gbw_hz", "rin_ohm", "rout_ohm"),
    "output_current": ("iout_a",),
    "supply": ("supply_min_v", "supply_max_v"),
    "offset": ("vos_v", "drift_v_per_c", "ib_a", "ios_a"),
    "noise": ("en_v_per_rthz", "in_a_per_rthz", "aol_v_per_v", "gbw_hz", "rin_ohm",
              "rout_ohm"),
    "stock": ("qty", "channels"),
}
#: Columns the ranking and the pick listing read besides the checks.
RANKING_READS: tuple[str, ...] = ("price", "qty", "channels")


def applicable(spec: Any) -> tuple[CheckName, ...]:
    """The checks that apply to ``spec``'s requirement, in report order."""
    req = spec.requirement
    return tuple(n for n in CHECKS
                 if (n != "offset" or req.offset_max_v is not None)
                 and (n != "noise" or req.noise_max_v is not None))


def needed_columns(spec: Any) -> tuple[str, ...]:
    """The part columns checking, ranking and listing parts for ``spec`` read."""
    names = [c for n in applicable(spec) for c in READS[n]] + list(RANKING_READS)
    return tuple(dict.fromkeys(names))


def run_checks(parts: Parts | Any, spec: Any) -> CheckTable:
    """Run every applicable check of ``spec`` (a picker.design.spec.Spec) over all parts."""
    from picker.design import accuracy, limits

    p = parts if isinstance(parts, Parts) else Parts(parts)
    req = spec.requirement
    fns: dict[CheckName, CheckFn] = {
        "swing": limits.swing,
        "common_mode": limits.common_mode,
        "slew": limits.slew,
        "gain_accuracy": accuracy.gain_accuracy,
        "output_current": limits.output_current,
        "supply": limits.supply,
    }
    if req.offset_max_v is not None:
        fns["offset"] = accuracy.offset
    if req.noise_max_v is not None:
        fns["noise"] = accuracy.noise
    fns["stock"] = limits.stock
    table = CheckTable(p.labels, {n: fn(p, spec) for n, fn in fns.items()})
    p.forget()  # e.g. the loop coefficients: 16 bytes a part, not needed any more
    return table


__all__ = ["CHECKS", "READS", "CheckName", "CheckResult", "CheckTable", "Parts", "Status",
           "applicable", "at_least", "at_most", "needed_columns", "result", "run_checks",
           "worse"]
