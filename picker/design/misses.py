"""Nearest misses: how far the requirement would have to move for a part to pass.

For each of the closest rejected parts and each way of relaxing the stage (a lower top
frequency, a lower signal amplitude, a lower gain, a larger load) the move is found
by bisection on the checks themselves: the requirement is scaled, the minimum
specifications rebuilt and the part checked again, until the smallest move with no
failing check is pinned down (to 0.01%). A way that cannot help within a factor of
10⁶ is reported as None. Computed, not guessed.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Literal

import numpy as np

from picker.checks import Parts, run_checks
from picker.design.requirement import Requirement
from picker.design.spec import minimum_specs
from picker.errors import PickerError
from picker.quantities import Kind

Axis = Literal["freq", "amplitude", "gain", "load"]
_FAR = 1e6  # the largest factor tried along any axis
_STEPS = 40  # bisection steps in log space: (ln 1e6)/2^40, far below 0.01%


@dataclass(frozen=True)
class Move:
    """One way to make a part pass: the requirement value it would need."""

    axis: Axis
    value: float | None  # new requirement value (SI), None = this way cannot help
    old: float
    kind: Kind

    @property
    def change(self) -> float | None:
        """Relative change new/old - 1 (negative: lower)."""
        return None if self.value is None else self.value / self.old - 1


@dataclass(frozen=True)
class NearMiss:
    part: str
    fails: list[str]
    moves: list[Move]

    def to_json(self) -> dict[str, object]:
        """The part, its failing checks and each move (SI units; value None: this way
        cannot help within a factor of 10⁶)."""
        return {"part": self.part, "fails": self.fails,
                "moves": [{"axis": m.axis, "from": m.old, "to": m.value, "change": m.change}
                          for m in self.moves]}


def _passes(parts: Parts, req: Requirement, strict: bool) -> bool:
    # the verdict only: the tolerance advice (a network design per class) is not read here
    table = run_checks(parts, minimum_specs(req, advice=False))
    bad = table.any_status("fail")
    if strict:
        bad |= table.any_status("unknown")
    return not bool(bad[0])


def _axes(req: Requirement) -> list[tuple[Axis, float, Kind, float, Callable[[float], Requirement]]]:
    """(axis, present value, unit, furthest factor, requirement at factor k)."""
    out: list[tuple[Axis, float, Kind, float, Callable[[float], Requirement]]] = [
        ("freq", req.freq_hz, "frequency", 1 / _FAR,
         lambda k: req.with_changes(freq_hz=req.freq_hz * k)),
    ]
    if req.vin_pk is not None:
        vin = req.vin_pk
        out.append(("amplitude", req.vout, "voltage", 1 / _FAR,
                    lambda k: req.with_changes(vin_pk=vin * k)))
    else:
        vout = req.vout
        out.append(("amplitude", vout, "voltage", 1 / _FAR,
                    lambda k: req.with_changes(vout_pk=vout * k)))
    if req.topology != "follower" and req.network is None:
        lowest = 1 / req.gain if req.topology == "non-inverting" else 1 / _FAR
        if lowest < 1:
            out.append(("gain", req.gain, "gain", lowest,
                        lambda k: req.with_changes(gain=max(req.gain * k, 1.0)
                                                   if req.topology == "non-inverting"
                                                   else req.gain * k)))
    if req.load_ohm is not None:
        load = req.load_ohm
        out.append(("load", load, "resistance", _FAR,
                    lambda k: req.with_changes(load_ohm=load * k)))
    return out


def _search(parts: Parts, make: Callable[[float], Requirement], far: float,
            strict: bool) -> float | None:
    """The factor nearest 1 (towards ``far``) at which the part passes, or None."""

    def ok(k: float) -> bool:
        try:
            return _passes(parts, make(k), strict)
        except PickerError:  # the moved requirement is not a stage any more
            return False

    if not ok(far):
        return None
    near, good = 0.0, math.log(far)  # log-factors: near fails (k = 1), good passes
    for _ in range(_STEPS):
        mid = (near + good) / 2
        if ok(math.exp(mid)):
            good = mid
        else:
            near = mid
        if abs(good - near) < 1e-5:
            break
    return math.exp(good)


def nearest_misses(sel, count: int = 3, looked_at: int = 10) -> list[NearMiss]:  # type: ignore[no-untyped-def]
    """Every single move that would make each of the closest rejected parts pass.

    The ``looked_at`` closest parts are searched; those one move can rescue come first
    (closest first), then the others, ``count`` in all.
    """
    found: list[NearMiss] = []
    for entry in sel.rejected[:looked_at]:
        req = sel.requirement_for(entry.row)  # with the part's own network, if it has one
        one = sel.parts.take(np.array([entry.row]))
        moves = []
        for axis, old, kind, far, make in _axes(req):
            k = _search(one, make, far, sel.strict)
            value = None if k is None else _value(axis, req, k)
            moves.append(Move(axis, value, old, kind))
        found.append(NearMiss(entry.part, list(entry.fails), moves))
        if sum(any(m.value is not None for m in n.moves) for n in found) >= count:
            break
    rescued = [n for n in found if any(m.value is not None for m in n.moves)]
    return (rescued + [n for n in found if n not in rescued])[:count]


def _value(axis: Axis, req: Requirement, k: float) -> float:
    if axis == "freq":
        return req.freq_hz * k
    if axis == "amplitude":
        return req.vout * k
    if axis == "gain":
        return max(req.gain * k, 1.0) if req.topology == "non-inverting" else req.gain * k
    assert req.load_ohm is not None
    return req.load_ohm * k


__all__ = ["Axis", "Move", "NearMiss", "nearest_misses"]
