"""Parts 2% either side of each minimum specification pass and fail on exactly that check.

Cases are the stage requirements in tests/data/design_cases.toml. For each, a
comfortable part (one that passes every check) is varied in one respect only: its
parameter is set 2% beyond or short of what the stage needs, computed here from the
minimum specifications (and, for offset and noise, from the physics written out below).
"""

from __future__ import annotations

import math
import tomllib
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from picker.checks import run_checks
from picker.design.requirement import Requirement
from picker.design.spec import Spec, minimum_specs
from tests.checks.test_thermal import integrated

CASES = tomllib.loads((Path(__file__).parents[1] / "data" / "design_cases.toml").read_text())["case"]
K_B = 1.380649e-23  # J/K, exact (SI 2019; CODATA 2018)


def requirement(case: dict[str, Any]) -> Requirement:
    return Requirement.from_mapping({k: v for k, v in case.items() if k != "name"}, "case: ")


def comfortable(s: Spec) -> dict[str, float]:
    """A part with room on every check of this stage."""
    mn = s.minimum
    return {
        "slew_v_per_s": 10 * mn.slew_v_per_s, "gbw_hz": 2 * mn.gbw_hz,
        "aol_v_per_v": 1e9, "rin_ohm": 1e15, "rout_ohm": 0.0,
        "out_head_pos_v": 0.0, "out_head_neg_v": 0.0, "out_rsat_pos_ohm": 0.0,
        "out_rsat_neg_ohm": 0.0, "cm_head_pos_v": 0.0, "cm_head_neg_v": 0.0,
        "iout_a": 10 * mn.iout_a + 1e-3,
        "supply_min_v": 0.5 * mn.supply_span_v, "supply_max_v": 2 * mn.supply_span_v,
        "vos_v": 0.0, "drift_v_per_c": 0.0, "ib_a": 0.0, "ios_a": 0.0,
        "en_v_per_rthz": 0.0, "in_a_per_rthz": 0.0, "qty": 1000.0, "channels": 1.0,
        "iq_a": 1e-3, "theta_ja_c_per_w": 1.0, "tj_max_c": s.requirement.temp_max_c + 100.0,
        "vdiff_max_v": 10 * s.requirement.vin + 1.0, "psrr_db": 200.0,
        "pm_unity_deg": 89.9, "cin_diff_f": 0.0, "cin_cm_f": 0.0,
    }  # type: ignore[dict-item]


def package_power(s: Spec, part: dict[str, float]) -> float:
    """One channel's power written out: Iq on the rail span plus the output stage's v·i
    integrated numerically over a period of the sine into R_eff (numpy)."""
    req = s.requirement
    g = s.stage.amps_per_volt_out
    out = integrated(req.rail_pos, req.rail_neg, req.ref, req.vout, 1 / g) if g > 0 else 0.0
    return part["iq_a"] * req.span + out


def input_step(s: Spec) -> float:
    """The differential input voltage of a 2·Vp,in input step with the output held:
    the non-inverting input moves by kp per volt, the inverting one by the divider
    kg·rf/(rg + rf) (nodal analysis of the reduced circuit, any circuits text)."""
    st = s.stage
    to_n = 0.0 if math.isinf(st.rg) else st.kg * st.rf / (st.rg + st.rf)
    return 2 * s.requirement.vin * abs(st.kp - to_n)


def follower_margin_for(s: Spec, gbw_hz: float, pm_stage_deg: float) -> float:
    """The follower phase margin that gives the stage ``pm_stage_deg``, written out.

    With Ro = 0, no input capacitance and Rin -> ∞ the feedback factor is 1/NG at every
    frequency, and with A0 -> ∞ the two-pole loop T = ωu/(NG·s·(1 + s/ωp2)) has
    PM = 90° - atan(ωc/ωp2) at ωc = (ωu/NG)·sin PM; as a follower (NG = 1) the same
    relation gives ωp2 = ωu·sin²PMu/cos PMu, solved for cos PMu (two-pole phase margin,
    e.g. Franco, Design with Operational Amplifiers and Analog Integrated Circuits, 4th ed.,
    ch. 6, from memory).
    """
    ng = s.stage.noise_gain
    pm = math.radians(pm_stage_deg)
    wu = 2 * math.pi * gbw_hz
    wc = wu / ng * math.sin(pm)
    wp2 = wc * math.tan(pm)  # ωc/ωp2 = tan(90° - PM)
    r = wp2 / wu
    c = (-r + math.sqrt(r * r + 4)) / 2
    return math.degrees(math.acos(c))


def output_noise(s: Spec, part: dict[str, float]) -> float:
    """Output RMS noise written out: densities at the output over π/2 × closed-loop pole.

    en·NG and the resistors' 4kTR (rf: gain 1; rg with the source: rf/rg; the
    non-inverting input's resistance: NG); f_cl = GBW/A0 + GBW/NG (Rin -> ∞, Ro = 0).
    """
    st, req = s.stage, s.requirement
    ng = 1 + (0 if math.isinf(st.rg) else st.rf / st.rg)
    r = st.rf + (0 if math.isinf(st.rg) else st.rf**2 / st.rg) + st.zp * ng**2
    density2 = (part["en_v_per_rthz"] * ng) ** 2 + 4 * K_B * (req.temp_max_c + 273.15) * r
    f_cl = part["gbw_hz"] / part["aol_v_per_v"] + part["gbw_hz"] / ng
    return math.sqrt(density2 * math.pi / 2 * f_cl)


def variants(s: Spec, k: float) -> dict[str, dict[str, float]]:
    """check name -> a part whose parameter for that check is at k times its limit.

    k > 1 is on the good side: k x the need, or (for errors) the limit / k.
    """
    req, mn, st = s.requirement, s.minimum, s.stage
    base = comfortable(s)
    out: dict[str, dict[str, float]] = {}
    out["slew"] = {**base, "slew_v_per_s": k * mn.slew_v_per_s}
    up, down = mn.swing_pos_v - req.ref, req.ref - mn.swing_neg_v
    out["swing"] = {**base, "out_head_pos_v": req.rail_pos - req.ref - k * up,
                    "out_head_neg_v": req.ref - req.rail_neg - k * down}
    lo, hi = s.common_mode
    if hi > lo:
        out["common_mode"] = {**base, "cm_head_pos_v": req.rail_pos - req.ref - k * (hi - req.ref),
                              "cm_head_neg_v": req.ref - req.rail_neg - k * (req.ref - lo)}
    if mn.iout_a:
        out["output_current"] = {**base, "iout_a": k * mn.iout_a}
    # Tj = Ta + θ·P at k times the headroom: θ = (Tj,max - Ta)/(k·P) (common practice)
    out["dissipation"] = {**base, "theta_ja_c_per_w": 100.0 / (k * package_power(s, base))}
    # clamped inputs (<= 2 V) tolerate 10 mA through the resistance between the pins
    # more (Ohm's law; common practice, no source); a clamped part below the need may
    # not exist when that resistance is large
    step = k * input_step(s)
    vdiff = step if step > 2 else step - 10e-3 * (st.zp + (st.rf if math.isinf(st.rg) else (
        st.rg * st.rf / (st.rg + st.rf) if st.rg + st.rf > 0 else 0.0)))
    if vdiff > 0:
        out["input_protection"] = {**base, "vdiff_max_v": vdiff}
    out["supply_max"] = {**base, "supply_max_v": k * req.span}
    out["supply_min"] = {**base, "supply_min_v": req.span / k}
    rin = mn.rin_ohm or 1e15
    at_min = {**base, "aol_v_per_v": mn.aol_v_per_v, "gbw_hz": mn.gbw_hz, "rin_ohm": rin}
    out["gain_accuracy_gbw"] = {**at_min, "gbw_hz": k * mn.gbw_hz}
    out["gain_accuracy_a0"] = {**at_min, "aol_v_per_v": k * mn.aol_v_per_v}
    if mn.rin_ohm is not None:
        out["gain_accuracy_rin"] = {**at_min, "rin_ohm": k * rin}
    need = req.phase_margin_deg
    out["stability_pm"] = {**base, "pm_unity_deg": follower_margin_for(s, base["gbw_hz"],
                                                                       k * need)}
    # the part's minimum stable noise gain 2% below (pass) or above (fail) the stage's
    # (common practice, no source: a decompensated part needs NG >= its minimum)
    out["stability_min_noise_gain"] = {**base, "min_noise_gain": st.noise_gain / k}
    if req.offset_max_v is not None:
        ng = 1 + (0 if math.isinf(st.rg) else st.rf / st.rg)
        # offset = NG·Vos with no bias currents and no drift (Franco, 4th ed., ch. 5, from memory)
        out["offset"] = {**base, "vos_v": req.offset_max_v / req.margin / k / ng}
    if req.noise_max_v is not None:
        target = req.noise_max_v / req.margin / k
        part = dict(base)
        r_only = output_noise(s, part)
        assert r_only < target, "case: the resistors alone are too noisy for this test"
        ng = 1 + (0 if math.isinf(st.rg) else st.rf / st.rg)
        enbw = math.pi / 2 * (part["gbw_hz"] / part["aol_v_per_v"] + part["gbw_hz"] / ng)
        en = math.sqrt((target**2 - r_only**2) / enbw) / ng
        out["noise"] = {**part, "en_v_per_rthz": en}
        assert math.isclose(output_noise(s, out["noise"]), target, rel_tol=1e-12)
    return out


CHECK_OF = {"supply_max": "supply", "supply_min": "supply", "gain_accuracy_gbw": "gain_accuracy",
            "stability_pm": "stability", "stability_min_noise_gain": "stability",
            "gain_accuracy_a0": "gain_accuracy", "gain_accuracy_rin": "gain_accuracy"}


@pytest.mark.parametrize("case", CASES, ids=[c["name"] for c in CASES])
def test_comfortable_part_passes_everything(case: dict[str, Any]) -> None:
    s = minimum_specs(requirement(case))
    table = run_checks(pd.DataFrame([comfortable(s)], index=["comfortable"]), s)
    assert {n: r.status(0) for n, r in table.results.items()} == {n: "pass" for n in table.results}
    rejection = {"common_mode_rejection"} if s.requirement.topology == "difference" else set()
    assert set(table.results) == {"swing", "common_mode", "slew", "gain_accuracy", "stability",
                                  "output_current", "supply", "dissipation",
                                  "input_protection", "offset", "noise", "stock"} | rejection


@pytest.mark.parametrize("case", CASES, ids=[c["name"] for c in CASES])
@pytest.mark.parametrize("k,expected", [(1.02, "pass"), (0.98, "fail")], ids=["above", "below"])
def test_two_percent_either_side(case: dict[str, Any], k: float, expected: str) -> None:
    s = minimum_specs(requirement(case))
    parts = variants(s, k)
    frame = pd.DataFrame(list(parts.values()), index=list(parts))
    table = run_checks(frame, s)
    assert len(parts) >= 8
    for i, name in enumerate(parts):
        check = CHECK_OF.get(name, name)
        got = {n: str(r.status(i)) for n, r in table.results.items()}
        want = {n: "pass" for n in got} | {check: expected}
        assert got == want, f"{name} at {k:g}: {got}"
        margin = table.results[check].margin[i]  # type: ignore[index]
        assert (margin >= 1) == (expected == "pass")


@pytest.mark.parametrize("case", CASES[:1], ids=[CASES[0]["name"]])
def test_stock_counts_channels(case: dict[str, Any]) -> None:
    req = requirement(case).with_changes(qty=5)
    s = minimum_specs(req)
    base = comfortable(s)
    rows = {"three duals": {**base, "qty": 3.0, "channels": 2.0},
            "two duals": {**base, "qty": 2.0, "channels": 2.0},
            "five, channels unknown": {**base, "qty": 5.0, "channels": np.nan},
            "four, channels unknown": {**base, "qty": 4.0, "channels": np.nan}}
    table = run_checks(pd.DataFrame(list(rows.values()), index=list(rows)), s)
    assert table.results["stock"].statuses() == ["pass", "fail", "pass", "unknown"]


RIPPLE_V = 0.05  # 100 mVpp on the rails


@pytest.mark.parametrize("case", CASES, ids=[c["name"] for c in CASES])
@pytest.mark.parametrize("k,expected", [(1.02, "pass"), (0.98, "fail")], ids=["above", "below"])
@pytest.mark.parametrize("check", ["offset", "noise"])
def test_ripple_two_percent_either_side(case: dict[str, Any], k: float, expected: str,
                                        check: str) -> None:
    """With --ripple, a PSRR that puts the ripple term (offset: peak, added; noise: RMS =
    peak/√2, added in power to the resistors' noise) at k times the allowed error; the
    other limit is left out of the requirement (one PSRR feeds both). Ripple at the
    output = Vr·10^(-PSRR/20)·NG (input-referred, common practice, no source)."""
    other = {"offset": "noise_max_v", "noise": "offset_max_v"}[check]
    req = requirement(case).with_changes(ripple=(RIPPLE_V, 100.0), **{other: None})
    s = minimum_specs(req)
    st = s.stage
    ng = 1 + (0 if math.isinf(st.rg) else st.rf / st.rg)
    base = comfortable(s)
    if check == "offset":
        assert req.offset_max_v is not None
        rms_or_peak = req.offset_max_v / req.margin / k
    else:
        assert req.noise_max_v is not None
        target = req.noise_max_v / req.margin / k
        rms_or_peak = math.sqrt(2 * (target**2 - output_noise(s, base) ** 2))
    part = {**base, "psrr_db": -20 * math.log10(rms_or_peak / (RIPPLE_V * ng))}
    table = run_checks(pd.DataFrame([part], index=[check]), s)
    got = {n: str(r.status(0)) for n, r in table.results.items()}
    assert got == {n: "pass" for n in got} | {check: expected}, f"{check} at {k:g}: {got}"
    assert_allclose(table.results[check].margin[0], k, rtol=1e-6)
