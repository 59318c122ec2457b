"""Plots a person can read, on screen or in print: waveform, Bode, and a candidates grid.

matplotlib is imported lazily and used through its object API with the Agg canvas (no
pyplot, no window, no global state). Lines differ by style and weight, never by colour
alone: the predicted output is a thick solid line, the ideal output dashed, the usable
swing limits dotted; Bode marks are dash-dot (top frequency) and dotted (-3 dB).
Sizes are in pixels; a PNG comes out at exactly the requested size.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

from picker.quantities import fmt

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from picker.design.response import Response
    from picker.design.waveform import Waves

DPI = 100
WAVE_SIZE = (1000, 600)
BODE_SIZE = (1000, 750)
GRID_SIZE = (1200, 900)

_TIME_UNITS = ((1.0, "s"), (1e-3, "ms"), (1e-6, "µs"), (1e-9, "ns"), (1e-12, "ps"))
PREDICTED: dict[str, Any] = {"color": "black", "linestyle": "-", "linewidth": 2.2}
IDEAL: dict[str, Any] = {"color": "0.45", "linestyle": "--", "linewidth": 1.3}
SWING: dict[str, Any] = {"color": "0.25", "linestyle": ":", "linewidth": 1.5}
TOP_F: dict[str, Any] = {"color": "0.2", "linestyle": "-.", "linewidth": 1.3}
F3DB: dict[str, Any] = {"color": "0.2", "linestyle": ":", "linewidth": 1.6}


def time_unit(span_s: float) -> tuple[float, str]:
    """The engineering unit that shows a time span as a number of at least 1."""
    for scale, unit in _TIME_UNITS:
        if span_s >= scale:
            return scale, unit
    return _TIME_UNITS[-1]


def parse_size(text: str, field: str = "--size") -> tuple[int, int]:
    """'1000x600' (pixels, width x height) -> (1000, 600)."""
    from picker.errors import BadValue

    parts = str(text).lower().replace("×", "x").split("x")
    try:
        w, h = (int(p.strip()) for p in parts)
    except ValueError:
        raise BadValue(field, text, "is not a size in pixels; write WIDTHxHEIGHT, "
                       "e.g. 1000x600") from None
    if not (200 <= w <= 10000 and 150 <= h <= 10000):
        raise BadValue(field, text, "is outside 200x150 .. 10000x10000 pixels")
    return w, h


def _figure(size_px: tuple[int, int], **kw: Any) -> Figure:
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    w, h = size_px
    fig = Figure(figsize=(w / DPI, h / DPI), dpi=DPI, layout="constrained", **kw)
    FigureCanvasAgg(fig)
    return fig


def _limits_text(waves: Waves, i: int) -> str:
    active = waves.limits(i)
    thd = waves.thd[i]
    if not math.isfinite(thd):
        thd_text = "THD -"
    elif thd < 1e-5:
        thd_text = "THD < 0.001 %"
    else:
        thd_text = f"THD {100 * thd:.3g} %"
    return f"{thd_text}; limits: {', '.join(active) if active else 'none'}"


def draw_wave(ax: Axes, waves: Waves, i: int, *, legend: bool = True, title: str | None = None) -> None:
    """Ideal and predicted output of part ``i`` and its usable swing on ``ax``."""
    scale, unit = time_unit(float(waves.t[-1]))
    t = waves.t / scale
    ax.plot(t, waves.ideal, label="ideal output", **IDEAL)
    ax.plot(t, waves.vout[i], label="predicted output", **PREDICTED)
    ax.axhline(waves.swing_hi[i], label="usable swing (rail minus headroom)", **SWING)
    ax.axhline(waves.swing_lo[i], **SWING)
    ax.set_xlabel(f"time [{unit}]")
    ax.set_ylabel("output [V]")
    ax.set_xlim(t[0], t[-1])
    ax.grid(True, color="0.85", linewidth=0.6)
    ax.set_title(title or f"{waves.labels[i]}\n{_limits_text(waves, i)}")
    if legend:
        ax.legend(loc="lower right", fontsize="small", framealpha=0.9)


def wave_figure(waves: Waves, i: int, size_px: tuple[int, int] = WAVE_SIZE) -> Figure:
    """One part's predicted output against the ideal output and the usable swing."""
    fig = _figure(size_px)
    ax = fig.add_subplot()
    d = waves.drive
    draw_wave(ax, waves, i, title=(
        f"{waves.labels[i]}: predicted output, {fmt(d.vin_pk, 'voltage')} peak sine in at "
        f"{fmt(d.freq_hz, 'frequency')}, gain {d.ideal_gain:g} V/V\n{_limits_text(waves, i)}"))
    return fig


def grid_figure(waves: Waves, indices: list[int], size_px: tuple[int, int] = GRID_SIZE,
                heading: str | None = None, names: list[str] | None = None) -> Figure:
    """The predicted outputs of several parts side by side, on one voltage scale.

    ``names`` replaces the part labels in the panel titles (e.g. with rank and status).
    """
    n = max(len(indices), 1)
    cols = 1 if n == 1 else 2 if n <= 4 else 3
    rows = math.ceil(n / cols)
    fig = _figure(size_px)
    axes = fig.subplots(rows, cols, sharey=True, squeeze=False)
    for k, ax in enumerate(axes.flat):
        if k >= len(indices):
            ax.set_visible(False)
            continue
        i = indices[k]
        name = waves.labels[i] if names is None else names[k]
        draw_wave(ax, waves, i, legend=False, title=f"{name}\n{_limits_text(waves, i)}")
    # one legend for every panel, below them, where it cannot sit on a trace
    handles, labels = axes.flat[0].get_legend_handles_labels()
    fig.legend(handles, labels, loc="outside lower center", ncols=len(labels), frameon=False)
    d = waves.drive
    fig.suptitle(heading or (
        f"Top candidates: {fmt(d.vin_pk, 'voltage')} peak sine in at "
        f"{fmt(d.freq_hz, 'frequency')}, gain {d.ideal_gain:g} V/V"))
    return fig


def bode_figure(resp: Response, i: int, size_px: tuple[int, int] = BODE_SIZE) -> Figure:
    """Closed-loop gain (dB) and phase (degrees) over frequency, log axes, with the top
    signal frequency and the -3 dB point marked."""
    from matplotlib.ticker import EngFormatter

    fig = _figure(size_px)
    ax_g, ax_p = fig.subplots(2, 1, sharex=True)
    f = resp.freqs
    ax_g.semilogx(f, resp.gain_db[i], label="closed-loop gain", **PREDICTED)
    ax_p.semilogx(f, resp.phase_deg[i], label="closed-loop phase", **PREDICTED)
    top = resp.freq_hz
    f3 = float(resp.f3db[i])
    for ax in (ax_g, ax_p):
        ax.axvline(top, label=f"top signal frequency {fmt(top, 'frequency')}", **TOP_F)
        if math.isfinite(f3):
            ax.axvline(f3, label=f"-3 dB at {fmt(f3, 'frequency')}", **F3DB)
        ax.grid(True, which="both", color="0.88", linewidth=0.5)
    ax_g.plot([top], [resp.gain_at_f[i]], marker="o", color="black", linestyle="none")
    if math.isfinite(f3):
        ax_g.plot([f3], [resp.dc_gain_db[i] - 10 * math.log10(2)], marker="s",
                  markerfacecolor="white", color="black", linestyle="none")
    ax_g.set_ylabel("gain [dB]")
    ax_p.set_ylabel("phase from the ideal stage [°]")
    ax_p.set_xlabel("frequency [Hz]")
    ax_p.xaxis.set_major_formatter(EngFormatter(unit="Hz"))
    ax_g.legend(loc="lower left", fontsize="small", framealpha=0.9)
    f3_text = fmt(f3, "frequency") if math.isfinite(f3) else "none"
    pm, fc = float(resp.phase_margin[i]), float(resp.crossover[i])
    if math.isfinite(fc):
        ax_p.axvline(fc, label=f"loop crossover {fmt(fc, 'frequency')}", color="0.4",
                     linestyle=":", linewidth=1.0)
    pm_text = (f"phase margin {pm:.1f}° at {fmt(fc, 'frequency')}, peaking "
               f"{resp.peaking[i]:.2f} dB" if math.isfinite(pm) else "phase margin unknown")
    ax_g.set_title(
        f"{resp.labels[i]}: closed-loop response; -3 dB at {f3_text}; at "
        f"{fmt(top, 'frequency')}: {resp.gain_at_f[i]:.2f} dB, {resp.phase_at_f[i]:.1f}°\n"
        f"{pm_text}")
    ax_p.text(0.99, 0.04, pm_text, transform=ax_p.transAxes, ha="right", va="bottom",
              fontsize="small")
    return fig


def save_png(fig: Figure, path: str | Path, protected: Sequence[Path] = ()) -> Path:
    """Write ``fig`` as a PNG at its own pixel size; errors name the file.

    protected: the stockroom's files (picker.store.outfile.database_files); the plot goes
    to a fresh temporary file first and a target that is one of them is refused.
    """
    from picker.errors import BadValue
    from picker.store.outfile import replacing

    p = Path(path)
    try:
        with replacing(p, protected, "--png") as tmp:
            fig.savefig(tmp, format="png", dpi=DPI)
    except OSError as exc:
        raise BadValue("--png", str(path), f"cannot be written ({exc.strerror}); choose a "
                       "writable path") from None
    return p


__all__ = ["bode_figure", "draw_wave", "grid_figure", "parse_size", "save_png", "time_unit",
           "wave_figure"]
