"""Swing under load (one output model for pick and wave) and bias currents over temperature.

References: ngspice .tran of a behavioural macromodel whose output stage is the source
``V+ - head+`` behind Rsat+ (tests/design/macromodel_spice.py); hand arithmetic written
beside each temperature case; the issue's JFET follower (common practice, no source:
JFET input bias current doubles about every 10 °C).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
from numpy.testing import assert_allclose

from picker.checks import run_checks
from picker.design.requirement import Requirement
from picker.design.spec import minimum_specs
from picker.design.waveform import Drive, simulate
from tests.design.macromodel_spice import Part, tran

ROOMY = {"gbw_hz": 1e8, "slew_v_per_s": 1e9, "aol_v_per_v": 1e7, "rin_ohm": 1e12,
         "iout_a": 1.0}


def test_pick_swing_verdict_equals_wave_reaching_the_amplitude() -> None:
    """50 seeded stage/part pairs around the swing boundary: pick's swing verdict is the
    same as "the predicted peaks reach ref ± Vp" (pairs within the prediction's resolution,
    0.2% of the boundary, are counted, not judged)."""
    rng = np.random.default_rng(2024)
    judged = agree = 0
    for _ in range(50):
        topology = str(rng.choice(["inverting", "non-inverting", "follower"]))
        gain = 1.0 if topology == "follower" else float(rng.uniform(1.5, 10))
        net = None if topology == "follower" else {"rf": float(rng.uniform(2e3, 50e3))}
        if net is not None:
            net["rg"] = net["rf"] / (gain if topology == "inverting" else gain - 1)
        part = {**ROOMY, "rout_ohm": float(rng.uniform(0, 100)),
                "out_head_pos_v": float(rng.uniform(0.05, 2)),
                "out_head_neg_v": float(rng.uniform(0.05, 2)),
                "out_rsat_pos_ohm": float(rng.uniform(5, 300)),
                "out_rsat_neg_ohm": float(rng.uniform(5, 300))}
        load = float(rng.uniform(300, 10e3))
        base = Requirement(topology, gain, 12.0, -12.0, 1e3, vout_pk=1.0, load_ohm=load,
                           network=net)
        s = minimum_specs(base)
        g = s.stage.amps_per_volt_out
        reach = min((12 - part["out_head_pos_v"]) / (1 + part["out_rsat_pos_ohm"] * g),
                    (12 - part["out_head_neg_v"]) / (1 + part["out_rsat_neg_ohm"] * g))
        req = base.with_changes(vout_pk=reach * float(rng.uniform(0.9, 1.1)))
        s = minimum_specs(req)
        frame = pd.DataFrame([part], index=["p"])
        verdict = run_checks(frame, s).results["swing"]
        w = simulate(s.stage, frame, Drive.of(req, s.stage))
        vp = req.vout
        reaches = min(w.peak_pos[0] - req.ref, req.ref - w.peak_neg[0]) >= vp * (1 - 1e-3)
        if abs(float(verdict.margin[0]) - 1) < 2e-3:
            continue
        judged += 1
        agree += (verdict.status(0) == "pass") == bool(reaches)
    assert judged >= 45 and agree == judged


def test_swing_boundary_under_load_matches_ngspice(tmp_path: Path) -> None:
    """Non-inverting x2, ±10 V, 600 Ω: the output stage (9 V behind 50 Ω) reaches
    9/(1 + 50·(1/600 + 1/20k)) = 9/1.085833 = 8.2886 V (hand arithmetic)."""
    part = Part(gbw_hz=10e6, slew_v_per_s=50e6, aol_v_per_v=1e6, rin_ohm=1e12, rout_ohm=30,
                iout_a=0.1, out_head_pos_v=1.0, out_head_neg_v=1.0, out_rsat_pos_ohm=50.0,
                out_rsat_neg_ohm=50.0)
    boundary = 9 / (1 + 50 * (1 / 600 + 1 / 20e3))
    assert_allclose(boundary, 8.2886, rtol=1e-4)
    net = {"rf": 10e3, "rg": 10e3}
    req = Requirement("non-inverting", 2.0, 10.0, -10.0, 1e3, vout_pk=1.2 * boundary,
                      load_ohm=600, network=net)
    _, v = tran(req, part, 1e3, tmp_path, name="over")
    # source: ngspice .tran; the clipped peaks sit on the loaded limit, within 2%
    assert_allclose([v.max(), -v.min()], [boundary, boundary], rtol=0.02)
    for k, status in ((0.98, "pass"), (1.02, "fail")):
        r = req.with_changes(vout_pk=k * boundary)
        s = minimum_specs(r)
        assert run_checks(part.frame(), s).results["swing"].status(0) == status
        _, v = tran(r, part, 1e3, tmp_path, name=f"at{k}")
        # source: ngspice .tran; below the boundary the peak is reached, above it is not
        assert (v.max() >= 0.999 * k * boundary) == (status == "pass")


def test_light_load_opt_in_is_marked_assumed() -> None:
    req = Requirement("follower", 1.0, 2.5, -2.5, 1e3, vout_pk=2.3, load_ohm=600)
    part = {**ROOMY, "rout_ohm": 50.0, "out_head_pos_v": 0.1, "out_head_neg_v": 0.1}
    frame = pd.DataFrame([part], index=["p"])
    plain = run_checks(frame, minimum_specs(req)).results["swing"]
    assert plain.status(0) == "unknown"  # no Rsat and the output drives 600 Ω
    opted = run_checks(frame, minimum_specs(req.with_changes(light_load_swing=True)))
    rec = opted.results["swing"].record(0)
    assert rec["status"] == "pass" and "light-load" in rec["assumed"]
    assert_allclose(rec["has"], 2.4)  # 2.5 V - 0.1 V, no growth assumed


def _offset(part: dict[str, float], req: Requirement) -> dict[str, object]:
    frame = pd.DataFrame([part], index=["p"])
    return run_checks(frame, minimum_specs(req)).results["offset"].record(0)


def test_jfet_follower_from_100_megohm_fails_offset_over_temperature() -> None:
    # the case: Ib·Rs alone about 12.8 mV at 85 °C with Ib doubling every 10 °C
    # (common practice, no source): Ib(25 °C) = 2 pA, 2 pA × 2^6 × 100 MΩ = 12.8 mV
    req = Requirement("follower", 1.0, 15.0, -15.0, 1e3, vin_pk=1.0, source_ohm=100e6,
                      offset_max_v=1e-3, temp_min_c=-40.0, temp_max_c=85.0)
    part = {**ROOMY, "vos_v": 0.3e-3, "drift_v_per_c": 0.0, "ib_a": 2e-12, "ios_a": 0.5e-12,
            "tech": "JFET"}
    rec = _offset(part, req)
    assert rec["status"] == "fail"
    # 0.3 mV + 2 pA·64·100 MΩ + 0.5 pA/2·64·100 MΩ = 0.3 + 12.8 + 1.6 = 14.7 mV
    assert_allclose(rec["has"], 14.7e-3, rtol=1e-9)
    assert "10 °C" in str(rec["assumed"])
    at_25 = _offset(part, req.with_changes(temp_min_c=25.0, temp_max_c=25.0))
    assert at_25["status"] == "pass" and "assumed" not in at_25  # 0.525 mV at 25 °C


def test_hand_computed_offsets_at_both_ends() -> None:
    # bipolar, inverting x10 (rf 100 kΩ, rg 10 kΩ, NG 11), -40..85 °C, default -80 °C:
    # at -40 °C k = 2^(65/80) = 1.75625; 11·(1 mV + 5 µV·65) = 14.575 mV,
    # Ib 100 nA·100 kΩ·k = 17.5625 mV, Ios 10 nA·50 kΩ·k = 0.878126 mV -> 33.0156 mV;
    # at 85 °C k = 2^(-60/80) = 0.594604 -> 14.3 + 5.94604 + 0.297302 = 20.5433 mV
    req = Requirement("inverting", 10.0, 15.0, -15.0, 1e3, vin_pk=0.1, offset_max_v=0.1,
                      margin=1.0, temp_min_c=-40.0, temp_max_c=85.0,
                      network={"rf": 100e3, "rg": 10e3})
    part = {**ROOMY, "rout_ohm": 50.0, "vos_v": 1e-3, "drift_v_per_c": 5e-6, "ib_a": 100e-9,
            "ios_a": 10e-9, "tech": "bipolar"}
    k = 2 ** (65 / 80)
    assert_allclose(k, 1.75625, rtol=1e-5)
    assert_allclose(_offset(part, req)["has"], 33.0156e-3, rtol=1e-5)
    # the same part with its own interval, +20 °C (a bias-compensated input, invented):
    # at 85 °C k = 2^3 = 8: 14.3 + 80 + 4 = 98.3 mV; at -40 °C k = 2^(-3.25) = 0.105112:
    # 14.575 + 1.05112 + 0.052556 = 15.6787 mV -> 98.3 mV, and no assumption
    own = _offset({**part, "ib_double_c": 20.0}, req)
    assert_allclose(own["has"], 98.3e-3, rtol=1e-9)
    assert "assumed" not in own
    # no interval and no rule for the tech: unknown, unless it already fails
    none = _offset({**part, "tech": "unobtainium"}, req)
    assert none["status"] == "unknown"
