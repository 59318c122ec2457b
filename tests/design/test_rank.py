"""Ranking, rejections, unverified parts, nearest misses and the JSON shape of a pick."""

from __future__ import annotations

import json
from dataclasses import fields

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from picker.checks import by_name
from picker.design.rank import select
from picker.design.requirement import Requirement
from picker.design.spec import Minimums
from picker.errors import BadValue

REQ = Requirement("non-inverting", 10.0, 12.0, -12.0, 10e3, vin_pk=0.5, load_ohm=2e3, tolerance=0.0)
SLEW_NEED = 2 * np.pi * 10e3 * 5.0 * 1.25  # 2π·f·Vp,out·margin (common practice, no source)


def part(**changes: float) -> dict[str, float]:
    base = {"slew_v_per_s": 10e6, "gbw_hz": 20e6, "aol_v_per_v": 1e6, "rin_ohm": 1e12,
            "rout_ohm": 50.0, "out_head_pos_v": 1.0, "out_head_neg_v": 1.0,
            "out_rsat_pos_ohm": 20.0, "out_rsat_neg_ohm": 20.0,
            "cm_head_pos_v": 1.0, "cm_head_neg_v": 1.0, "iout_a": 0.03, "supply_min_v": 5.0,
            "supply_max_v": 36.0, "qty": 10.0, "channels": 1.0, "price": 1.0,
            "iq_a": 1e-3, "theta_ja_c_per_w": 100.0, "tj_max_c": 150.0, "vdiff_max_v": 30.0,
            "pm_unity_deg": 70.0, "cin_diff_f": 0.0, "cin_cm_f": 0.0}
    return {**base, **changes}


PARTS = pd.DataFrame.from_dict({
    "fast a": part(price=2.0, qty=10.0),
    "general b": part(slew_v_per_s=1.5 * SLEW_NEED, price=0.5, qty=100.0),
    "dual c": part(slew_v_per_s=1.2 * SLEW_NEED, price=0.7, qty=20.0, channels=2.0),
    "slow d": part(slew_v_per_s=0.5 * SLEW_NEED),
    "unknown e": part(slew_v_per_s=np.nan),
    "low voltage f": part(supply_max_v=6.0, out_head_pos_v=0.1, out_head_neg_v=0.1),
}, orient="index")


def test_accepted_rejected_unverified() -> None:
    sel = select(PARTS, REQ)
    assert [e.part for e in sel.accepted] == ["fast a", "general b", "dual c"]
    assert [(e.part, e.fails) for e in sel.rejected] == [("slow d", ["slew"]),
                                                         ("low voltage f", ["supply"])]
    assert [(e.part, e.unknown) for e in sel.unverified] == [("unknown e", ["slew"])]
    # the ranking margin of the slew-limited parts is their slew margin
    margins = {e.part: e.margin for e in sel.accepted}
    assert_allclose(margins["general b"], 1.5, rtol=1e-12)
    assert_allclose(margins["dual c"], 1.2, rtol=1e-12)


def test_orders_and_top() -> None:
    assert [e.part for e in select(PARTS, REQ, by="price").accepted] == [
        "general b", "dual c", "fast a"]
    assert [e.part for e in select(PARTS, REQ, by="stock").accepted] == [
        "general b", "dual c", "fast a"]  # 100 > 20 x 2 channels > 10
    assert [e.part for e in select(PARTS, REQ, top=1).accepted] == ["fast a"]
    with pytest.raises(BadValue, match="--by"):
        select(PARTS, REQ, by="colour")  # type: ignore[arg-type]


def test_strict_rejects_unknowns() -> None:
    sel = select(PARTS, REQ, strict=True)
    assert sel.unverified == []
    assert ("unknown e", ["slew"]) in [(e.part, e.fails) for e in sel.rejected]


def test_json_shape() -> None:
    js = json.loads(json.dumps(select(PARTS, REQ).to_json(), allow_nan=False))
    assert set(js) == {"spec", "accepted", "rejected", "unverified", "nearest"}
    assert set(js["spec"]) == {"signal_gain", "noise_gain", "margin", "min", "budget"}
    assert tuple(js["spec"]["min"]) == tuple(f.name for f in fields(Minimums))
    assert set(js["accepted"][0]) == {"part", "phase_at_f_deg", "phase_margin_deg", "peaking_db",
                                      "checks"}
    assert set(js["rejected"][0]) == {"part", "fails", "phase_at_f_deg", "phase_margin_deg",
                                      "peaking_db", "checks"}
    checks = js["accepted"][0]["checks"]
    assert list(checks) == ["swing", "common_mode", "slew", "gain_accuracy", "stability",
                            "output_current", "supply", "dissipation", "input_protection", "stock"]
    for name, record in checks.items():
        extra = {"power_w", "tj_c"} if name == "dissipation" else set()
        assert set(record) == {"status", "need", "has", "margin"} | extra
    slew = js["rejected"][0]["checks"]["slew"]
    assert slew["status"] == "fail"
    assert_allclose([slew["need"], slew["has"], slew["margin"]],
                    [SLEW_NEED, 0.5 * SLEW_NEED, 0.5], rtol=1e-12)


def test_nearest_misses_are_computed_moves() -> None:
    """Each reported move makes the part pass; a move 1% shorter does not."""
    parts = PARTS.loc[["slow d", "low voltage f"]]
    sel = select(parts, REQ)
    assert not sel.accepted
    slow = next(n for n in sel.nearest if n.part == "slow d")
    moves = {m.axis: m for m in slow.moves}
    assert set(moves) == {"freq", "amplitude", "gain", "load"}
    assert moves["load"].value is None  # a larger load does not help slew
    # slew need is linear in f and Vp,out: half the slew rate -> half the frequency, etc.
    assert_allclose(moves["freq"].value, 5e3, rtol=1e-4)
    assert_allclose(moves["amplitude"].value, 2.5, rtol=1e-4)
    assert_allclose(moves["gain"].value, 5.0, rtol=1e-4)
    for axis, field, scale in (("freq", "freq_hz", 1.0), ("gain", "gain", 1.0)):
        v = moves[axis].value
        assert v is not None
        ok = select(parts.loc[["slow d"]], REQ.with_changes(**{field: v * scale}))
        short = select(parts.loc[["slow d"]], REQ.with_changes(**{field: v * 1.01}))
        assert ok.accepted and not short.accepted
    fv = next(n for n in sel.nearest if n.part == "low voltage f")
    assert all(m.value is None for m in fv.moves)  # nothing but the rails would help


def test_parts_with_nothing_recorded_are_unverified_not_passed() -> None:
    bare = pd.DataFrame({"qty": [3.0]}, index=["bare"])
    req = REQ.with_changes(offset_max_v=0.1, noise_max_v=1e-3)
    sel = select(bare, req)
    assert sel.accepted == [] and sel.rejected == []
    assert sel.unverified[0].unknown == ["swing", "common_mode", "slew", "gain_accuracy",
                                         "stability", "output_current", "supply",
                                         "dissipation", "input_protection", "offset", "noise"]
    assert by_name("offset").needed(sel.spec) == ("vos_v", "ib_a", "ios_a")  # no drift at 25 °C
    empty = select(PARTS.iloc[:0], REQ)
    assert (empty.accepted, empty.rejected, empty.unverified, empty.nearest) == ([], [], [], [])


def test_nearest_misses_on_request_when_parts_pass() -> None:
    """--misses N: the moves are computed even when some parts are accepted, and they
    land in the JSON; slew need ∝ f·Vp (common practice, no source)."""
    sel = select(PARTS, REQ)
    assert sel.accepted and sel.nearest == []  # by default only when nothing passes
    sel = select(PARTS, REQ, misses=1)
    (slow,) = sel.nearest
    assert slow.part == "slow d"
    moves = {m.axis: m for m in slow.moves}
    assert_allclose(moves["freq"].value, 5e3, rtol=1e-4)  # half the slew rate: half f
    data = json.loads(json.dumps(sel.to_json()))
    (near,) = data["nearest"]
    assert near["part"] == "slow d" and near["fails"] == ["slew"]
    freq = next(m for m in near["moves"] if m["axis"] == "freq")
    assert_allclose([freq["from"], freq["to"], freq["change"]], [10e3, 5e3, -0.5], rtol=1e-4)
