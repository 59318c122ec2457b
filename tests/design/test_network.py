"""The E-series network designer against outside references.

References: IEC 60063 tables through the ``eseries`` package; sympy nodal analysis of
the ideal-op-amp circuits (gains, noise transfer, output current); the triangular
distribution of the difference of two uniform variables; facts of the trade marked
"common practice, no source". Every comparison uses assert_allclose at a stated
tolerance.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pytest
import sympy as sp
from numpy.testing import assert_allclose

from picker.design import netmodel as nm
from picker.design.network import TIE, design_network
from picker.design.requirement import Requirement
from picker.design.tolerance import monte_carlo, p99_error, worst_case
from picker.errors import BadRequirement, BadValue

BIPOLAR = dict(label="bipolar test part", iout_a=0.025, ib_a=8e-8, ios_a=2e-8, vos_v=1e-3,
               in_a_per_rthz=5e-13, gbw_hz=1e6)
CMOS = dict(label="cmos test part", iout_a=0.02, ib_a=1e-12, ios_a=5e-13, vos_v=3e-3,
            in_a_per_rthz=1e-15, rin_ohm=1e12, aol_v_per_v=1e5, gbw_hz=1e6)


def req(topology: str, gain: float, **kw: Any) -> Requirement:
    base: dict[str, Any] = dict(rail_pos=12.0, rail_neg=-12.0, freq_hz=1e3, vin_pk=0.2)
    base.update(kw)
    return Requirement(topology=topology, gain=gain, **base)  # type: ignore[arg-type]


def eseries_values(name: str, lo: float = 10.0, hi: float = 10e6) -> list[float]:
    import eseries

    return [float(v) for v in eseries.erange(eseries.ESeries[name], lo, hi)]


def is_iec_member(value: float, name: str) -> bool:
    import eseries

    return bool(eseries.find_nearest(eseries.ESeries[name], value) == value)


# ---- sympy nodal analysis of the ideal-op-amp circuits (vp = vn, no input current) ----
R = sp.symbols("rf rg r1 r2 r3 r4 rs", positive=True)
rf, rg, r1, r2, r3, r4, rs = R
vin, vo, vn, vp, vs, va, vb, i, i1, i3 = sp.symbols("vin vo vn vp vs va vb i i1 i3")
ef, eg, e1, e2, e3, e4 = sp.symbols("ef eg e1 e2 e3 e4")


def sym_circuit(topology: str) -> tuple[sp.Expr, dict[sp.Symbol, sp.Expr], sp.Expr]:
    """vo as a function of vin and series noise sources, and the current into the
    network from the output (KCL with a branch current per series path)."""
    if topology == "inverting":
        eqs = [vin - vs - i * rs, vs - vn - i * rg - eg, vn - vo - i * rf - ef, vn]
        sol = sp.solve(eqs, [vs, vn, vo, i], dict=True)[0]
        return sol[vo], {rf: ef, rg: eg}, -sol[i]
    if topology == "non-inverting":
        # the source drives vp through rs with no current; ground leg rg, feedback rf
        eqs = [vn - vin, vn - i * rg - eg, vo - vn - i * rf - ef]
        sol = sp.solve(eqs, [vn, vo, i], dict=True)[0]
        return sol[vo], {rf: ef, rg: eg}, sol[i]
    # difference, balanced drive ±vin/2 each through rs
    eqs = [vin / 2 - vb - i3 * rs, vb - vp - i3 * r3 - e3, vp - i3 * r4 - e4,
           -vin / 2 - va - i1 * rs, va - vn - i1 * r1 - e1, vn - vo - i1 * r2 - e2, vn - vp]
    sol = sp.solve(eqs, [vb, vp, va, vn, vo, i1, i3], dict=True)[0]
    return sol[vo], {r1: e1, r2: e2, r3: e3, r4: e4}, -sol[i1]


def sym_gain(topology: str) -> sp.Expr:
    out, noise, _ = sym_circuit(topology)
    return sp.simplify((out / vin).subs({e: 0 for e in noise.values()}))


# ---- requirements as data ---------------------------------------------------------------
CASES = [
    ("inv-10-E24", "inverting", 10.0, {}, None, "E24"),
    ("inv-7.3-E24", "inverting", 7.3, {}, None, "E24"),
    ("inv-3.9-rs-E12", "inverting", 3.9, {"source_ohm": 600.0}, None, "E12"),
    ("noninv-4.7-E12", "non-inverting", 4.7, {}, None, "E12"),
    ("noninv-12.5-E24-load", "non-inverting", 12.5, {"load_ohm": 2e3}, None, "E24"),
    ("diff-2.2-E24", "difference", 2.2, {"source_ohm": 50.0}, None, "E24"),
    ("inv-33-E24-part-offset", "inverting", 33.0, {"offset_max_v": 20e-3, "vin_pk": 0.3},
     BIPOLAR, "E24"),
    ("noninv-21-E96-cmos", "non-inverting", 21.0, {}, CMOS, "E96"),
    ("diff-5-E192", "difference", 5.0, {}, None, "E192"),
    ("inv-0.47-E6", "inverting", 0.47, {}, None, "E6"),
    ("noninv-2-E3", "non-inverting", 2.0, {}, None, "E3"),
]


@pytest.mark.parametrize("case", CASES, ids=[c[0] for c in CASES])
def test_every_value_is_a_member_of_the_named_series(case: tuple) -> None:
    _, topo, gain, kw, part, series = case
    net = design_network(req(topo, gain, **kw), part, series=series)
    assert net.slots
    for slot in net.slots:
        for value in slot.parts:
            # reference: IEC 60063 via the eseries package (nearest member is itself)
            assert is_iec_member(value, series), (slot.name, value)
        assert_allclose(slot.ohms, sum(slot.parts) if slot.how == "series" else
                        1 / sum(1 / p for p in slot.parts), rtol=1e-12)


@pytest.mark.parametrize("case", CASES, ids=[c[0] for c in CASES])
def test_gain_matches_sympy_nodal_analysis(case: tuple) -> None:
    _, topo, gain, kw, part, series = case
    r = req(topo, gain, **kw)
    net = design_network(r, part, series=series)
    g = sym_gain(topo)
    subs = {sp.Symbol(k, positive=True): v for k, v in net.network.items() if k != "rp"}
    subs[rs] = r.source_ohm
    # reference: sympy nodal analysis of the ideal-op-amp circuit; tolerance 1e-12 relative
    assert_allclose(net.gain, abs(float(g.subs(subs))), rtol=1e-12)
    assert_allclose(net.gain_error, net.gain / gain - 1, rtol=1e-12)


def _brute_force(topo: str, r: Requirement, part: dict | None, series: str) -> list[tuple]:
    """Every pair of IEC 60063 values inside the limits, written out here by hand:
    each resistor 1 kΩ..1 MΩ; the network's output current at the peak at most 10% of
    the load's or 1 mA, whichever is larger, and network and load within Iout over the
    margin; the input resistor at least max(10 kΩ, 10 x source) (the issue's rules:
    common practice, no source); with compensation the bias-current output offset is
    Ios·Rf·... (any op-amp text, e.g. Franco, Design with Operational Amplifiers, 4th
    ed., ch. 5, from memory)."""
    vals = eseries_values(series, 1e3, 1e6)
    out = []
    vout = r.vout
    g_load = 0.0 if r.load_ohm is None else 1 / r.load_ohm
    g_max = max(0.1 * g_load, 1e-3 / vout)
    if part is not None and part["iout_a"] / (r.margin * vout) - g_load > 0:
        g_max = min(g_max, part["iout_a"] / (r.margin * vout) - g_load)
    zin = max(10e3, 10 * r.source_ohm)
    for a in vals:
        for b in vals:
            if topo == "inverting":
                g, g_net = a / (r.source_ohm + b), 1 / a
            elif topo == "non-inverting":
                g, g_net = 1 + a / b, 1 / (a + b)
            else:
                g = a / (r.source_ohm + b)
                g_net = (1 - 0.5 / (1 + g)) / a
            if g_net > g_max * (1 + 1e-12):
                continue
            if topo != "non-inverting" and b < zin / (1 + 1e-12):
                continue
            if part is not None and r.offset_max_v is not None:
                ng = 1 + g if topo == "inverting" else g
                if ng * part["ios_a"] * (a * b / (a + b)) > nm.OFFSET_SHARE * r.offset_max_v \
                        / r.margin * (1 + 1e-12):
                    continue
            out.append((abs(g / r.gain - 1), a, b))
    return out


@pytest.mark.parametrize("case", [c for c in CASES if c[5] in ("E12", "E24")],
                         ids=[c[0] for c in CASES if c[5] in ("E12", "E24")])
def test_no_pair_inside_the_limits_is_better_beyond_the_tolerance_floor(case: tuple) -> None:
    from picker.design.netchoice import error_floor

    _, topo, gain, kw, part, series = case
    r = req(topo, gain, **kw)
    net = design_network(r, part, series=series)
    pairs = _brute_force(topo, r, part, series)
    assert pairs
    best = min(p[0] for p in pairs)
    err = abs(net.gain_error)
    # reference: brute force over all IEC 60063 pairs (eseries) inside the window and
    # limits; errors below the floor (a fifth of the tolerance, common practice, no
    # source) count as equal
    assert err <= max(best, error_floor(r)) + TIE
    for slot in net.slots:
        assert 1e3 <= slot.ohms <= 1e6 or slot.how != "single"


def test_series_or_parallel_leg_when_no_single_pair_is_close_enough() -> None:
    r = req("inverting", 7.3)
    net = design_network(r, None, series="E12")
    pairs = _brute_force("inverting", r, None, "E12")
    best_single = min(p[0] for p in pairs)
    leg = net.slots[1]
    assert leg.how in ("series", "parallel") and len(leg.parts) == 2
    # reference: brute force over IEC 60063 E12 pairs; the two-resistor leg beats them
    assert abs(net.gain_error) < best_single
    assert "combined" in net.as_json()
    assert any(leg.how in n for n in net.notes)


TOPOS = ["inverting", "non-inverting", "difference"]


@pytest.mark.parametrize("topo", TOPOS)
def test_worst_case_corners_equal_the_analytic_extremes(topo: str) -> None:
    r = req(topo, 6.8, source_ohm=150.0)
    net = design_network(r, None, series="E24", tolerance=0.02)
    g = sym_gain(topo)
    names = [s for s in g.free_symbols if s.name in net.network]
    nominal = {s: net.network[s.name] for s in names} | {rs: 150.0}
    t = 0.02
    hi, lo = {rs: 150.0}, {rs: 150.0}
    for s in names:
        # sympy: the sign of dG/dR picks the corner that raises or lowers the gain
        sign = float(sp.sign(sp.diff(g, s).subs(nominal)))
        hi[s] = nominal[s] * (1 + sign * t)
        lo[s] = nominal[s] * (1 - sign * t)
    ref = sorted(abs(float(g.subs(x))) for x in (lo, hi))
    # reference: sympy extremes; tolerance 1e-12 relative
    assert_allclose(net.worst_case, ref, rtol=1e-12)


@pytest.mark.parametrize("topo", TOPOS)
def test_monte_carlo_stays_inside_the_corners_and_converges(topo: str) -> None:
    r = req(topo, 4.7)
    net = design_network(r, None, series="E24", tolerance=0.01)
    g = monte_carlo(topo, 0.0, net.slots, 0.01, n=200_000, seed=1)
    lo, hi = net.worst_case
    assert lo <= g.min() and g.max() <= hi
    p = [p99_error(monte_carlo(topo, 0.0, net.slots, 0.01, n=n, seed=s), 4.7)
         for n, s in ((200_000, 2), (200_000, 3), (800_000, 4))]
    # seeded Monte Carlo converges: independent runs agree within 1%
    assert_allclose(p, p[2], rtol=1e-2)
    assert p[2] <= net.worst_case_error


@pytest.mark.parametrize("topo,sens", [("inverting", lambda g: 1.0),
                                       ("non-inverting", lambda g: (g - 1) / g)])
def test_p99_matches_the_triangular_distribution(topo: str, sens: Any) -> None:
    t = 0.01
    r = req(topo, 10.0)
    net = design_network(r, None, series="E24", tolerance=t)
    assert net.gain_error == pytest.approx(0, abs=1e-12)
    # reference: the difference of two independent uniforms on [-t, t] is triangular
    # on [-2t, 2t] (convolution; e.g. Papoulis, Probability, Random Variables and
    # Stochastic Processes, from memory): P(|d| > c) = (2t - c)²/(4t²), so the 99th
    # percentile of |d| is 1.8·t; a ratio's relative error is d times its sensitivity.
    # Tolerance 3%: first-order in t plus sampling.
    assert_allclose(net.mc_p99_error, 1.8 * t * sens(10.0), rtol=3e-2)


def test_five_percent_parts_cannot_hold_a_one_percent_budget() -> None:
    r = req("inverting", 10.0, gain_error=0.01)
    net = design_network(r, None, series="E24", tolerance=0.05)
    # common practice, no source: 5%-tolerance resistors alone can move a gain by
    # several percent, so a 1% gain budget needs 1% parts or better
    assert net.worst_case_error > 0.05
    note = " ".join(net.notes)
    assert "tighter than ±5% resistors allow" in note
    assert "use 0.25% resistors or better" in note
    fine = design_network(r, None, series="E24", tolerance=0.001)
    assert not any("Tolerance" in n for n in fine.notes)


@pytest.mark.parametrize("topo", TOPOS)
def test_noise_and_output_current_match_sympy(topo: str) -> None:
    out, noise, current = sym_circuit(topo)
    a, b, rsv = 22e3, 3.3e3, 120.0
    vals = nm.pair_resistors(topo, a, b)
    subs = {sp.Symbol(k, positive=True): v for k, v in vals.items()} | {rs: rsv}
    zero_noise = {e: 0 for e in noise.values()}
    vout = float(out.subs(zero_noise).subs(subs).subs(vin, 1))
    # thermal noise: Σ |∂vo/∂e_k|²·R_k over the network's resistors (4kTR each)
    ohms = sum(float(sp.diff(out, e).subs(subs)) ** 2 * float(res.subs(subs))
               for res, e in noise.items())
    amps = float(current.subs(zero_noise).subs(subs).subs(vin, 1))
    m = nm.pair_model(topo, rsv, a, b)  # type: ignore[arg-type]
    # reference: sympy nodal analysis; tolerance 1e-12 relative
    assert_allclose(float(m.noise_ohm), ohms, rtol=1e-12)
    assert_allclose(float(m.out_siemens), amps / vout, rtol=1e-12)


def test_thermal_noise_limit_uses_codata_boltzmann() -> None:
    from scipy.constants import k

    # reference: CODATA k_B (scipy.constants), exact since the 2019 SI
    assert_allclose(nm.K_B, k, rtol=0)


def test_noise_budget_bounds_the_feedback_resistor() -> None:
    r = req("inverting", 10.0, noise_max_v=60e-6, freq_hz=2e4)
    net = design_network(r, CMOS, series="E24", zin_ohm=1e3)
    rf_, rg_ = net.network["rf"], net.network["rg"]
    # reference: 4kTR with CODATA k_B at 25 °C over the π/2·GBW/NG noise bandwidth
    from scipy.constants import k
    bw = math.pi / 2 * CMOS["gbw_hz"] / (1 + rf_ / rg_)
    density2 = 4 * k * 298.15 * (rf_ + rg_ * (rf_ / rg_) ** 2) + (CMOS["in_a_per_rthz"] * rf_) ** 2
    assert math.sqrt(density2 * bw) <= nm.NOISE_SHARE * 60e-6 / r.margin * (1 + 1e-9)


def test_compensation_resistor_only_where_it_pays() -> None:
    r = req("inverting", 10.0, vin_pk=0.5)
    # a 100 kΩ input resistor makes rf 1 MΩ, where 80 nA of bias current matters
    bip = design_network(r, BIPOLAR, series="E24", zin_ohm=100e3)
    assert "rp" in bip.network
    # rp is the E24 value nearest to rf‖rg (the resistance the inverting input sees)
    ideal = bip.network["rf"] * bip.network["rg"] / (bip.network["rf"] + bip.network["rg"])
    assert is_iec_member(bip.network["rp"], "E24")
    assert abs(math.log(bip.network["rp"] / ideal)) <= math.log(1.1) / 2 + 1e-12
    cmos = design_network(r, CMOS, series="E24", zin_ohm=100e3)
    assert "rp" not in cmos.network


def test_zin_keeps_the_input_resistor_large() -> None:
    r = req("inverting", 10.0)
    net = design_network(r, None, series="E24", zin_ohm=22e3)
    assert net.network["rg"] >= 22e3
    pairs = [p for p in _brute_force("inverting", r, None, "E24") if p[2] >= 22e3]
    # reference: brute force over IEC 60063 E24 pairs with rg >= 22 kΩ
    assert abs(net.gain_error) <= min(p[0] for p in pairs) + TIE
    with pytest.raises(BadRequirement, match="--zin"):
        design_network(req("non-inverting", 10.0), None, zin_ohm=1e4)


def test_follower_needs_no_network_unless_a_source_resistor_is_balanced() -> None:
    r = req("follower", 1.0, source_ohm=100e3)
    plain = design_network(r, None)
    assert plain.resistors == {} and plain.worst_case == (1.0, 1.0)
    bal = design_network(r, BIPOLAR)
    # with Rf = Rs the bias currents leave Ios·Rs instead of (Ib + Ios/2)·Rs
    assert bal.resistors == {"rf": 100e3}
    assert_allclose(bal.gain, 1.0, rtol=0)


def test_impossible_limits_are_one_clear_line() -> None:
    r = req("inverting", 10.0, noise_max_v=5e-6)
    with pytest.raises(BadRequirement) as exc:
        design_network(r, BIPOLAR, series="E96")
    msg = str(exc.value)
    assert "\n" not in msg and "noise" in msg and "--noise-max" in msg
    with pytest.raises(BadValue, match="E24"):
        from picker.design.series import parse_series
        parse_series("E25")


def test_given_network_is_analysed_not_designed() -> None:
    r = req("non-inverting", 11.0, network={"rf": 10e3, "rg": 1e3})
    net = design_network(r, None, series="E24")
    assert net.network == {"rf": 10e3, "rg": 1e3}
    lo, hi = worst_case("non-inverting", 0.0, net.network, 0.01)
    # reference: 1 + Rf/Rg at the corners Rf(1 ± t), Rg(1 ∓ t) (by hand)
    assert_allclose((lo, hi), (1 + 10 * 0.99 / 1.01, 1 + 10 * 1.01 / 0.99), rtol=1e-12)
    assert np.isfinite(net.mc_p99_error)


def test_pinned_feedback_resistor_searches_only_the_leg() -> None:
    r = req("inverting", 4.7)
    net = design_network(r, None, series="E24", feedback_ohm=68e3)
    # reference: IEC 60063 E24 holds 68 kΩ; the leg is the best over E24 values >= 10 kΩ
    assert net.network["rf"] == 68e3 and is_iec_member(68e3, "E24")
    single = min(abs(68e3 / b / 4.7 - 1) for b in eseries_values("E24", 10e3, 1e6))
    assert abs(net.gain_error) <= single + TIE


@pytest.mark.parametrize("kw,gain,word", [
    # by hand: rf <= 1 MΩ, so rf/(1.5 MΩ + rg) < 0.67 < 10
    ({"source_ohm": 1.5e6}, 10.0, "buffer the source"),
    # by hand: rf <= 1 MΩ and rg >= 1 kΩ cap an inverting gain at 1000 < 10000
    ({"vin_pk": 1e-4}, 1e4, "split the gain"),
])
def test_unreachable_gain_is_a_clear_error(kw: dict, gain: float, word: str) -> None:
    with pytest.raises(BadRequirement) as exc:
        design_network(req("inverting", gain, **kw), None, zin_ohm=1e3)
    assert word in str(exc.value) and "\n" not in str(exc.value)


@pytest.mark.parametrize("name", ["E3", "E6", "E12", "E24", "E48", "E96", "E192"])
def test_series_tables_equal_iec_60063(name: str) -> None:
    from picker.design.series import is_member, values

    ours = values(name, 1.0, 10e6)  # type: ignore[arg-type]
    ref = eseries_values(name, 1.0, 10e6)
    # reference: IEC 60063 via the eseries package; decimal values, tolerance 1e-12
    assert_allclose(ours, ref, rtol=1e-12)
    assert all(is_member(v, name) for v in ref)  # type: ignore[arg-type]
    assert not is_member(float(ref[5]) * 1.003, name)  # type: ignore[arg-type]
