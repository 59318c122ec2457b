"""Standard resistor values: the E-series of IEC 60063 over the decades a design allows.

The significant figures come from the ``eseries`` package, which implements the
IEC 60063 tables (E3 .. E24 with two figures, E48 .. E192 with three, including the
standard's historical exceptions such as 2.7, 3.3 and 9.2). A value is a member of a
series when its significand, scaled to the series' figures, is one of the table's.

Values are built as exact decimals (``float("47e2")``), so 4.7 kΩ is the same float
however it was reached and membership tests need no tolerance.
"""

from __future__ import annotations

import math
from functools import cache
from typing import Literal, get_args

import numpy as np
import numpy.typing as npt

from picker.errors import BadValue

SeriesName = Literal["E3", "E6", "E12", "E24", "E48", "E96", "E192"]
SERIES: tuple[SeriesName, ...] = get_args(SeriesName)

Array = npt.NDArray[np.float64]


def parse_series(text: str, field: str = "--series") -> SeriesName:
    """'E24', 'e24' or '24' -> 'E24'; anything else is a BadValue naming the choices."""
    t = str(text).strip().upper()
    if not t.startswith("E"):
        t = "E" + t
    if t not in SERIES:
        raise BadValue(field, text, "is not an IEC 60063 series; use one of " + ", ".join(SERIES))
    return t  # type: ignore[return-value]


@cache
def figures(name: SeriesName) -> tuple[int, ...]:
    """The series' significant figures as integers (E24: 10, 11, ... 91; E96: 100 ... 976)."""
    import warnings

    with warnings.catch_warnings():
        # eseries imports the 'future' compatibility package, which warns on import
        warnings.simplefilter("ignore", DeprecationWarning)
        import eseries

    key = eseries.ESeries[name]
    return tuple(int(f) for f in eseries.series(key))


def digits(name: SeriesName) -> int:
    """How many significant figures the series' values have (2 up to E24, else 3)."""
    return len(str(figures(name)[0]))


def values(name: SeriesName, lo: float, hi: float) -> Array:
    """Every member of the series in [lo, hi] Ω, ascending, as exact decimals."""
    if not (0 < lo <= hi and math.isfinite(hi)):
        return np.empty(0)
    n = digits(name)
    first = math.floor(math.log10(lo)) - (n - 1)
    last = math.floor(math.log10(hi)) - (n - 1)
    out = [float(f"{f}e{e}") for e in range(first - 1, last + 2) for f in figures(name)]
    a = np.array(sorted(set(out)))
    return a[(a >= lo) & (a <= hi)]


def members(values: npt.ArrayLike, name: SeriesName) -> npt.NDArray[np.bool_]:
    """Per element: True when the value (Ω, > 0) is a member of the series at its decade
    (its significant figures, scaled by a power of ten, within 1e-9 of one of the
    series' figures)."""
    v = np.asarray(values, dtype=float)
    pos = (v > 0) & np.isfinite(v)
    safe = np.where(pos, v, 1.0)
    figs = np.asarray(figures(name), dtype=float)
    e = np.floor(np.log10(safe)) - (digits(name) - 1)
    ok = np.zeros(v.shape, dtype=bool)
    for k in (-1, 0, 1):  # guard log10 rounding at a decade's edge
        f = safe / 10.0 ** (e + k)
        r = np.round(f)
        ok |= pos & (np.abs(f - r) <= 1e-9 * f) & np.isin(r, figs)
    return ok


def is_member(value: float, name: SeriesName) -> bool:
    """True when ``value`` (Ω, > 0) is a member of the series at its decade."""
    return bool(members(np.array([value], dtype=float), name)[0])


def nearest(value: float, name: SeriesName) -> float:
    """The member nearest to ``value`` on a logarithmic scale."""
    if not (value > 0 and math.isfinite(value)):
        raise BadValue("resistance", value, "must be a finite value above 0 Ω")
    cand = values(name, value / 10, value * 10)
    return float(cand[np.argmin(np.abs(np.log(cand / value)))])


__all__ = ["SERIES", "SeriesName", "digits", "figures", "is_member", "nearest",
           "parse_series", "values"]
