"""What-if sweeps as text and as a chart (picker.design.sweep).

Chart: one strip per part along the swept value. Passing points are a thick black
bar; a failing stretch is a band filled with the colour of the check that fails and
hatched with that check's own pattern (so the chart reads in greyscale too); unknown
stretches are light grey, points where no stage can be built are cross-hatched.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:
    from matplotlib.figure import Figure

    from picker.design.sweep import Sweep

SWEEP_SIZE = (1100, 700)
_HATCHES = ("//", "\\\\", "..", "oo", "--", "++", "**", "||", "OO", "xx..")
_COLOURS = ("#d95f02", "#1b9e77", "#7570b3", "#e7298a", "#66a61e", "#e6ab02", "#a6761d",
            "#1f78b4", "#b2df8a", "#fb9a99")


def _edge(stop: list[str] | str | None) -> str:
    if stop is None:
        return "-"
    if isinstance(stop, str):
        return "no stage can be built"
    return ", ".join(stop)


def sweep_text(sw: Sweep, top: int | None = None) -> str:
    """Each part's passing ranges with the limit at each edge (parts passing longest
    first), then the parts that pass nowhere with what fails most."""
    from tabulate import tabulate

    rows, nowhere = [], []
    order = sw.order()
    for j in order:
        edges = sw.edges(j)
        if not edges:
            nowhere.append(j)
            continue
        for k, e in enumerate(edges):
            rows.append([sw.labels[j] if k == 0 else "",
                         f"{sw.value_text(e['from'])} .. {sw.value_text(e['to'])}",
                         _edge(e["below"]), _edge(e["above"])])
    shown_rows = rows if top is None else rows[:top]
    var = sw.variable
    out = [f"Varying {var.what} over {sw.value_text(float(sw.values[0]))} .. "
           f"{sw.value_text(float(sw.values[-1]))} ({len(sw.values)} points, "
           f"{'log' if sw.log else 'linear'}); everything else as given, the network "
           "as built.", ""]
    if shown_rows:
        out.append(tabulate(shown_rows, headers=["part", "passes over", "stopped below by",
                                                 "stopped above by"], disable_numparse=True))
    else:
        out.append("No part passes anywhere in this range.")
    if shown_rows:
        out.append("('-': it passes to that end of the swept range)")
    if top is not None and len(rows) > top:
        out.append(f"... {len(rows) - top} more ranges (drop --top to see them)")
    if nowhere:
        out += ["", f"Passing nowhere in the range ({len(nowhere)}):"]
        for j in nowhere if top is None else nowhere[:top]:
            out.append(f"  {sw.labels[j]}: {_worst(sw, j)}")
        if top is not None and len(nowhere) > top:
            out.append(f"  ... {len(nowhere) - top} more")
    if sw.notes:
        out += ["", *[f"note: {n}" for n in sw.notes]]
    return "\n".join(out)


def _worst(sw: Sweep, j: int) -> str:
    """The checks failing (or unknown) at most points for a part that never passes."""
    counts: dict[str, int] = {}
    for s in sw.segments(j):
        label = "no stage can be built" if s.status == "impossible" else None
        names = [label] if label else [
            n if s.status == "fail" else f"unknown: {n}" for n in s.checks]
        for n in names:
            counts[n] = counts.get(n, 0) + s.stop - s.start + 1
    ranked = sorted(counts, key=lambda n: -counts[n])
    return ", ".join(f"{n} ({counts[n]}/{len(sw.values)} points)" for n in ranked[:3])


def _style(names: list[str]) -> dict[str, dict[str, Any]]:
    return {n: {"facecolor": _COLOURS[k % len(_COLOURS)], "hatch": _HATCHES[k % len(_HATCHES)],
                "edgecolor": "black", "linewidth": 0.0}
            for k, n in enumerate(names)}


def sweep_figure(sw: Sweep, size_px: tuple[int, int] = SWEEP_SIZE,
                 parts: list[int] | None = None) -> Figure:
    """One strip per part (at most 40: the parts passing longest first)."""
    from matplotlib.patches import Patch

    from picker.report.plots import _figure

    rows = (parts if parts is not None else sw.order())[:40]
    fig = _figure(size_px)
    ax = fig.subplots()
    v = sw.values
    # each point owns the span halfway to its neighbours (geometric halfway on a log axis)
    log = sw.log
    mids = np.sqrt(v[1:] * v[:-1]) if log else (v[1:] + v[:-1]) / 2
    lo = np.concatenate([[v[0]], mids])
    hi = np.concatenate([mids, [v[-1]]])
    style = _style(sw.names)
    used: dict[str, dict[str, Any]] = {}
    for y, j in enumerate(rows):
        for s in sw.segments(j):
            span = (lo[s.start], hi[s.stop] - lo[s.start])
            if s.status == "pass":
                ax.broken_barh([span], (y - 0.18, 0.36), facecolors="black")
                used["passes"] = {"facecolor": "black"}
            elif s.status == "fail":
                st = style[s.checks[0]]
                ax.broken_barh([span], (y - 0.4, 0.8), **st)
                used[s.checks[0] + " fails"] = st
            elif s.status == "unknown":
                st = {"facecolor": "0.85", "edgecolor": "0.5", "linewidth": 0.0}
                ax.broken_barh([span], (y - 0.4, 0.8), **st)
                used["unknown"] = st
            else:
                st = {"facecolor": "white", "hatch": "xx", "edgecolor": "0.4",
                      "linewidth": 0.0}
                ax.broken_barh([span], (y - 0.4, 0.8), **st)
                used["no stage"] = st
    ax.set_yticks(range(len(rows)), [sw.labels[j] for j in rows])
    ax.invert_yaxis()
    if log:
        ax.set_xscale("log")
    ax.set_xlim(v[0], v[-1])
    unit = {"frequency": "Hz", "amplitude": "V peak", "resistance": "Ω", "gain": "V/V",
            "temperature": "°C", "capacitance": "F"}.get(sw.variable.kind, "")
    ax.set_xlabel(f"{sw.variable.what} [{unit}]")
    ax.grid(True, axis="x", which="both", color="0.9")
    handles = [Patch(label=k, **{kk: vv for kk, vv in st.items() if kk != "linewidth"})
               for k, st in used.items()]
    fig.legend(handles=handles, loc="outside lower center", ncols=min(5, len(handles)),
               frameon=False)
    return fig


__all__ = ["SWEEP_SIZE", "sweep_figure", "sweep_text"]


