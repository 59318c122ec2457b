"""The transimpedance stage: its closed forms against the circuit solver, its noise
against hand integrals, boundary parts 2% either side of each new limit, and its
requirement's refusals.

Outside references named beside each check: the textbook closed forms of the photodiode
amplifier (J. G. Graeme, Photodiode Amplifiers: Op Amp Solutions, 1996, ch. 3, and
Horowitz and Hill, The Art of Electronics, 3rd ed., transimpedance amplifiers, both from
memory), IEC 60063 (the ``eseries`` package), CODATA k, and the Johnson-Nyquist
integral ∫4kTR/(1 + (f/fp)²) df = kT/C of an RC (any noise text, e.g. Horowitz and
Hill 3rd ed. ch. 8, from memory).
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from picker import api
from picker.checks import run_checks
from picker.checks.core import Parts
from picker.checks.tia import bias_limit, gbw_needs, output_noise
from picker.circuit.loopgain import Model, closed_loop
from picker.design.spec import Spec, minimum_specs
from picker.design.tianet import cf_for_q
from picker.errors import BadRequirement, PickerError
from picker.stages.transimpedance import KIND, TiaStage, f3db_of

K_B = 1.380649e-23  # J/K, exact (SI 2019; CODATA 2018)
STAGE = dict(topology="transimpedance", iin="10uA", cdet="20pF", zt="100k", f3db="200kHz",
             rails="±12", noise_max="1mV")


def solver_f3db(rf: float, cf: float, cd: float, gbw: float, a0: float = 1e6) -> float:
    """-3 dB frequency of the circuit through picker's solver, single-pole part (follower
    phase margin 90°: no second pole), found by bisection on |vo/I|."""
    net = KIND.tia_netlist(rf, cf, 1e6 * rf, cd, math.inf)
    m = Model.of([a0], [gbw], [90.0], [np.inf], [0.0], [0.0], [0.0])
    g0 = abs(complex(closed_loop(net, m, np.zeros(1))[0]))
    lo, hi = math.log(1.0), math.log(1e3 * gbw)
    f = np.logspace(0, math.log10(1e3 * gbw), 400)
    g = np.abs(closed_loop(net, m.column(), f[None, :]))[0] / g0
    k = int(np.argmax(g < 1 / math.sqrt(2)))
    lo, hi = math.log(f[k - 1]), math.log(f[k])
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        down = abs(complex(closed_loop(net, m, np.exp([mid]))[0])) / g0 < 1 / math.sqrt(2)
        lo, hi = (lo, mid) if down else (mid, hi)
    return math.exp(0.5 * (lo + hi))


GRID = [(rf, cd, gbw) for rf in (1e4, 1e5, 1e6, 1e7) for cd in (1e-12, 1e-11, 1e-10, 1e-9)
        for gbw in (1e6, 1e7, 1e8)]


@pytest.mark.parametrize(("rf", "cd", "gbw"), GRID)
def test_bandwidth_closed_forms_against_the_solver(rf: float, cd: float, gbw: float) -> None:
    """With the Butterworth cf (x = √(2k - 1), k = ωa·rf·Cd; Graeme, from memory) the
    second-order closed form fn = √(GBW/(2π·rf·(Cd + cf))) is the -3 dB frequency; the
    textbook's f3 ≈ √(GBW/(2π·rf·Cd)) leaves cf out and overestimates it by
    √(1 + cf/Cd): within 5% only where k > 200 (cf/Cd < 0.1), more than 10% off where
    k < 20 (cf comparable with Cd). The solver (finite A0 = 10⁶, Rsh = 10⁶·rf) agrees
    with the closed form within 0.5% across the grid; it would diverge where the loop
    gain A0/NG at f3 is no longer large (A0 below ~10³) or Rsh comes near rf."""
    cf = cf_for_q(1 / math.sqrt(2), gbw, rf, cd)
    solved = solver_f3db(rf, cf, cd, gbw)
    closed = float(f3db_of(gbw, rf, cf, cd))
    assert_allclose(closed, solved, rtol=5e-3)
    k = 2 * math.pi * gbw * rf * cd
    textbook = math.sqrt(gbw / (2 * math.pi * rf * cd))
    if k > 200:
        assert_allclose(textbook, solved, rtol=0.05)
    elif k < 20:
        assert textbook > 1.1 * solved


def test_butterworth_cf_is_root_two_times_the_45_degree_cf() -> None:
    """cf(Butterworth) ≈ √(Ct/(π·rf·GBW)) = √2·cf(45°), cf(45°) = √(Ct/(2π·rf·GBW))
    (Graeme, Photodiode Amplifiers, ch. 3, from memory), for k = ωa·rf·Ct >> 1."""
    rf, ct, gbw = 1e6, 1e-10, 1e8
    cf = cf_for_q(1 / math.sqrt(2), gbw, rf, ct)
    assert_allclose(cf, math.sqrt(ct / (math.pi * rf * gbw)), rtol=0.02)
    assert_allclose(cf / math.sqrt(ct / (2 * math.pi * rf * gbw)), math.sqrt(2), rtol=0.02)


def test_designed_values_are_series_members_and_reach_the_feedback_pole() -> None:
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)
        import eseries

    req = api.built(api.requirement(**{**STAGE, "zt": "150k"}))
    assert req.network is not None
    rf, cf = req.network["rf"], req.network["cf"]
    # IEC 60063 membership through the eseries package
    assert eseries.find_nearest(eseries.E24, rf) == pytest.approx(rf)
    assert eseries.find_nearest(eseries.E12, cf) == pytest.approx(cf)
    # the feedback pole lies at or above the bandwidth (the design's promise)
    assert 1 / (2 * math.pi * rf * cf) >= 200e3


def _spec(**changes: Any) -> Spec:
    return minimum_specs(api.built(api.requirement(**{**STAGE, **changes})))


def _part(s: Spec, **changes: float) -> dict[str, float]:
    """A part with room on every check of the stage, then ``changes``."""
    mn = s.minimum
    base = {"slew_v_per_s": 10 * mn.slew_v_per_s, "gbw_hz": 1e9, "aol_v_per_v": 1e9,
            "rin_ohm": 1e15, "rout_ohm": 0.0, "out_head_pos_v": 0.0, "out_head_neg_v": 0.0,
            "out_rsat_pos_ohm": 0.0, "out_rsat_neg_ohm": 0.0, "cm_head_pos_v": 0.0,
            "cm_head_neg_v": 0.0, "iout_a": 1.0, "supply_min_v": 1.0, "supply_max_v": 100.0,
            "vos_v": 0.0, "drift_v_per_c": 0.0, "ib_a": 0.0, "ios_a": 0.0,
            "en_v_per_rthz": 0.0, "in_a_per_rthz": 0.0, "qty": 1000.0, "channels": 1.0,
            "iq_a": 1e-3, "theta_ja_c_per_w": 1.0, "tj_max_c": 200.0, "psrr_db": 200.0,
            "pm_unity_deg": 89.9, "cin_diff_f": 2e-12, "cin_cm_f": 1e-12,
            "min_noise_gain": 1.0, "price": 1.0}
    return base | changes


def _status(s: Spec, parts: list[dict[str, float]], check: str) -> list[str]:
    frame = pd.DataFrame(parts, index=pd.Index([f"p{i}" for i in range(len(parts))],
                                               name="label"))
    table = run_checks(Parts(frame), s)
    return [table.results[check].status(i) for i in range(len(parts))]


def test_gbw_boundary_parts() -> None:
    """GBW 2% either side of the need with the part's own input capacitance; the need is
    checked against the single-pole Q closed form (Graeme, from memory)."""
    s = _spec()
    st = s.stage
    assert isinstance(st, TiaStage)
    probe = Parts(pd.DataFrame([_part(s)], index=pd.Index(["x"], name="label")))
    need = float(gbw_needs(probe, s)[0])
    # at need/m the loop's Q is at most the response's and f3 reaches B (closed forms)
    ct = st.cd + 3e-12
    g = need / s.margin
    q = math.sqrt(2 * math.pi * g * st.rf * (st.cf + ct)) / (1 + 2 * math.pi * g * st.rf * st.cf)
    assert q <= 1 / math.sqrt(2) + 1e-9
    assert float(f3db_of(g, st.rf, st.cf, ct)) >= st.band_hz * (1 - 1e-9)
    assert (q >= 1 / math.sqrt(2) - 1e-6) or math.isclose(
        float(f3db_of(g, st.rf, st.cf, ct)), st.band_hz, rel_tol=1e-6)
    parts = [_part(s, gbw_hz=need * 1.02), _part(s, gbw_hz=need * 0.98)]
    assert _status(s, parts, "tia_gbw") == ["pass", "fail"]


def test_bias_and_slew_boundary_parts() -> None:
    """Ib 2% either side of 1% of the smallest signal / m (common practice, no source);
    slew 2% either side of m·2π·f·Vp,out (a sine's steepest slope, any calculus text)."""
    s = _spec(iin_min="200nA")
    limit = 0.01 * 200e-9 / s.margin
    assert_allclose(bias_limit(s), limit, rtol=1e-12)
    parts = [_part(s, ib_a=limit * 0.98), _part(s, ib_a=limit * 1.02)]
    assert _status(s, parts, "tia_bias") == ["pass", "fail"]
    slew = s.margin * 2 * math.pi * 200e3 * 10e-6 * 100e3
    parts = [_part(s, slew_v_per_s=slew * 1.02), _part(s, slew_v_per_s=slew * 0.98)]
    assert _status(s, parts, "tia_slew") == ["pass", "fail"]


def test_rf_noise_is_kt_over_cf() -> None:
    """A noiseless part with a very wide, very high loop gain: the output noise is rf's
    4kT·rf shaped by rf‖cf, ∫4kT·rf/(1 + (f/fp)²) df = kT/cf (CODATA k, resistors at
    25 °C); with a current noise in, in²·rf²·(π/2)·fp more."""
    s = _spec()
    st = s.stage
    assert isinstance(st, TiaStage)
    big = np.array([1e12])
    kt = K_B * 298.15
    v = float(output_noise(s, np.zeros(1), np.zeros(1), big, big, np.array([st.cd]))[0])
    assert_allclose(v, math.sqrt(kt / st.cf), rtol=5e-3)
    i_n = 1e-12
    fp = 1 / (2 * math.pi * st.rf * st.cf)
    v = float(output_noise(s, np.zeros(1), np.array([i_n]), big, big, np.array([st.cd]))[0])
    assert_allclose(v, math.sqrt(kt / st.cf + i_n**2 * st.rf**2 * math.pi / 2 * fp), rtol=5e-3)


def test_noise_boundary_parts() -> None:
    """The limit 2% either side of the kT/cf noise of a noiseless wide part (above)."""
    s0 = _spec()
    st = s0.stage
    assert isinstance(st, TiaStage)
    v = math.sqrt(K_B * 298.15 / st.cf)
    quiet = {"gbw_hz": 1e12, "aol_v_per_v": 1e12, "cin_diff_f": 0.0, "cin_cm_f": 0.0}
    for factor, want in ((1.02, "pass"), (0.98, "fail")):
        s = _spec(noise_max=f"{v * factor * s0.margin!r}V")
        assert _status(s, [_part(s, **quiet)], "tia_noise") == [want]


@pytest.mark.parametrize(("changes", "words"), [
    ({"iin": None}, "--iin: missing"),
    ({"zt": None}, "--zt: missing"),
    ({"f3db": None}, "--f3db: missing"),
    ({"gain": "10"}, "--gain: a transimpedance stage is driven by a current"),
    ({"vout": "1V"}, "--zt: give the transimpedance or the output swing"),
    ({"rise": "1us"}, "--rise: give the bandwidth --f3db or the rise time"),
    ({"iin": "5uA..1uA"}, "low..high"),
    ({"iin": "20uA", "zt": "1meg"}, "beyond the rails"),
    ({"iin_min": "20uA"}, "--iin-min"),
])
def test_requirement_refusals(changes: dict[str, Any], words: str) -> None:
    with pytest.raises(PickerError, match=None) as exc:
        api.requirement(**{**STAGE, **changes})
    assert words in str(exc.value)


def test_other_stages_refuse_the_keys_and_rise_sets_the_bandwidth() -> None:
    with pytest.raises(BadRequirement, match="--iin: applies to the transimpedance"):
        api.requirement(topology="inverting", gain=10, vin="1V", freq="1kHz", rails="±12",
                        iin="1uA")
    r = api.requirement(**{**STAGE, "f3db": None, "rise": "1.75us"})
    assert_allclose(r.band_hz, 0.35 / 1.75e-6)  # 0.35/tr, common practice, no source
    r = api.requirement(**{**STAGE, "zt": None, "vout": "2V"})
    assert_allclose(r.zt_ohm, 2 / 10e-6)
    # a DC range goes one way: vo = ref - I·Zt
    r = api.requirement(**{**STAGE, "iin": "-10uA..0", "rails": "+5/0", "ref": "0V"})
    assert r.output_levels() == pytest.approx((0.0, 1.0))
