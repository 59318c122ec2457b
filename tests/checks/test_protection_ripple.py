"""input_protection and the rail-ripple terms of offset and noise against sympy nodal
analysis of each stage's own resistors (not picker's reduced circuit)."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
import sympy as sp
from numpy.testing import assert_allclose

from picker.checks import Parts, run_checks
from picker.checks.accuracy import NOISE, OFFSET, RIPPLE_LEAVES_OUT, ripple_out
from picker.checks.protection import (
    CLAMP_CURRENT_A,
    INPUT_PROTECTION,
    differential_step,
    path_resistance,
    series_for_clamp,
)
from picker.design.requirement import Requirement
from picker.design.spec import minimum_specs

RS = 600.0
STAGES = {
    "follower": Requirement("follower", 1.0, 15.0, -15.0, 1e3, vin_pk=2.0, source_ohm=RS,
                            network={"rf": 4.7e3, "rp": 1e3}),
    "non-inverting": Requirement("non-inverting", 5.0, 15.0, -15.0, 1e3, vin_pk=1.0,
                                 source_ohm=RS, network={"rf": 40e3, "rg": 10e3}),
    "inverting": Requirement("inverting", 4.0, 15.0, -15.0, 1e3, vin_pk=1.5, source_ohm=RS,
                             network={"rf": 20e3, "rg": 5e3, "rp": 4e3}),
    "difference": Requirement("difference", 2.0, 15.0, -15.0, 1e3, vin_pk=3.0,
                              source_ohm=RS,
                              network={"r1": 10e3, "r2": 20e3, "r3": 11e3, "r4": 22e3}),
}


def nodal(req: Requirement, vin: sp.Expr, vo: sp.Expr | None,
          extra_p: sp.Expr | float = 0.0) -> tuple[sp.Expr, sp.Expr, sp.Expr]:
    """(vp, vn, vo) of the stage's own circuit by nodal analysis (sympy): inputs draw no
    current; the output either held at ``vo`` or, when None, set by an ideal op-amp
    (the voltage at the op-amp's + pin, ``vp + extra_p``, equal to vn). ``extra_p`` is
    a source in series with the non-inverting input (the input-referred ripple)."""
    net, t = dict(req.network or {}), req.topology
    p, n, o = sp.symbols("p n o")
    eqs = []
    if t == "follower":
        eqs += [sp.Eq(p, vin), sp.Eq(n, o)]  # no current through Rs, rp, rf
    elif t == "non-inverting":
        eqs += [sp.Eq(p, vin), sp.Eq((o - n) / net["rf"] - n / net["rg"], 0)]
    elif t == "inverting":
        eqs += [sp.Eq(p, 0), sp.Eq((vin - n) / (RS + net["rg"]) + (o - n) / net["rf"], 0)]
    else:  # balanced source: +v/2 into r3 (r4 to ref), -v/2 into r1 (r2 to the output)
        eqs += [sp.Eq((vin / 2 - p) / (RS + net["r3"]) - p / net["r4"], 0),
                sp.Eq((-vin / 2 - n) / (RS + net["r1"]) + (o - n) / net["r2"], 0)]
    eqs.append(sp.Eq(o, vo) if vo is not None else sp.Eq(p + extra_p, n))
    sol = sp.solve(eqs, [p, n, o], dict=True)[0]
    return sol[p], sol[n], sol[o]


@pytest.mark.parametrize("name", list(STAGES))
def test_differential_step_against_sympy_nodal_analysis(name: str) -> None:
    req = STAGES[name]
    s = minimum_specs(req)
    vp = req.vin
    _, _, start = nodal(req, sp.S(-vp), None)  # settled at the negative peak
    p, n, _ = nodal(req, sp.S(vp), start)  # the input steps to +Vp, the output held
    # reference: sympy nodal analysis of the stage's own resistors
    assert_allclose(differential_step(s), abs(float(p - n)), rtol=1e-12)
    if name in ("follower", "non-inverting"):
        assert_allclose(differential_step(s), 2 * vp, rtol=1e-12)  # the full step


def test_boundary_and_unknown() -> None:
    """vdiff max 2% either side of the need: pass, fail; blank: unknown."""
    s = minimum_specs(STAGES["inverting"])
    need = differential_step(s)
    # clamped inputs (<= 2 V) tolerate the clamp voltage plus 10 mA over the path
    # between the pins (Ohm's law; the 2 V and 10 mA are common practice, no source)
    drop = CLAMP_CURRENT_A * path_resistance(s.stage)
    frame = pd.DataFrame({"vdiff_max_v": [v if v > 2 else v - drop
                                          for v in (1.02 * need, 0.98 * need)] + [np.nan]},
                         index=["above", "below", "blank"])
    r = run_checks(frame, s).results["input_protection"]
    assert r.statuses() == ["pass", "fail", "unknown"]
    assert_allclose(r.margin[:2], [1.02, 0.98], rtol=1e-12)


def test_clamp_resistor_limits_the_current() -> None:
    """With the suggested resistor added, the step less the clamp voltage over the whole
    path gives exactly the stated clamp current (Ohm's law; 10 mA is common practice,
    no source)."""
    bare = minimum_specs(Requirement("follower", 1.0, 15.0, -15.0, 1e3, vin_pk=2.0))
    assert path_resistance(bare.stage) == 0.0  # a wire from the source, rf = 0
    r = series_for_clamp(bare, 0.7)
    assert_allclose((differential_step(bare) - 0.7) / r, CLAMP_CURRENT_A, rtol=1e-12)
    s = minimum_specs(STAGES["follower"])
    assert path_resistance(s.stage) == RS + 1e3 + 4.7e3  # Rs + rp + rf, output held
    assert series_for_clamp(s, 0.7) == 0.0  # 3.3 V over 6.3 kΩ: 0.52 mA already
    part = Parts.from_columns(["x"], {"vdiff_max_v": [0.7]})
    text = INPUT_PROTECTION.detail(bare, part, 0)
    assert "common practice, no source" in text and "add 330 Ω" in text
    # its noise: √(4kT·330 Ω) at 25 °C, k = 1.380649e-23 J/K (exact, SI 2019; CODATA 2018)
    en = math.sqrt(4 * 1.380649e-23 * 298.15 * 330.0)
    assert f"{en * 1e9:.3g} nV/√Hz" in text
    assert "already limits" in INPUT_PROTECTION.detail(s, part, 0)


@pytest.mark.parametrize("name", list(STAGES))
def test_ripple_at_the_output_against_sympy(name: str) -> None:
    """Output ripple = Vr·10^(-PSRR/20)·NG against nodal analysis of the stage with the
    input-referred ripple as a source in series with the non-inverting input and the
    signal at rest (sympy)."""
    vr, psrr = 0.025, 80.0
    req = STAGES[name].with_changes(ripple=(vr, 100.0))
    s = minimum_specs(req)
    parts = Parts.from_columns(["x"], {"psrr_db": [psrr]})
    _, _, out = nodal(req, sp.S(0), None, extra_p=sp.S(vr) * sp.S(10) ** (-sp.S(psrr) / 20))
    assert_allclose(ripple_out(parts, s)[0], abs(float(out)), rtol=1e-12)


def test_ripple_enters_offset_and_noise() -> None:
    """The offset adds the ripple peak, the noise its RMS in power (a sine is peak/√2,
    common practice, no source); without PSRR both are unknown unless already failing."""
    req = STAGES["non-inverting"].with_changes(ripple=(0.05, 100.0), offset_max_v=10e-3,
                                               noise_max_v=1e-3, margin=1.0)
    s = minimum_specs(req)
    base = dict(vos_v=1e-3, drift_v_per_c=0.0, ib_a=0.0, ios_a=0.0, en_v_per_rthz=10e-9,
                in_a_per_rthz=0.0, gbw_hz=1e6, aol_v_per_v=1e6, rin_ohm=1e12, rout_ohm=0.0)
    frame = pd.DataFrame([{**base, "psrr_db": 60.0}, {**base, "psrr_db": np.nan}],
                         index=["known", "blank"])
    ripple = 0.05 * 10 ** (-60 / 20) * 5.0  # Vr·10^(-PSRR/20)·NG, NG = 5
    t = run_checks(frame, s)
    off = t.results["offset"].record(0)
    assert_allclose(off["has"], 5.0 * 1e-3 + ripple, rtol=1e-12)
    assert_allclose(off["ripple_v"], ripple, rtol=1e-12)
    without = run_checks(frame, minimum_specs(req.with_changes(ripple=None)))
    noise0 = float(without.results["noise"].has[0])
    noise = t.results["noise"].record(0)
    assert_allclose(noise["has"], math.sqrt(noise0**2 + (ripple / math.sqrt(2)) ** 2),
                    rtol=1e-12)
    assert t.results["offset"].status(1) == "unknown"
    assert t.results["noise"].status(1) == "unknown"
    assert "psrr_db" in OFFSET.needed(s) and "psrr_db" in NOISE.needed(s)
    assert "psrr_db" not in OFFSET.needed(minimum_specs(req.with_changes(ripple=None)))
    rows = {e.name: e.numbers for e in s.explain}
    assert RIPPLE_LEAVES_OUT in rows["offset_ripple"] and RIPPLE_LEAVES_OUT in rows["noise_ripple"]


def test_ripple_can_fail_the_offset() -> None:
    """PSRR 2% either side of where the ripple alone fills the offset budget."""
    vr, ng, limit = 0.1, 5.0, 2e-3
    req = STAGES["non-inverting"].with_changes(ripple=(vr, 100.0), offset_max_v=limit,
                                               margin=1.25)
    s = minimum_specs(req)
    # ripple·NG·10^(-PSRR/20) = limit/m/k  ->  PSRR = 20·log10(k·vr·NG·m/limit)
    psrr = [20 * math.log10(k * vr * ng * 1.25 / limit) for k in (1.02, 0.98)]
    frame = pd.DataFrame({"vos_v": [0.0, 0.0], "drift_v_per_c": [0.0, 0.0], "ib_a": [0.0, 0.0],
                          "ios_a": [0.0, 0.0], "psrr_db": psrr}, index=["above", "below"])
    r = run_checks(frame, s).results["offset"]
    assert r.statuses() == ["pass", "fail"]
    assert_allclose(r.margin, [1.02, 0.98], rtol=1e-9)
