"""AC coupling (--coupling ac): the designed network against ngspice (.op bias levels, .ac
low-frequency corners), IEC 60063 membership through the eseries package, and the bias
network's offset and noise against hand formulas."""

from __future__ import annotations

import math
import warnings
from pathlib import Path

import pandas as pd
import pytest
from numpy.testing import assert_allclose

from picker import api
from picker.checks import run_checks
from picker.circuit.mna import Capacitor, Netlist, OpAmp, Resistor, Source
from picker.design.coupling import Coupling
from picker.design.requirement import Requirement
from picker.design.spec import minimum_specs
from picker.stages import stage
from tests.design.spice_raw import run_deck

K_B = 1.380649e-23  # J/K, exact (SI 2019, CODATA 2018)

CASES = {
    "inverting-single": dict(topology="inverting", gain=10, vin="0.1V", freq="20kHz",
                             rails="+5/0", coupling="ac", fmin="20Hz", source="600"),
    "non-inverting-single": dict(topology="non-inverting", gain=10, vin="0.1V",
                                 freq="20kHz", rails="+5/0", coupling="ac", fmin="20Hz",
                                 source="600"),
    "non-inverting-offcentre": dict(topology="non-inverting", gain=4, vin="0.1V",
                                    freq="5kHz", rails="+12/0", ref="4V", coupling="ac",
                                    fmin="50Hz", low_corner="10Hz"),
    "inverting-split": dict(topology="inverting", gain=2, vin="1V", freq="20kHz",
                            rails="±12", ref="0V", coupling="ac", fmin="10Hz"),
    "non-inverting-split": dict(topology="non-inverting", gain=3, vin="1V", freq="20kHz",
                                rails="±12", ref="0V", coupling="ac", fmin="10Hz"),
    "follower-single": dict(topology="follower", vin="1V", freq="20kHz", rails="+9/0",
                            coupling="ac", fmin="30Hz"),
}


def built(case: str) -> tuple[Requirement, Coupling]:
    req = api.built(api.requirement(**CASES[case]))
    c = stage(req).coupling
    assert isinstance(c, Coupling)
    return req, c


def _spice_lines(net: Netlist) -> list[str]:
    """The netlist's elements as SPICE lines; the op-amp a VCVS of gain 1e9."""
    out = []
    for k, e in enumerate(net.elements):
        if isinstance(e, Resistor):
            if math.isinf(e.ohm):
                continue
            out.append(f"V{k} {e.a} {e.b} DC 0" if e.ohm == 0 else f"R{k} {e.a} {e.b} {e.ohm!r}")
        elif isinstance(e, Capacitor):
            out.append(f"C{k} {e.a} {e.b} {e.farad!r}")
        elif isinstance(e, Source):
            out.append(f"VIN {e.plus} {e.minus} DC 0 AC {e.volt!r}")
        elif isinstance(e, OpAmp):
            out.append(f"E{k} {e.out} 0 {e.p} {e.n} 1e9")
    return out


@pytest.mark.parametrize("case", sorted(CASES))
def test_low_corner_matches_ngspice_ac(case: str, tmp_path: Path) -> None:
    """ngspice .ac of the stage with its capacitors (rails as AC ground, the op-amp a VCVS
    of gain 1e9): at picker's -3 dB point |H| is the mid-band gain / √2, and each
    network's own corner is where its RC divides by √2 (within 1e-4)."""
    req, c = built(case)
    assert c.low_3db_hz <= c.allowed_hz
    deck = ["* coupling corner", *_spice_lines(c.netlist),
            f".ac lin 1 {c.low_3db_hz!r} {c.low_3db_hz!r}", ".end"]
    low = run_deck("\n".join(deck), tmp_path, "low")
    mid_deck = ["* mid", *_spice_lines(c.netlist), f".ac lin 1 {req.freq_hz * 1e4!r} "
                f"{req.freq_hz * 1e4!r}", ".end"]
    mid = run_deck("\n".join(mid_deck), tmp_path, "mid")
    h_low = abs(next(iter(low.values()))["v(o)"][0])
    h_mid = abs(next(iter(mid.values()))["v(o)"][0])
    assert_allclose(h_low / h_mid, 1 / math.sqrt(2), rtol=1e-4)
    # each network's own corner, read from ngspice's node voltages at that corner
    for name, f in c.corners_hz.items():
        one = ["* corner", *_spice_lines(c.netlist), f".ac lin 1 {f!r} {f!r}", ".end"]
        v = next(iter(run_deck("\n".join(one), tmp_path, name).values()))
        if name == "ground_leg":  # rg over rg + 1/(jωcg): the voltage share across rg
            ratio = abs((v["v(n)"][0] - v["v(g)"][0]) / v["v(n)"][0])
        elif name == "bias_node":  # Rdiv‖cd: |Z| = Rdiv/√2; the node's current from a test
            continue  # source would change the circuit; checked by formula below
        elif req.topology == "inverting":  # the input RC alone sets the signal's roll-off
            ratio = abs(v["v(o)"][0]) / h_mid
        else:  # the input network: cin against Rs + rb, the bias node Rdiv‖cd (not 0)
            w = 2 * math.pi * f
            zd = 0.0 if c.cd_f is None else 1 / (1 / c.rdiv + 1j * w * c.cd_f)
            assert c.rb is not None
            rs, rb = req.source_ohm, c.rb
            exact = abs((rb + zd) / (rs + rb + zd + 1 / (1j * w * c.cin_f)))
            assert_allclose(abs(v["v(p)"][0] / v["v(s)"][0]), exact, rtol=1e-4)
            if c.cd_f is not None:  # the corner 1/(2π(Rs + rb)cin) takes the node as 0
                continue
            ratio = abs(v["v(p)"][0] / v["v(s)"][0]) * (rs + rb) / rb
        assert_allclose(ratio, 1 / math.sqrt(2), rtol=1e-4)
    if "bias_node" in c.corners_hz:  # by formula: 1/(2π·(r_top‖r_bottom)·cd)
        assert c.r_top is not None and c.r_bottom is not None and c.cd_f is not None
        rdiv = c.r_top * c.r_bottom / (c.r_top + c.r_bottom)
        assert_allclose(c.corners_hz["bias_node"], 1 / (2 * math.pi * rdiv * c.cd_f), rtol=1e-12)


@pytest.mark.parametrize("case", sorted(CASES))
def test_bias_levels_match_ngspice_op(case: str, tmp_path: Path) -> None:
    """ngspice .op of the stage on its real rails (source at 0 V through cin, op-amp a
    VCVS of gain 1e9 around 0 V): the non-inverting input and the output sit at picker's
    bias level, and the divider draws picker's current (within 1e-4)."""
    req, c = built(case)
    res = req.network or {}
    lines = ["* coupling op", f"VPOS vp 0 DC {req.rail_pos!r}", f"VNEG vn 0 DC {req.rail_neg!r}",
             "VIN s 0 DC 0", f"RS s a {max(req.source_ohm, 1e-3)!r}"]
    bias = "0"
    if c.mode == "divider":
        bias = "d"
        lines += [f"RT vp d {c.r_top!r}", f"RB0 d vn {c.r_bottom!r}", f"CD d vn {c.cd_f!r}"]
    if req.topology == "inverting":
        lines += [f"CIN a b {c.cin_f!r}", f"RG b n {res['rg']!r}", f"VP p {bias} DC 0"]
    else:
        lines += [f"CIN a p {c.cin_f!r}", f"RBIAS p {bias} {c.rb!r}"]
        if c.cg_f is not None:
            lines += [f"RG n g {res['rg']!r}", f"CG g 0 {c.cg_f!r}"]
    rf = res.get("rf", 0.0)
    lines += [f"RF n o {rf!r}" if rf > 0 else "VF n o DC 0", "EOP o 0 p n 1e9", ".op", ".end"]
    op = next(iter(run_deck("\n".join(lines), tmp_path, "op").values()))
    assert_allclose(op["v(p)"][0], c.bias_v, rtol=1e-4, atol=1e-9)
    assert_allclose(op["v(o)"][0], c.bias_v, rtol=1e-4, atol=1e-6)
    if c.mode == "divider":
        assert_allclose(-op["i(vpos)"][0], c.divider_a, rtol=1e-4)
    assert abs(c.bias_v - req.ref) <= 0.01 * req.span  # the E24 ratio lands near --ref


@pytest.mark.parametrize("case", sorted(CASES))
def test_designed_values_are_iec_60063(case: str) -> None:
    """Every designed resistor is an E24 value and every capacitor an E6 value, checked
    with the eseries package (IEC 60063)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)
        import eseries

    def member(v: float, series: str) -> bool:
        return any(math.isclose(v, x, rel_tol=1e-9)
                   for x in eseries.erange(eseries.ESeries[series], v * 0.9, v * 1.1))

    _, c = built(case)
    for r in (c.rb, c.r_top, c.r_bottom):
        if r is not None:
            assert member(r, "E24"), r
    for cap in (c.cin_f, c.cg_f, c.cd_f):
        if cap is not None:
            assert member(cap, "E6"), cap


def _part(**values: float) -> pd.DataFrame:
    return pd.DataFrame([values], index=["under test"])


def test_offset_through_bias_network_by_hand() -> None:
    """Worst-case output offset with the op-amp ideal around the network (Franco, Design
    with Operational Amplifiers and Analog Integrated Circuits, 4th ed., ch. 5, from
    memory): Vos·NG + |Ib|·|rf - zp·NG| + Ios/2·(rf + zp·NG), here at DC: cg open, so
    NG = 1, and zp = rb + r_top‖r_bottom (cin open, cd open)."""
    req = api.built(api.requirement(**CASES["non-inverting-single"], offset_max="1V",
                                    margin=1))
    c = stage(req).coupling
    assert c.rb is not None and c.r_top is not None and c.r_bottom is not None
    rf = req.network["rf"]  # type: ignore[index]
    zp = c.rb + c.r_top * c.r_bottom / (c.r_top + c.r_bottom)
    vos, ib, ios = 1e-3, 100e-9, 10e-9
    hand = vos * 1 + ib * abs(rf - zp) + ios / 2 * (rf + zp)
    r = run_checks(_part(vos_v=vos, drift_v_per_c=0.0, ib_a=ib, ios_a=ios),
                   minimum_specs(req)).results["offset"]
    assert_allclose(r.has[0], hand, rtol=1e-12)


def test_bias_resistor_noise_by_hand() -> None:
    """Resistor noise at the output (same text, ch. 7, from memory): 4kT·(rf + rf²/rg +
    zp·NG²) over the noise bandwidth π/2·GBW/NG, zp = Rs‖rb in the band (cin a short);
    plus the coupling network below its corners, NG²·(kT/cin·rb²(rb + 2Rs)/(Rs + rb)³ +
    kT/cd) (kT/C noise: Johns and Martin, Analog Integrated Circuit Design, 1st ed.,
    sec. 4.3, from memory)."""
    req = api.built(api.requirement(**CASES["non-inverting-single"], noise_max="1V",
                                    margin=1))
    c = stage(req).coupling
    assert c.rb is not None and c.cd_f is not None
    rs, rb = req.source_ohm, c.rb
    rf, rg = req.network["rf"], req.network["rg"]  # type: ignore[index]
    ng = 1 + rf / rg
    kt = K_B * 298.15
    zp = rs * rb / (rs + rb)
    gbw = 1e6
    band = 4 * kt * (rf + rf**2 / rg + zp * ng**2) * math.pi / 2 * gbw / ng
    low = ng**2 * (kt / c.cin_f * rb**2 * (rb + 2 * rs) / (rs + rb) ** 3 + kt / c.cd_f)
    r = run_checks(_part(en_v_per_rthz=0.0, in_a_per_rthz=0.0, gbw_hz=gbw,
                         aol_v_per_v=1e15), minimum_specs(req)).results["noise"]
    assert_allclose(r.has[0], math.sqrt(band + low), rtol=1e-6)
    # the bias resistor counts: the DC-coupled stage from the same source is quieter
    dc = api.built(api.requirement(**{k: v for k, v in CASES["non-inverting-single"].items()
                                      if k not in ("coupling", "fmin")}, noise_max="1V",
                                   margin=1))
    r_dc = run_checks(_part(en_v_per_rthz=0.0, in_a_per_rthz=1e-12, gbw_hz=gbw,
                            aol_v_per_v=1e15), minimum_specs(dc)).results["noise"]
    r_ac = run_checks(_part(en_v_per_rthz=0.0, in_a_per_rthz=1e-12, gbw_hz=gbw,
                            aol_v_per_v=1e15), minimum_specs(req)).results["noise"]
    assert r_ac.has[0] > r_dc.has[0] * 0.99  # Rs‖rb < Rs, but kT/C is added


def test_input_impedance_is_the_bias_resistor() -> None:
    """The non-inverting stage's source sees rb in the band (common practice, no source):
    at fmin, |rb + Zd + 1/(jω·cin)| with Zd = Rdiv‖cd."""
    req, c = built("non-inverting-single")
    assert c.rb is not None and c.cd_f is not None
    assert c.zin_ohm == c.rb
    w = 2 * math.pi * c.fmin_hz
    rdiv = c.rdiv
    zd = 1 / (1 / rdiv + 1j * w * c.cd_f)
    assert_allclose(c.zin_fmin_ohm, abs(c.rb + zd + 1 / (1j * w * c.cin_f)), rtol=1e-12)
    # the source's loss into rb takes at most a tenth of the gain-error budget
    assert req.source_ohm / (req.source_ohm + c.rb) <= req.gain_error / 10
