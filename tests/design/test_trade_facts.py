"""Facts of the trade the solver must reproduce (common practice, no source)."""

from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np
import pandas as pd
from numpy.testing import assert_allclose

from picker.circuit.opamp import closed_loop_gain
from picker.design.rank import select
from picker.design.requirement import Requirement
from picker.stages import stage

DEMO = Path(__file__).resolve().parents[2] / "picker" / "data" / "demo_stockroom.csv"


def good_part(**changes: float) -> dict[str, float]:
    base = {"slew_v_per_s": 100e6, "gbw_hz": 1e9, "aol_v_per_v": 1e9, "rin_ohm": 1e12,
            "rout_ohm": 0.0, "out_head_pos_v": 0.0, "out_head_neg_v": 0.0,
            "out_rsat_pos_ohm": 0.0, "out_rsat_neg_ohm": 0.0, "cm_head_pos_v": 0.0, "cm_head_neg_v": 0.0, "iout_a": 1.0, "supply_min_v": 1.0,
            "supply_max_v": 100.0, "qty": 10.0, "channels": 1.0, "iq_a": 1e-3,
            "theta_ja_c_per_w": 1.0, "tj_max_c": 200.0, "vdiff_max_v": 100.0,
            "pm_unity_deg": 90.0, "cin_diff_f": 0.0, "cin_cm_f": 0.0}
    return {**base, **changes}


def test_slew_limit_of_half_a_volt_per_microsecond_at_3_volts_is_26_5_khz() -> None:
    # common practice, no source: 0.5 V/µs and a 3 V peak sine run out of slew near 26.5 kHz
    parts = pd.DataFrame([good_part(slew_v_per_s=0.5e6)], index=["slow"])
    req = Requirement("non-inverting", 2.0, 12.0, -12.0, 40e3, vout_pk=3.0, margin=1.0, tolerance=0.0)
    sel = select(parts, req)
    assert not sel.accepted and sel.rejected[0].fails == ["slew"]
    freq = next(m for m in sel.nearest[0].moves if m.axis == "freq")
    assert_allclose(freq.value, 26.5e3, rtol=2e-3)
    ok = select(parts, req.with_changes(freq_hz=26e3))
    bad = select(parts, req.with_changes(freq_hz=27e3))
    assert [e.part for e in ok.accepted] == ["slow"] and bad.rejected[0].fails == ["slew"]


def test_ratio_100_inverting_on_gain_10000_lands_1_percent_low() -> None:
    # common practice, no source: ratio 100 with open-loop gain 10,000 is about 1% below ideal
    req = Requirement("inverting", 100.0, 15.0, -15.0, 100.0, vin_pk=0.01, rf_ohm=100e3, tolerance=0.0)
    g = closed_loop_gain(stage(req), [1e4], [1e9], [np.nan], [np.nan], 0.0)[0]
    assert_allclose(1 - abs(g) / 100, 0.01, rtol=0.02)


def test_gain_20_on_10_volt_rails_clips_just_below_the_rails() -> None:
    # common practice, no source: gain 20 V/V on ±10 V asked for 10 V peak clips just below
    # the rails, even on a rail-to-rail output (50 mV headroom here)
    parts = pd.DataFrame([good_part(out_head_pos_v=0.05, out_head_neg_v=0.05)], index=["rro"])
    req = Requirement("non-inverting", 20.0, 10.0, -10.0, 1e3, vin_pk=0.5, margin=1.0, tolerance=0.0)
    sel = select(parts, req)
    assert sel.rejected[0].fails == ["swing"]
    amp = next(m for m in sel.nearest[0].moves if m.axis == "amplitude")
    assert_allclose(amp.value, 9.95, rtol=1e-4)
    assert amp.value < 10.0


def test_loads_of_a_kilohm_are_light_for_output_resistance_under_100_ohm() -> None:
    # common practice, no source: Ro under 100 Ω hardly matters into 1 kΩ or more
    for topo, gain in (("inverting", 10.0), ("non-inverting", 10.0), ("follower", 1.0)):
        req = Requirement(topo, gain, 15.0, -15.0, 1e3, vin_pk=0.1, load_ohm=1e3, tolerance=0.0)  # type: ignore[arg-type]
        for f in (0.0, 1e3):  # where the loop gain is large (DC and 1 kHz on a 1 MHz part)
            g = closed_loop_gain(stage(req), [1e5, 1e5], [1e6, 1e6], [1e6, 1e6], [0.0, 100.0], f)
            assert abs(abs(g[1]) / abs(g[0]) - 1) < 1e-3


def demo_rows() -> list[dict[str, str]]:
    with DEMO.open(encoding="utf-8") as f:
        return list(csv.DictReader(f))


def values(name: str) -> np.ndarray:
    return np.array([float(r[name]) for r in demo_rows() if r[name]])


def test_output_currents_under_10_ma_rarely_hit_the_limit() -> None:
    # common practice, no source: under about ±10 mA the output limit is rarely reached
    # (micropower parts are the exception)
    frame = pd.read_csv(DEMO).set_index("label")
    req = Requirement("non-inverting", 2.0, 15.0, -15.0, 1e3, vout_pk=4.0, load_ohm=1e3,
                      rf_ohm=1e6, margin=1.0, tolerance=0.0)  # 4 mA into the load, 4 µA into the network
    sel = select(frame, req)
    status = np.array(sel.table.results["output_current"].statuses())
    known = status != "unknown"
    assert known.sum() >= 10
    assert (status[known] == "pass").mean() >= 0.9


def test_demo_parameters_sit_in_the_usual_ranges() -> None:
    # common practice, no source: Rin from ~100 kΩ to the GΩ-TΩ range, bias currents from
    # tens of µA to below a nA, offsets a few mV
    rin, ib, vos = values("rin_ohm"), values("ib_a"), values("vos_v")
    assert rin.min() >= 1e5 and rin.max() <= 1e13
    assert ib.max() <= 1e-4 and ib.min() < 1e-9
    assert np.median(vos) <= 5e-3 and vos.max() <= 10e-3


def test_five_percent_resistors_cannot_hold_a_one_percent_gain() -> None:
    # common practice, no source: a 1% gain error is better than 5%-tolerance resistors give
    parts = pd.DataFrame([good_part()], index=["ideal"])
    nominal = Requirement("inverting", 10.0, 15.0, -15.0, 1e3, vin_pk=0.1,
                          network={"rf": 10e3, "rg": 1e3}, tolerance=0.0)
    corner = nominal.with_changes(network={"rf": 10e3 * 1.05, "rg": 1e3 * 0.95})
    assert [e.part for e in select(parts, nominal).accepted] == ["ideal"]
    worst = select(parts, corner)
    assert worst.rejected[0].fails == ["gain_accuracy"]
    err = worst.table.results["gain_accuracy"].has[0]
    assert_allclose(err, 1.05 / 0.95 - 1, rtol=1e-6)
    assert err > 5 * 0.01 and math.isfinite(err)
