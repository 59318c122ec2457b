"""What-if sweeps: where each part passes and what stops it, checked against closed
forms of the trade and against pick at every point."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from picker import api
from picker.checks import Parts
from picker.data import demo_stockroom
from tests.cli.clirun import fails, run


def _demo_frame() -> pd.DataFrame:
    with demo_stockroom().open("r", encoding="utf-8") as f:
        frame = pd.read_csv(f).set_index("label")
    frame["available"] = frame["qty"]
    return frame


def _clean(**changes: float) -> Parts:
    """An invented part with every value known and nothing limiting but ``changes``."""
    row = _demo_frame().loc["bip-gp-a"].copy()
    row.update(pd.Series({"gbw_hz": 1e12, "aol_v_per_v": 1e9, "rin_ohm": 1e15,
                          "rout_ohm": 0.0, "iout_a": 10.0, "vos_v": 0.0,
                          "drift_v_per_c": 0.0, "ib_a": 0.0, "ios_a": 0.0,
                          "slew_v_per_s": 1e12, "pm_unity_deg": 90.0, "cin_diff_f": 0.0,
                          "cin_cm_f": 0.0, **changes}))
    return Parts(pd.DataFrame([row], index=pd.Index(["clean"], name="label")))


def test_slew_edge_in_a_frequency_sweep() -> None:
    sr, vp, m = 1e6, 4.0, 1.25
    req = api.requirement(topology="follower", vout=vp, freq="1kHz", rails="±15",
                          margin=m)
    sw = api.sweep(req, _clean(slew_v_per_s=sr), "freq", 1e3, 1e6, points=200)
    (edge,) = sw.edges(0)
    # source: a sine's steepest slope is 2πf·Vp, so the slew check passes up to
    # f = SR/(2π·Vp·m) (Franco, Design with Operational Amplifiers and Analog
    # Integrated Circuits, 4th ed., full-power bandwidth, from memory)
    f_edge = sr / (2 * math.pi * vp * m)
    i = int(np.flatnonzero(sw.values == edge["to"])[0])
    assert edge["to"] <= f_edge < sw.values[i + 1]
    assert edge["above"] == ["slew"] and edge["below"] is None


def test_drift_edge_in_a_temperature_sweep() -> None:
    vos, drift, limit, m = 1e-3, 20e-6, 5e-3, 1.0
    req = api.requirement(topology="non-inverting", gain=2, vout="1V", freq="1kHz",
                          rails="±15", offset_max=limit, margin=m, tolerance="0.1%")
    sw = api.sweep(req, _clean(vos_v=vos, drift_v_per_c=drift), "temp", 25, 125,
                   points=101)
    (edge,) = sw.edges(0)
    ng = 2.0
    # source: output offset NG·(Vos + drift·(T - 25 °C)) reaches the limit at
    # T = 25 + (limit/NG - Vos)/drift (Franco, 4th ed., ch. 5 on input offset, from memory)
    t_edge = 25 + (limit / m / ng - vos) / drift
    assert edge["to"] <= t_edge < edge["to"] + 1.0 + 1e-9
    assert edge["above"] == ["offset"]


def test_every_point_agrees_with_pick_for_every_demo_part() -> None:
    """The sweep is the same check as pick, point by point (gain varied: each gain with
    its own designed network)."""
    frame = _demo_frame()
    req = api.requirement(topology="inverting", gain=10, vout="2V", freq="20kHz",
                          rails="±12", load="2k", tolerance="0.1%")
    sw = api.sweep(req, Parts(frame), "gain", 2, 50, points=7)
    for i, g in enumerate(sw.values):
        sel = api.pick(req.with_changes(gain=float(g), network=None, rf_pinned=False),
                       Parts(frame))
        accepted = {e.part for e in sel.accepted}
        failed = {e.part: set(e.fails) for e in sel.rejected}
        for j, label in enumerate(sw.labels):
            status, checks = sw.at(i, j)
            assert (status == "pass") == (label in accepted), (g, label)
            if status == "fail":
                assert set(checks) == failed[label], (g, label)


def test_impossible_points_are_named() -> None:
    req = api.requirement(topology="follower", vout="1V", freq="1kHz", rails="±5")
    sw = api.sweep(req, _clean(), "vout", 1.0, 8.0, points=8, log=False)
    assert sw.at(7, 0) == ("impossible", ())  # 8 V peak is beyond the ±5 V rails
    assert "beyond the rails" in " ".join(sw.notes)


STAGE = ["--topology", "inverting", "--gain", "10", "--vout", "5V", "--freq", "20kHz",
         "--rails", "±12", "--load", "2k", "--tolerance", "0.1%"]


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> str:
    db = str(tmp_path_factory.mktemp("sweep") / "demo.db")
    run("init", "--demo", "--db", db)
    return db


def test_cli_text_json_and_chart(demo: str, tmp_path: Path) -> None:
    png = tmp_path / "sweep.png"
    out = run("sweep", *STAGE, "--vary", "freq=100..1meg", "--points", "30", "--db", demo,
              "--png", str(png)).stdout
    assert "passes over" in out and "Passing nowhere" in out
    assert png.stat().st_size > 10_000
    data = json.loads(run("sweep", *STAGE, "--vary", "freq=100..1meg", "--points", "30",
                          "--db", demo, "--json").stdout)
    assert data["vary"] == "freq" and len(data["values"]) == 30
    assert data["values"][0] == pytest.approx(100) and data["values"][-1] == pytest.approx(1e6)
    by = {p["part"]: p for p in data["parts"]}
    assert all(len(p["status"]) == 30 for p in by.values())
    amp = json.loads(run("sweep", *STAGE, "--vary", "vout=0.1..10Vpp", "--points", "3",
                         "--db", demo, "--json").stdout)
    assert amp["values"] == pytest.approx([0.05, math.sqrt(0.05 * 5), 5.0])  # peak volts


@pytest.mark.parametrize("vary,where", [
    ("speed=1..2", "--vary"), ("freq=10k", "--vary"), ("freq=1meg..1k", "--vary"),
    ("freq=0..1k", "--vary"), ("freq=1k..1MV", "--vary freq"),
])
def test_cli_refuses_bad_vary(demo: str, vary: str, where: str) -> None:
    assert where in fails("sweep", *STAGE, "--vary", vary, "--db", demo).stderr
