"""Predicted waveforms against ngspice transient runs of the same behavioural macromodel,
and against facts of the trade."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from picker.circuit.opamp import closed_loop_gain
from picker.design.loopstate import loop_state
from picker.design.requirement import Requirement
from picker.design.waveform import LIMITS, Drive, candidate_waveforms, simulate, waveforms
from picker.stages import stage
from tests.design.macromodel_spice import Part, tran
from tests.design.wave_cases import CASES, F_SLEW, FET, GP, RR, SLEW_STAGE, WIDE


@pytest.mark.parametrize("ratio", [0.5, 1.0, 2.0])
def test_slew_limited_sine_matches_ngspice(ratio: float, tmp_path: Path) -> None:
    f = ratio * F_SLEW
    got = waveforms(SLEW_STAGE, WIDE.frame(), f)
    t, v = tran(SLEW_STAGE, WIDE, f, tmp_path)
    # source: ngspice .tran of the same macromodel (tests/design/macromodel_spice.py)
    assert_allclose([got.peak_pos[0], got.peak_neg[0]], [v.max(), v.min()], rtol=0.02)
    # source: ngspice .tran; the (triangle) amplitude, half the peak-to-peak
    assert_allclose(got.vpp[0] / 2, (v.max() - v.min()) / 2, rtol=0.03)


@pytest.mark.parametrize("name,part,req,expected", CASES, ids=[c[0] for c in CASES])
def test_limited_stages_match_ngspice(name: str, part: Part, req: Requirement,
                                      expected: list[str], tmp_path: Path) -> None:
    got = waveforms(req, part.frame())
    t, v = tran(req, part, req.freq_hz, tmp_path, name=name)
    # source: ngspice .tran of the same macromodel (tests/design/macromodel_spice.py)
    assert_allclose([got.peak_pos[0], got.peak_neg[0]], [v.max(), v.min()], rtol=0.02)
    # source: ngspice .tran, peak-to-peak
    assert_allclose(got.vpp[0], v.max() - v.min(), rtol=0.02)
    # the limit each case was built to reach (clip: output driven past the swing; current:
    # 5 V into 100 Ω against 25 mA; bandwidth: gain 100 at 10 kHz on 1 MHz GBW; ...)
    assert got.limits(0) == expected


def test_thd_of_a_slew_triangle_and_of_a_clean_sine() -> None:
    got = waveforms(SLEW_STAGE, WIDE.frame(), 4 * F_SLEW)
    # source: Fourier series of a triangle wave (odd harmonics 1/n²), THD = sqrt(π⁴/96 − 1)
    assert_allclose(got.thd[0], math.sqrt(math.pi**4 / 96 - 1), rtol=0.05)
    clean = waveforms(SLEW_STAGE, WIDE.frame(), 0.5 * F_SLEW)
    # a sine well inside every limit has no harmonics: THD below 1e-6
    assert_allclose(clean.thd[0], 0.0, atol=1e-6)


def test_slew_fact_of_the_trade() -> None:
    # common practice, no source: 0.5 V/µs with a 3 V peak sine stays clean below about
    # 26.5 kHz and turns triangular well above it
    below = waveforms(SLEW_STAGE, WIDE.frame(), 20e3)
    assert "slew" not in below.limits(0)
    assert_allclose(below.thd[0], 0.0, atol=1e-3)
    above = waveforms(SLEW_STAGE, WIDE.frame(), 80e3)
    assert "slew" in above.limits(0)
    slope = np.abs(np.diff(above.vout[0])) / (above.t[1] - above.t[0])
    # triangular: the output moves at one constant rate, the slew rate (less the small
    # drop in Ro), for most of the period
    ramp = np.isclose(slope, np.median(slope), rtol=0.01)
    assert ramp.mean() > 0.9
    assert_allclose(np.median(slope), 0.5e6, rtol=0.03)
    onset = [f for f in np.linspace(24e3, 30e3, 25)
             if "slew" in waveforms(SLEW_STAGE, WIDE.frame(), float(f)).limits(0)]
    # common practice, no source: the onset is near 26.5 kHz
    assert_allclose(onset[0], 26.5e3, rtol=0.02)


def test_clip_fact_of_the_trade() -> None:
    # common practice, no source: a gain-20 stage driven to an ideal 10 V peak on ±10 V
    # rails is clipped a little below the rails, flat-topped
    req = Requirement(topology="inverting", gain=20, rail_pos=10, rail_neg=-10, freq_hz=1e3,
                      vout_pk=10, load_ohm=10e3, tolerance=0.0)
    got = waveforms(req, GP.frame())
    assert "clip" in got.limits(0)
    assert 8.0 < got.peak_pos[0] < 10.0 and -10.0 < got.peak_neg[0] < -8.0
    v = got.vout[0]
    flat_top = np.mean(v > got.peak_pos[0] - 1e-3)
    flat_bottom = np.mean(v < got.peak_neg[0] + 1e-3)
    assert flat_top > 0.1 and flat_bottom > 0.1
    assert_allclose(got.ideal.max(), 10.0, rtol=1e-4)  # the ideal output reaches the rails


def test_one_state_loop_equals_the_exact_nodal_gain() -> None:
    # consistency with picker.circuit.opamp (itself checked against ngspice and sympy)
    parts = {"aol": np.array([2e5, 3e3, 1e7]), "gbw": np.array([1e6, 2e8, 5e5]),
             "rin": np.array([2e6, 1e5, 1e12]), "ro": np.array([75.0, 10.0, 1000.0])}
    for _, _, req, _ in CASES:
        st = stage(req)
        ls = loop_state(st, parts["aol"], parts["gbw"], parts["rin"], parts["ro"])
        for f in (10.0, 1e4, 1e6):
            exact = closed_loop_gain(st, parts["aol"], parts["gbw"], parts["rin"], parts["ro"], f)
            assert_allclose(ls.gain(f)[:, 0], exact, rtol=1e-9)


def test_parts_at_once_equal_parts_one_by_one() -> None:
    frame = pd.concat([p.frame(n) for n, p in (("gp", GP), ("wide", WIDE), ("rr", RR),
                                                ("fet", FET))])
    req = CASES[4][2]
    st = stage(req)
    together = simulate(st, frame, Drive.of(req, st), settle_periods=8, max_periods=8)
    for i, label in enumerate(frame.index):
        alone = simulate(st, frame.loc[[label]], Drive.of(req, st), settle_periods=8,
                         max_periods=8)
        assert_allclose(together.vout[i], alone.vout[0], rtol=1e-12, atol=1e-12)
        assert together.limits(i) == alone.limits(0)


def test_unknown_gbw_gives_no_prediction() -> None:
    frame = pd.concat([GP.frame("known"), GP.frame("blank")])
    frame.loc["blank", "gbw_hz"] = np.nan
    got = waveforms(CASES[0][2], frame)
    assert list(got.known) == [True, False]
    assert math.isnan(got.peak_pos[1]) and got.limits(1) == []
    assert got.summary(1) == {"part": "blank", "peak_pos": None, "peak_neg": None,
                              "vpp": None, "thd": None, "limits": []}
    assert set(got.summary(0)["limits"]) <= set(LIMITS)


def test_candidates_follow_the_ranking() -> None:
    from picker.design.rank import select

    frame = pd.read_csv(Path(__file__).parents[2] / "picker" / "data" / "demo_stockroom.csv",
                        index_col="label")
    req = Requirement(topology="inverting", gain=10, rail_pos=15, rail_neg=-15,
                      freq_hz=20e3, vout_pk=10, load_ohm=2e3, tolerance=0.0)
    got = candidate_waveforms(req, frame, 6)
    sel = select(frame, req)
    ranked = [e.part for e in sel.accepted] + [e.part for e in sel.unverified] + [
        e.part for e in sel.rejected]
    assert list(got.waves.labels) == ranked[:6]
    assert got.status[0] == "accepted"
    alone = waveforms(req, frame.loc[[got.waves.labels[0]]])
    assert_allclose(got.waves.vout[0], alone.vout[0], rtol=1e-12)
