"""Plots: PNG files of the requested size, not blank, labelled with the part and units
(read back through matplotlib's objects), lines told apart by style."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from matplotlib.image import imread

from picker.design.response import response
from picker.design.waveform import waveforms
from picker.report.plots import bode_figure, grid_figure, save_png, time_unit, wave_figure
from tests.design.wave_cases import CASES, F_SLEW, FET, GP, RR, SLEW_STAGE, WIDE


def _png_ok(path: Path, size: tuple[int, int]) -> None:
    assert path.exists()
    img = imread(path)
    assert img.shape[1] == size[0] and img.shape[0] == size[1]
    grey = img[..., :3].mean(axis=2)
    assert grey.std() > 0.02  # not blank: text, lines and axes differ from the background
    assert (grey < 0.3).mean() > 0.005  # some dark ink: readable in print


def test_wave_png(tmp_path: Path) -> None:
    got = waveforms(SLEW_STAGE, WIDE.frame("slow output A"), 2 * F_SLEW)
    fig = wave_figure(got, 0, size_px=(900, 500))
    path = save_png(fig, tmp_path / "wave.png")
    _png_ok(path, (900, 500))
    ax = fig.axes[0]
    assert "slow output A" in ax.get_title()
    assert "slew" in ax.get_title()
    assert ax.get_xlabel() == "time [µs]"  # two periods of 53 kHz: tens of µs
    assert ax.get_ylabel() == "output [V]"
    styles = {line.get_linestyle() for line in ax.get_lines()}
    assert {"-", "--", ":"} <= styles  # predicted, ideal, swing limits by line style
    predicted = next(ln for ln in ax.get_lines() if ln.get_label() == "predicted output")
    np.testing.assert_allclose(predicted.get_ydata(), got.vout[0])
    swing = [ln.get_ydata()[0] for ln in ax.get_lines() if ln.get_linestyle() == ":"]
    # the levels reached at the peak: (15 V - 1.5 V)/(1 + Rsat·(1/RL + 1/(rf + rg))), Rsat =
    # Ro = 75 Ω (the reference macromodel), RL 10 kΩ, rf + rg 20 kΩ (hand arithmetic)
    reached = 13.5 / (1 + 75 * (1 / 10e3 + 1 / 20e3))
    np.testing.assert_allclose(sorted(swing), [-reached, reached], rtol=1e-4)  # Rin, A0 finite


@pytest.mark.parametrize("span,unit", [(2e-3, "ms"), (40e-6, "µs"), (3.0, "s"), (5e-9, "ns")])
def test_time_axis_in_engineering_units(span: float, unit: str) -> None:
    assert time_unit(span)[1] == unit


def test_bode_png(tmp_path: Path) -> None:
    req = CASES[4][2]
    got = response(req, GP.frame("general purpose B"))
    fig = bode_figure(got, 0, size_px=(800, 700))
    path = save_png(fig, tmp_path / "bode.png")
    _png_ok(path, (800, 700))
    ax_g, ax_p = fig.axes
    assert "general purpose B" in ax_g.get_title()
    assert ax_g.get_ylabel() == "gain [dB]" and ax_p.get_ylabel() == "phase from the ideal stage [°]"
    assert ax_p.get_xlabel() == "frequency [Hz]"
    assert ax_g.get_xscale() == "log" and ax_p.get_xscale() == "log"
    marks = {ln.get_linestyle(): ln.get_xdata()[0] for ln in ax_g.get_lines()
             if ln.get_linestyle() in ("-.", ":")}
    np.testing.assert_allclose([marks["-."], marks[":"]], [req.freq_hz, got.f3db[0]])


def test_grid_png(tmp_path: Path) -> None:
    frame = pd.concat([p.frame(n) for n, p in (("part one", GP), ("part two", WIDE),
                                                ("part three", RR), ("part four", FET))])
    got = waveforms(CASES[4][2], frame)
    fig = grid_figure(got, [3, 0, 1, 2], size_px=(1200, 800))
    path = save_png(fig, tmp_path / "grid.png")
    _png_ok(path, (1200, 800))
    visible = [ax for ax in fig.axes if ax.get_visible()]
    assert [ax.get_title().split("\n")[0] for ax in visible] == [
        "part four", "part one", "part two", "part three"]
    assert all(ax.get_ylabel() == "output [V]" for ax in visible)
    assert all("[µs]" in ax.get_xlabel() for ax in visible)
    # one legend for all panels, outside them: it can sit on no trace
    assert all(ax.get_legend() is None for ax in visible) and len(fig.legends) == 1
    renderer = fig.canvas.get_renderer()  # type: ignore[attr-defined]
    box = fig.legends[0].get_window_extent(renderer)
    assert not any(box.overlaps(ax.get_window_extent(renderer)) for ax in visible)
