"""Minimum specifications against sympy, ngspice and hand calculations."""

from __future__ import annotations

import math
from dataclasses import fields
from pathlib import Path

import pytest
import sympy as sp
from numpy.testing import assert_allclose

from picker.checks import applicable
from picker.design.requirement import Requirement
from picker.design.spec import Minimums, minimum_specs
from tests.design.reference import OpAmp, ngspice_dc, ngspice_gains, stage_circuit, sympy_gain

STAGES = [
    Requirement("inverting", 10.0, 12.0, -12.0, 20e3, vin_pk=0.5, source_ohm=600.0, load_ohm=2e3, tolerance=0.0),
    Requirement("non-inverting", 20.0, 15.0, -15.0, 10e3, vout_pk=8.0, source_ohm=47e3,
                load_ohm=10e3, gain_error=0.005, tolerance=0.0),
    Requirement("follower", 1.0, 5.0, -5.0, 50e3, vin_pk=2.0, source_ohm=100e3, load_ohm=1e3,
                margin=1.5, tolerance=0.0),
    Requirement("follower", 1.0, 15.0, -15.0, 100e3, vin_pk=1.0, load_ohm=600.0, tolerance=0.0),
    Requirement("difference", 2.0, 15.0, -15.0, 10e3, vin_pk=1.0, source_ohm=100.0,
                load_ohm=5e3, gain_error=0.02, margin=1.0, tolerance=0.0),
]


def at_minimums(req: Requirement) -> OpAmp:
    mn = minimum_specs(req).minimum
    return OpAmp(mn.aol_v_per_v, mn.gbw_hz, mn.rin_ohm, None)  # type: ignore[arg-type]


def circuit(req: Requirement, amp: OpAmp):  # type: ignore[no-untyped-def]
    s = minimum_specs(req)
    net = {k: v for k, v in s.stage.resistors.items() if math.isfinite(v) and v > 0}
    return stage_circuit(req.topology, req.topology, net, req.source_ohm, req.load_ohm, amp)


@pytest.mark.parametrize("req", STAGES, ids=lambda r: r.topology)
def test_part_at_the_minimums_lands_on_the_budget_sympy(req: Requirement) -> None:
    """A0, Rin and GBW at their minimums (Ro = 0): the exact gain error equals the budget."""
    s = minimum_specs(req)
    c = circuit(req, at_minimums(req))
    g_f = complex(sp.N(sympy_gain(c, req.freq_hz), 30))
    g_dc = complex(sp.N(sympy_gain(c, None), 30))
    # sympy nodal analysis of the unreduced circuit: |G(j2πf)|/G = 1 - gain error/margin
    assert_allclose(abs(g_f) / req.gain, 1 - req.gain_error / req.margin, rtol=1e-12)
    # ... and at DC the loss is the DC share (a fifth of the budget)
    assert_allclose(1 - abs(g_dc) / req.gain, s.budget.dc, rtol=1e-9)
    assert_allclose(s.budget.dc, req.gain_error / req.margin / 5, rtol=1e-12)


def test_part_at_the_minimums_lands_on_the_budget_ngspice(tmp_path: Path) -> None:
    circuits = [type(c)(str(i), c.elements)
                for i, c in enumerate(circuit(r, at_minimums(r)) for r in STAGES)]
    freqs = [r.freq_hz for r in STAGES]
    ref = ngspice_gains(circuits, freqs, tmp_path)
    for i, req in enumerate(STAGES):
        # ngspice .ac of the same circuit at the stage's top frequency
        g = ref[str(i)][1 + i]
        assert_allclose(abs(g) / req.gain, 1 - req.gain_error / req.margin, rtol=1e-6)


@pytest.mark.parametrize("req", STAGES, ids=lambda r: r.topology)
def test_gbw_is_the_single_pole_bound_when_a0_is_large(req: Requirement) -> None:
    """With an ideal A0 the same budget needs less GBW than the minimum, never more.

    Single-pole closed loop (common practice, no source): |G(jf)| = G/√(1 + (f·NG/GBW)²).
    """
    s = minimum_specs(req)
    e = req.gain_error / req.margin
    single_pole = req.freq_hz * s.noise_gain / math.sqrt(1 / (1 - e) ** 2 - 1)
    assert single_pole < s.minimum.gbw_hz  # type: ignore[operator]
    assert s.minimum.gbw_hz < 2.5 * single_pole  # type: ignore[operator]


def test_slew_and_current_by_hand() -> None:
    req = Requirement("inverting", 10.0, 12.0, -12.0, 20e3, vin_pk=0.5, load_ohm=2e3, tolerance=0.0)
    s = minimum_specs(req)
    # by hand: 2π × 20 kHz × 5 V × 1.25 = 0.785 V/µs
    assert_allclose(s.minimum.slew_v_per_s, 2 * math.pi * 20e3 * 5 * 1.25, rtol=1e-12)
    assert_allclose(s.minimum.slew_v_per_s, 0.785398e6, rtol=1e-6)
    # by hand: 5 V into 2 kΩ plus 5 V across rf = 10 kΩ (virtual ground), × 1.25 = 3.75 mA
    assert_allclose(s.minimum.iout_a, 3.75e-3, rtol=1e-12)
    # by hand: the stated 5 V peak on the 0 V reference, not scaled by the margin
    assert s.minimum.swing_pos_v == 5.0 and s.minimum.swing_neg_v == -5.0
    assert s.minimum.supply_span_v == 24.0


def test_output_current_matches_ngspice(tmp_path: Path) -> None:
    """Output current per volt out into load and network: ngspice .op with A0 = 1e9."""
    amp = OpAmp(1e9, 1e9, None, None)
    reqs = [r.with_changes(margin=1.0) for r in STAGES]
    sims = [(circuit(r, amp), []) for r in reqs]
    for req, (v, i) in zip(reqs, ngspice_dc(sims, tmp_path), strict=True):
        s = minimum_specs(req)
        # ngspice .op: |i_out/v_out| of the macromodel's output source
        assert_allclose(s.minimum.iout_a / req.vout, abs(i / v), rtol=1e-6)


def test_spec_json_shape_and_explain() -> None:
    s = minimum_specs(STAGES[0])
    js = s.to_json()
    assert set(js) == {"signal_gain", "noise_gain", "margin", "min", "budget"}
    assert tuple(js["min"]) == tuple(f.name for f in fields(Minimums))
    assert js["margin"] == 1.25 and js["signal_gain"] == 10.0 and js["noise_gain"] == 11.0
    names = [e.name for e in s.explain]
    for check in applicable(s):  # every check explains its need, under its own name
        assert check.name in names
    for e in s.explain:
        assert e.formula and e.numbers and e.title


def test_follower_from_a_stiff_source_needs_no_input_resistance() -> None:
    s = minimum_specs(STAGES[3])
    assert s.minimum.rin_ohm is None
    assert s.budget.input_resistance is None
    assert s.to_json()["min"]["rin_ohm"] is None
