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

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np
import numpy.typing as npt

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
    """The numeric columns of a parts table as float arrays (NaN = unknown)."""

    def __init__(self, frame: Any) -> None:
        self.labels: Strings = np.asarray([str(x) for x in frame.index], dtype=str)
        n = len(self.labels)
        self._cols = {
            name: (frame[name].to_numpy(dtype=float, na_value=np.nan) if name in frame.columns
                   else np.full(n, np.nan))
            for name in NUMERIC
        }

    def __getitem__(self, name: str) -> Array:
        return self._cols[name]

    def __iter__(self):  # type: ignore[no-untyped-def]
        return iter(self._cols)

    def __len__(self) -> int:
        return len(self.labels)

    def take(self, index: npt.ArrayLike) -> Parts:
        """The same columns for a subset of rows."""
        out = object.__new__(Parts)
        idx = np.asarray(index)
        out.labels = self.labels[idx]
        out._cols = {k: v[idx] for k, v in self._cols.items()}
        return out


@dataclass(frozen=True)
class CheckResult:
    """One check over all parts (arrays aligned with the parts' labels)."""

    name: CheckName
    kind: Kind  # unit of need and has
    sense: Strings  # ">=": has must reach need; "<=": has must stay below need
    need: Array
    has: Array
    margin: Array
    detail: dict[str, Array] = field(default_factory=dict)  # intermediate values for `why`
    note: Strings | None = None  # short per-part remark ("" when none)
    fields: tuple[str, ...] = ()  # part fields this check needs for this stage

    @property
    def status(self) -> Strings:
        m = self.margin
        with np.errstate(invalid="ignore"):
            return np.where(np.isnan(m), "unknown", np.where(m >= 1, "pass", "fail"))

    def record(self, i: int) -> dict[str, Any]:
        """The JSON record of part i: status, need, has, margin (SI units)."""
        return {"status": str(self.status[i]), "need": _num(self.need[i]),
                "has": _num(self.has[i]), "margin": _num(self.margin[i])}


def _num(x: float) -> float | None:
    x = float(x)
    return x if np.isfinite(x) else None


def at_least(need: npt.ArrayLike, has: npt.ArrayLike) -> Array:
    """Margin has/need of a 'has >= need' limit (need 0: ±inf by the sign of has)."""
    need, has = np.broadcast_arrays(np.asarray(need, float), np.asarray(has, float))
    with np.errstate(divide="ignore", invalid="ignore"):
        m = has / need
    zero = np.where(has >= 0, np.inf, -np.inf)
    return np.where((need == 0) & ~np.isnan(has), zero, m)  # type: ignore[no-any-return]


def at_most(need: npt.ArrayLike, has: npt.ArrayLike) -> Array:
    """Margin need/has of a 'has <= need' limit (has 0: inf)."""
    need, has = np.broadcast_arrays(np.asarray(need, float), np.asarray(has, float))
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(has == 0, np.inf, need / has)  # type: ignore[no-any-return]


def _rank(margin: Array) -> Array:
    """fail 0, unknown 1, pass 2: used to pick the worse of two sides."""
    with np.errstate(invalid="ignore"):
        return np.where(np.isnan(margin), 1, np.where(margin >= 1, 2, 0))


def worse(a: CheckResult, b: CheckResult) -> CheckResult:
    """Element-wise the worse of two partial results of the same check."""
    ra, rb = _rank(a.margin), _rank(b.margin)
    with np.errstate(invalid="ignore"):
        pick_b = (rb < ra) | ((rb == ra) & (b.margin < a.margin))
    detail = {**a.detail, **b.detail}

    def sel(x: Any, y: Any) -> Any:
        return np.where(pick_b, y, x)

    note = None if a.note is None and b.note is None else sel(
        a.note if a.note is not None else "", b.note if b.note is not None else "")
    return CheckResult(a.name, a.kind, sel(a.sense, b.sense), sel(a.need, b.need),
                       sel(a.has, b.has), sel(a.margin, b.margin), detail, note,
                       tuple(dict.fromkeys(a.fields + b.fields)))


def result(name: CheckName, kind: Kind, sense: str, need: npt.ArrayLike, has: npt.ArrayLike,
           detail: dict[str, Array] | None = None, note: Strings | None = None,
           fields: tuple[str, ...] = ()) -> CheckResult:
    has_a = np.asarray(has, dtype=float)
    need_a = np.broadcast_to(np.asarray(need, dtype=float), has_a.shape).copy()
    margin = at_least(need_a, has_a) if sense == ">=" else at_most(need_a, has_a)
    return CheckResult(name, kind, np.full(has_a.shape, sense), need_a, has_a, margin,
                       detail or {}, note, fields)


@dataclass(frozen=True)
class CheckTable:
    """All applicable checks over all parts."""

    labels: Strings
    results: dict[CheckName, CheckResult]

    def __len__(self) -> int:
        return len(self.labels)

    def statuses(self) -> dict[CheckName, Strings]:
        return {n: r.status for n, r in self.results.items()}

    def names_with(self, status: Status, rows: npt.ArrayLike) -> list[list[CheckName]]:
        """For each of the given rows, the check names with the given status."""
        st = self.statuses()
        idx = np.asarray(rows, dtype=int)
        names = list(self.results)
        if not names:
            return [[] for _ in idx]
        mask = np.stack([st[n][idx] == status for n in names], axis=1).tolist()
        return [[n for n, hit in zip(names, row, strict=True) if hit] for row in mask]

    def any_status(self, status: Status) -> npt.NDArray[np.bool_]:
        st = self.statuses()
        out = np.zeros(len(self.labels), dtype=bool)
        for s in st.values():
            out |= s == status
        return out

    def rank_margin(self) -> Array:
        """Per part, the smallest margin over the checks that measure headroom (not stock, supply)."""
        ms = [r.margin for n, r in self.results.items() if n not in NOT_RANKED]
        if not ms:
            return np.full(len(self.labels), np.inf)
        return np.fmin.reduce(np.stack(ms), axis=0)  # type: ignore[no-any-return]  # NaN-skipping

    def records(self, i: int) -> dict[str, dict[str, Any]]:
        return {n: r.record(i) for n, r in self.results.items()}


CheckFn = Callable[[Parts, Any], CheckResult]


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
    return CheckTable(p.labels, {n: fn(p, spec) for n, fn in fns.items()})


__all__ = ["CHECKS", "CheckName", "CheckResult", "CheckTable", "Parts", "Status",
           "at_least", "at_most", "result", "run_checks", "worse"]
