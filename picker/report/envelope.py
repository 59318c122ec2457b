"""The operating envelope as text and as a log-log chart (picker.design.envelope).

Chart: one panel per part. Each edge has its own line style and weight, so the chart
reads in greyscale: swing dotted, slew dashed, output current dash-dot, input
common mode thin solid, the envelope itself thick solid with the area below it
shaded, an amplitude-independent limit (e.g. gain accuracy) a vertical dash-dot-dot line
where it starts to fail, the requirement a cross.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

import numpy as np

from picker.quantities import fmt

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from picker.design.envelope import Envelope

ENVELOPE_SIZE = (1100, 800)

_EDGE_STYLE: dict[str, dict[str, Any]] = {
    "swing": {"linestyle": ":", "linewidth": 1.8},
    "slew": {"linestyle": "--", "linewidth": 1.5},
    "output_current": {"linestyle": "-.", "linewidth": 1.5},
    "common_mode": {"linestyle": "-", "linewidth": 0.8},
}
_OTHER_EDGE: dict[str, Any] = {"linestyle": (0, (1, 3)), "linewidth": 1.2}


def _amp(x: float) -> str:
    if math.isnan(x):
        return "unknown"
    if math.isinf(x):
        return "no limit"
    return fmt(x, "voltage", 3)


def envelope_text(env: Envelope, rows: int = 12) -> str:
    """A table: frequencies down, parts across, each cell the largest amplitude and the
    check that sets it; then each part's amplitude-independent limits."""
    from tabulate import tabulate

    req = env.requirement
    n = len(env.freqs_hz)
    pick = sorted(set(np.linspace(0, n - 1, min(rows, n)).round().astype(int).tolist())
                  | {int(np.argmin(np.abs(env.freqs_hz - req.freq_hz)))})
    body = []
    for i in pick:
        mark = " <- requirement" if math.isclose(env.freqs_hz[i], req.freq_hz) else ""
        body.append([fmt(float(env.freqs_hz[i]), "frequency", 4) + mark]
                    + [_cell(env, i, j) for j in range(len(env.labels))])
    lines = [f"Largest output amplitude (peak) each part supports in this stage, by frequency "
             f"(margin 1: the parts' own limits); requirement {fmt(req.vout, 'voltage', 4)} "
             f"peak at {fmt(req.freq_hz, 'frequency', 4)}.",
             "",
             tabulate(body, headers=["frequency", *env.labels], disable_numparse=True)]
    notes = []
    for j, label in enumerate(env.labels):
        for name in env.cutoffs:
            f = env.cutoff_hz(name, j)
            if f is not None and f > env.freqs_hz[0]:
                notes.append(f"{label}: {name} fails from {fmt(f, 'frequency', 3)} up "
                             "(grid point)")
    if notes:
        lines += ["", *notes]
    if env.left_out:
        lines += ["", "Not drawn (their limit is not proportional to the amplitude; see "
                  "`picker pick`): " + ", ".join(env.left_out)]
    return "\n".join(lines)


def _cell(env: Envelope, i: int, j: int) -> str:
    limit, a = env.limit(i, j), float(env.amplitude[i, j])
    if a == 0:
        return f"none: {limit} fails"
    return _amp(a) + (f" ({limit})" if limit else "")


def _panel(ax: Axes, env: Envelope, j: int) -> None:
    f = env.freqs_hz
    amp = env.amplitude[:, j]
    known = amp[np.isfinite(amp) & (amp > 0)]
    level = max([env.requirement.vout, *known.tolist()])
    ceiling, floor = level * 10, min([env.requirement.vout, *known.tolist()]) / 30
    for name, e in env.edges.items():
        y = np.where(np.isfinite(e[:, j]), e[:, j], np.nan)
        if np.isfinite(y).any():
            ax.plot(f, y, color="0.3", label=f"{name} edge",
                    **_EDGE_STYLE.get(name, _OTHER_EDGE))
    shown = np.where(amp > 0, amp, np.nan)
    ax.plot(f, shown, color="black", linewidth=2.6, label="envelope")
    ax.fill_between(f, floor, np.nan_to_num(shown, nan=floor), color="0.85")
    for name in env.cutoffs:
        fc = env.cutoff_hz(name, j)
        if fc is not None:
            ax.axvline(fc, color="0.2", linestyle=(0, (3, 1, 1, 1, 1, 1)), linewidth=1.4,
                       label=f"{name} fails above")
    ax.plot([env.requirement.freq_hz], [env.requirement.vout], marker="x", markersize=11,
            markeredgewidth=2.5, color="black", linestyle="none", label="requirement")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_ylim(floor, ceiling)
    ax.set_xlim(f[0], f[-1])
    ax.set_title(env.labels[j])
    ax.set_xlabel("frequency [Hz]")
    ax.set_ylabel("output amplitude [V peak]")
    ax.grid(True, which="both", color="0.9")


def envelope_figure(env: Envelope, size_px: tuple[int, int] = ENVELOPE_SIZE) -> Figure:
    """One log-log panel per part (up to a 3-column grid), one legend below them."""
    from picker.report.plots import _figure

    n = len(env.labels)
    cols = 1 if n == 1 else 2 if n <= 4 else 3
    rows = math.ceil(n / cols)
    fig = _figure(size_px)
    axes = fig.subplots(rows, cols, squeeze=False)
    for j in range(rows * cols):
        ax = axes[j // cols][j % cols]
        if j < n:
            _panel(ax, env, j)
        else:
            ax.set_visible(False)
    handles, labels = axes[0][0].get_legend_handles_labels()
    fig.legend(handles, labels, loc="outside lower center", ncols=min(6, len(labels)),
               frameon=False)
    return fig


__all__ = ["ENVELOPE_SIZE", "envelope_figure", "envelope_text"]
