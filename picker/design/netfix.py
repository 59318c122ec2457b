"""Why no network fits, and the nearest relaxation that would.

Called when no pair of standard values inside the window keeps every limit and the
gain-error budget. For each limit, the pairs that keep all the *other* limits and the
nominal gain budget (|G/G0 - 1| <= --gain-error / margin) are looked at; the best of
them sets the value the limit would have to move to (rounded outwards to two
significant figures, so a rerun with it finds that very pair). The limit that needs the
smallest relative move is named with its option and value, e.g. ``--noise-max 140uV``
or ``--zin 5k``. When no single limit blocks, a finer series that fits is named (tried
by designing with it), else the gain is out of reach of the window.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np

from picker.design import netmodel as nm
from picker.design.netlimits import Context, Limit, Mask
from picker.quantities import fmt

_WHAT = {"load": "output load", "offset": "offset", "noise": "noise",
         "input_resistance": "input resistance", "zin": "input impedance"}


def _round(value: float, up: bool) -> float:
    """``value`` rounded to two significant figures, up or down."""
    if value <= 0 or not math.isfinite(value):
        return value
    e = math.floor(math.log10(value)) - 1
    q = value / 10.0**e
    q = math.ceil(q - 1e-9) if up else math.floor(q + 1e-9)
    return float(f"{q}e{e}")


def _text(value: float, unit: str) -> str:
    """Option text: 140uV, 5.1k, 0.5% (engineering prefixes, no spaces)."""
    if unit == "%":
        return f"{value * 100:.3g}%"
    s = fmt(value, "resistance" if unit == "Ω" else "voltage", 2)
    s = s.replace(" ", "").replace("µ", "u").replace("Ω", "").replace("kV", "kV")
    return s


def relaxation(ctx: Context, lim: Limit, others: Mask) -> tuple[float, str] | None:
    """(relative move, option text) that lets some pair of ``others`` keep ``lim``."""
    r = ctx.req
    if not others.any():
        return None
    metric = np.broadcast_to(lim.metric, others.shape)[others]
    if lim.name == "noise":
        need = _round(float(metric.min()) * r.margin / nm.NOISE_SHARE * (1 + 1e-9), up=True)
        assert r.noise_max_v is not None
        return need / r.noise_max_v, f"--noise-max {_text(need, 'V')}"
    if lim.name == "offset":
        need = _round(float(metric.min()) * r.margin / nm.OFFSET_SHARE * (1 + 1e-9), up=True)
        assert r.offset_max_v is not None
        return need / r.offset_max_v, f"--offset-max {_text(need, 'V')}"
    if lim.name == "input_resistance":
        need = _round(float(metric.min()) * r.margin / nm.RIN_SHARE * (1 + 1e-9), up=True)
        return need / r.gain_error, f"--gain-error {_text(need, '%')}"
    if lim.name == "zin":
        need = _round(float(metric.max()), up=False)
        return lim.bound / need, f"--zin {_text(need, 'Ω')}"
    if lim.name == "load":  # a smaller amplitude, in the form it was given
        g = float(metric.min())
        p = ctx.part
        g_load = 0.0 if r.load_ohm is None else 1.0 / r.load_ohm
        vmax = math.inf if nm.NET_LOAD_SHARE * g_load >= g else nm.NET_CURRENT_A / g
        if p.iout_a is not None:
            vmax = min(vmax, p.iout_a / (r.margin * (g + g_load)))
        if not vmax < r.vout:
            return None
        if r.vin_pk is not None:
            v = _round(vmax / r.gain * (1 - 1e-9), up=False)
            return r.vin / v, f"--vin {_text(v, 'V')}pk"
        v = _round(vmax * (1 - 1e-9), up=False)
        return r.vout / v, f"--vout {_text(v, 'V')}pk"
    return None


def message(ctx: Context, series: str, lims: list[Limit], gain_ok: Mask,
            finer: Callable[[], str | None], ideal_legs: np.ndarray) -> str:
    """One line: the limit that blocks and the nearest relaxation that fits."""
    r = ctx.req
    lo, hi = nm.WINDOW_OHM
    article = "an" if r.topology[0] in "aeiou" else "a"
    head = (f"network: no {series} network of {fmt(lo, 'resistance')}..{fmt(hi, 'resistance')} "
            f"resistors gives {article} {r.topology} gain of {r.gain:g} V/V within "
            f"{fmt(r.gain_error / r.margin, 'ratio')}")
    masks = [x.mask for x in lims]
    if not gain_ok.any():
        series_fix = finer()
        if series_fix is not None:
            return (f"{head}: the series is too coarse; the nearest that fits: "
                    f"--series {series_fix}")
        inside = ideal_legs[(ideal_legs >= lo) & (ideal_legs <= hi)]
        zf = ctx.zin_floor
        if inside.size and zf is not None and inside.max() < zf:
            need = _round(float(inside.max()) * 0.98, up=False)
            return (f"{head}: the input impedance limit blocks; the nearest that fits: "
                    f"--zin {_text(need, 'Ω')}")
        reach = ("the source resistance alone is too large a part of the input leg; buffer "
                 "the source" if r.source_ohm * r.gain > hi else
                 "no ratio inside the window reaches it; split the gain over two stages")
        return f"{head}: {reach}"
    best: tuple[float, str, str] | None = None
    for i, lim in enumerate(lims):
        others = np.logical_and.reduce([gain_ok, *[m for j, m in enumerate(masks) if j != i]])
        fix = relaxation(ctx, lim, np.broadcast_to(others, gain_ok.shape))
        if fix is not None and (best is None or fix[0] < best[0]):
            best = (fix[0], lim.name, fix[1])
    if best is not None:
        return f"{head}: the {_WHAT[best[1]]} limit blocks; the nearest that fits: {best[2]}"
    blocking = [_WHAT[x.name] for x, m in zip(lims, masks, strict=True)
                if not (m & gain_ok).any()]
    if blocking:
        return (f"{head}: the {' and '.join(blocking)} limits block together; relax them, "
                "or split the gain over two stages")
    return (f"{head}: only a series or parallel leg comes close enough, and none keeps the "
            "limits; relax them or split the gain over two stages")
