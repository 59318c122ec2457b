"""The frequency response of a filter stage with a part: the section it makes and its
-3 dB edges (``picker bode`` for a filter).

The response itself is picker.design.response's (the solver at every frequency). On top:

- the section the part makes: fn, Q and pass-band gain K fitted (Levy's least squares,
  picker.stages.sections.fit_many) to the solved response from fn/2 to 2·fn;
- the -3 dB edges: where |H| crosses |K|/√2 (low-pass: the upper edge; high-pass: the
  lower; band-pass: both, and their difference, the bandwidth), found on a log grid of
  200 points a decade over fn/100 .. 100·fn and refined by bisection to a relative width
  of 1e-9.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

from picker.design.response import COLUMNS, Response, simulate, solved_gain
from picker.stages import stage
from picker.stages.filterbase import FilterStage
from picker.stages.sections import fit_grid, fit_many

Array = npt.NDArray[np.float64]


@dataclass(frozen=True)
class FilterResponse:
    """A filter stage's response for every part, with the section and edges it makes."""

    response: Response
    kind: str
    f0_hz: Array  # (P,) fitted natural frequency
    q: Array
    gain: Array  # signed pass-band gain
    f_low: Array  # lower -3 dB edge, Hz (NaN: none)
    f_high: Array  # upper -3 dB edge, Hz (NaN: none)

    @property
    def labels(self) -> tuple[str, ...]:
        return self.response.labels

    @property
    def known(self) -> npt.NDArray[np.bool_]:
        return self.response.known

    def summary(self, i: int) -> dict[str, Any]:
        """``picker bode PART --json`` for a filter (Hz, dB, degrees, V/V)."""
        def num(v: float) -> float | None:
            return float(v) if math.isfinite(v) else None

        bw = self.f_high[i] - self.f_low[i]
        return {**self.response.summary(i), "f0": num(self.f0_hz[i]), "q": num(self.q[i]),
                "passband_gain": num(self.gain[i]), "f3db_low": num(self.f_low[i]),
                "f3db_high": num(self.f_high[i]), "bandwidth": num(bw)}


def _edges(st: FilterStage, cols: dict[str, Array], gbw: Array, k: Array
           ) -> tuple[Array, Array]:
    assert st.ideal is not None
    fn = st.ideal.f0_hz
    grid = np.logspace(math.log10(fn / 100), math.log10(fn * 100), 801)
    mag = np.abs(solved_gain(st, cols, gbw, grid))
    target = np.abs(k) / math.sqrt(2)
    above = mag >= target[:, None]
    low, high = np.full(len(gbw), np.nan), np.full(len(gbw), np.nan)
    for i in range(len(gbw)):  # one bisection per part and edge (bode shows one part)
        if not np.isfinite(target[i]):
            continue
        one = {c: v[i:i + 1] for c, v in cols.items()}
        flips = np.flatnonzero(above[i, 1:] != above[i, :-1])
        for j in flips:
            lo, hi = grid[j], grid[j + 1]
            rising = bool(above[i, j + 1])
            while hi / lo - 1 > 1e-9:
                mid = math.sqrt(lo * hi)
                on = abs(solved_gain(st, one, gbw[i:i + 1], [mid])[0, 0]) >= target[i]
                lo, hi = (lo, mid) if on == rising else (mid, hi)
            f = math.sqrt(lo * hi)
            if rising and math.isnan(low[i]):
                low[i] = f
            elif not rising and math.isnan(high[i]):
                high[i] = f
    return low, high


def filter_response(st: FilterStage, parts: Any, freq_hz: float) -> FilterResponse:
    """The response of filter stage ``st`` for every part (columns of COLUMNS)."""
    resp = simulate(st, parts, freq_hz)
    n = len(resp.labels)
    cols = {c: (np.asarray(parts[c], dtype=float).reshape(n) if c in parts
                else np.full(n, np.nan)) for c in COLUMNS}
    gbw = np.where(resp.known, cols["gbw_hz"], 1.0)
    assert st.ideal is not None
    f = fit_grid(st.ideal.f0_hz)
    h = solved_gain(st, cols, gbw, f)
    h[~resp.known] = np.nan
    f0, q, k = fit_many(st.kind, f, h)
    low, high = _edges(st, cols, gbw, k)
    return FilterResponse(resp, st.kind, f0, q, k, low, high)


def response(req: Any, parts: Any, freq_hz: float | None = None) -> FilterResponse:
    """The filter response of the requirement's stage for every part (a DataFrame)."""
    st = stage(req)
    assert isinstance(st, FilterStage)
    return filter_response(st, parts, freq_hz or req.freq_hz)


__all__ = ["FilterResponse", "filter_response", "response"]
