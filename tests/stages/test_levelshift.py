"""The level-shift stage against outside references.

References: ngspice (`ngspice -b`, `.op` of each designed network drawn out node by
node, the op-amp a VCVS of gain 1e9); sympy nodal analysis of the four forms with an
ideal op-amp (vp = vn, no input current); the IEC 60063 tables through the ``eseries``
package. The ranges in CASES are requirements of the trade (a 0..80 mV ground-referenced
bridge into a 0.25..4.75 V ADC range on +5/0 is the issue's case: common practice, no
source); the other cases exercise each form.
"""

from __future__ import annotations

import math
import os
import re
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest
import sympy as sp
from click.testing import CliRunner
from numpy.testing import assert_allclose

from picker import api
from picker.cli import cli as main
from picker.design.levelnet import design_levels
from picker.stages.levelshift import FORMS, achieved, dc_levels, ideal_levels, mapping

# (vin range, vout range, rails, source resistance, load, the form expected)
CASES = [
    ("0..80mV", "0.25..4.75V", "+5/0", 0.0, 10e3, "sum+"),  # the bridge case
    ("0..2V", "0.5..1.5V", "+5/0", 50.0, None, "sum+"),  # attenuating: rlp to ground
    ("0.5..1V", "0.25..4.75V", "+5/0", 0.0, 2e3, "leg"),  # negative offset
    ("0..1V", "4.5..0.5V", "+5/0", 100.0, 10e3, "div+"),  # inverting, positive offset
    ("0..1V", "-1..-9V", "±12", 100.0, 10e3, "sum-"),  # inverting, negative offset
]


def _req(vin: str, vout: str, rails: str, rs: float, load: float | None) -> api.Requirement:
    return api.requirement(vin_range=vin, vout_range=vout, rails=rails, freq="100Hz",
                           source=rs, load=load)


# ---- ngspice ----------------------------------------------------------------------------

needs_ngspice = pytest.mark.skipif(shutil.which("ngspice") is None and not os.environ.get("CI"),
                                   reason="ngspice not installed (scripts/test installs it)")


def _r(name: str, a: str, b: str, ohms: float) -> str:
    """A resistor, a 0 V source for a 0 Ω wire, nothing for an open leg."""
    if math.isinf(ohms):
        return ""
    return f"V{name} {a} {b} DC 0" if ohms == 0 else f"R{name} {a} {b} {ohms!r}"


def _deck(net: dict[str, float], rs: float, load: float | None, vin: float, vs: float) -> str:
    """The stage drawn from its diagram: which input each leg reaches is written out
    per network name (rp/rup/rlp at the non-inverting input, ri/run/rln/rg at the
    inverting one); the op-amp is a VCVS of gain 1e9 with a 0 V ammeter at its pin."""
    lines = [f"Vin in 0 DC {vin!r}", f"Vsrc ref 0 DC {vs!r}", _r("s", "in", "a", rs),
             _r("p", "a", "p", net.get("rp", math.inf)), _r("i", "a", "n", net.get("ri", math.inf)),
             _r("up", "ref", "p", net.get("rup", math.inf)), _r("lp", "p", "0", net.get("rlp", math.inf)),
             _r("un", "ref", "n", net.get("run", math.inf)), _r("ln", "n", "0", net.get("rln", math.inf)),
             _r("g", "n", "0", net.get("rg", math.inf)), _r("f", "n", "o", net["rf"]),
             "E1 oo 0 p n 1e9", "Vpin oo o DC 0"]
    if "rp" not in net and "rup" not in net and "rlp" not in net:
        lines.append("Vpg p 0 DC 0")  # the non-inverting input at ground
    if load is not None:
        lines.append(f"Rload o 0 {load!r}")
    return "\n".join(x for x in lines if x)


def _op(tmp_path: Path, body: str, name: str) -> dict[str, float]:
    cir = tmp_path / f"{name}.cir"
    cir.write_text(f"{name}\n{body}\n.control\nset numdgt=12\nop\n"
                   "print v(o) v(p) i(Vpin) i(Vsrc)\n.endc\n.end\n")
    run = subprocess.run(["ngspice", "-b", str(cir)], capture_output=True, text=True, timeout=60)
    out = {}
    for key in ("v(o)", "v(p)", "i(vpin)", "i(vsrc)"):
        m = re.search(re.escape(key) + r"\s*=\s*(\S+)", run.stdout, re.IGNORECASE)
        assert m, run.stdout + run.stderr
        out[key] = float(m.group(1))
    return out


@needs_ngspice
@pytest.mark.parametrize("case", CASES, ids=[c[5] + ":" + c[0] for c in CASES])
def test_designed_levels_match_ngspice_op(case: tuple, tmp_path: Path) -> None:
    """ngspice .op at both ends of the input range: output, non-inverting input, output
    current (pin, including the network and load) and the current drawn from the divider's
    source agree with picker's levels within 1e-4 relative."""
    vin_t, vout_t, rails, rs, load, form = case
    req = _req(vin_t, vout_t, rails, rs, load)
    n = design_levels(req)
    assert n.form.name == form
    assert req.vin_range is not None
    for k, (v, e) in enumerate(zip(req.vin_range, n.ends, strict=True)):
        got = _op(tmp_path, _deck(n.network, rs, load, v, n.source_v), f"c{k}")
        assert_allclose(e.vout, got["v(o)"], rtol=1e-4, atol=1e-9)  # ngspice .op
        assert_allclose(e.vp, got["v(p)"], rtol=1e-4, atol=1e-9)  # ngspice .op
        # ngspice's source current flows into + through the source: out of the pin is -i
        assert_allclose(e.i_out, got["i(vpin)"], rtol=1e-4, atol=1e-9)  # ngspice .op
        assert_allclose(e.i_ref, -got["i(vsrc)"], rtol=1e-4, atol=1e-12)  # ngspice .op


# ---- sympy ------------------------------------------------------------------------------

rf, rg, rin, ru, rl, load = sp.symbols("rf rg rin ru rl load", positive=True)
vin, vs, vp, vo = sp.symbols("vin vs vp vo")


def _sym_vo(form: str) -> sp.Expr:
    """vo by KCL at each input node, ideal op-amp (vp = vn, no input current); rin is
    the whole input leg (source included)."""
    if form == "sum+":
        vp_ = sp.solve(sp.Eq((vin - vp) / rin + (vs - vp) / ru - vp / rl, 0), vp)[0]
        return sp.solve(sp.Eq((vo - vp_) / rf - vp_ / rg, 0), vo)[0]
    if form == "leg":
        return sp.solve(sp.Eq((vo - vin) / rf + (vs - vin) / ru - vin / rl, 0), vo)[0]
    if form == "div+":
        vp_ = sp.solve(sp.Eq((vs - vp) / ru - vp / rl, 0), vp)[0]
        return sp.solve(sp.Eq((vo - vp_) / rf + (vin - vp_) / rin, 0), vo)[0]
    return sp.solve(sp.Eq(vo / rf + vin / rin + vs / ru, 0), vo)[0]


_NAMES = {"sum+": ("rp", "rup", "rlp"), "leg": ("rp", "run", "rln"),
          "div+": ("ri", "rup", "rlp"), "sum-": ("ri", "run", "rln")}


@pytest.mark.parametrize("form", list(FORMS))
def test_gain_and_offset_formulas_match_sympy_nodal_analysis(form: str) -> None:
    """sympy: G = d vo/d vin and Voffset = vo at vin = 0 of the nodal solution equal
    picker's closed forms (achieved) and the levels (dc_levels) at random values."""
    expr = _sym_vo(form)
    g_sym, off_sym = sp.diff(expr, vin), expr.subs(vin, 0)
    rng = np.random.default_rng(7)
    inp, up, low = _NAMES[form]
    for _ in range(5):
        v = dict(zip(("rf", "rg", "rin", "ru", "rl"), rng.uniform(1e3, 1e5, 5), strict=True))
        src, rs = float(rng.uniform(1, 10)), 100.0
        net = {"rf": v["rf"], inp: v["rin"] - rs, up: v["ru"], low: v["rl"]}
        if form == "sum+":
            net["rg"] = v["rg"]
        subs = {rf: v["rf"], rg: v["rg"], rin: v["rin"], ru: v["ru"], rl: v["rl"], vs: src}
        if form == "leg":
            subs[rin] = rs  # the input goes straight to the non-inverting input
            net[inp] = 0.0
        g, off = achieved(net, rs, src)
        assert_allclose(float(g), float(g_sym.subs(subs)), rtol=1e-12)  # sympy
        assert_allclose(float(off), float(off_sym.subs(subs)), rtol=1e-12)  # sympy
        x = float(rng.uniform(-1, 1))
        assert_allclose(dc_levels(net, rs, src, x, math.inf).vout,
                        float(expr.subs({**subs, vin: x})), rtol=1e-12)  # sympy


@pytest.mark.parametrize("case", CASES, ids=[c[5] + ":" + c[0] for c in CASES])
def test_exact_network_makes_the_mapping_by_sympy(case: tuple) -> None:
    """The exact (unsnapped) network put into the sympy nodal solution gives the gain and
    offset through the two points of the ranges (sympy)."""
    vin_t, vout_t, rails, rs, load_, form = case
    req = _req(vin_t, vout_t, rails, rs, load_)
    assert req.vin_range is not None and req.vout_range is not None
    g, off = mapping(req.vin_range, req.vout_range)
    vs_ = req.rail_pos
    net = ideal_levels(g, off, vs_, rs, 10e3)
    inp, up, low = _NAMES[form]
    expr = _sym_vo(form)
    subs = {rf: net["rf"], rg: net.get("rg", math.inf), rin: rs + net[inp],
            ru: net.get(up, math.inf), rl: net.get(low, math.inf), vs: vs_}
    expr = sp.limit(expr, rl, sp.oo) if math.isinf(subs[rl]) else expr
    expr = sp.limit(expr, rg, sp.oo) if math.isinf(subs[rg]) else expr
    expr = sp.limit(expr, ru, sp.oo) if math.isinf(subs[ru]) else expr
    subs = {k: w for k, w in subs.items() if not math.isinf(w)}
    for x, y in zip(req.vin_range, req.vout_range, strict=True):
        assert_allclose(float(expr.subs({**subs, vin: x})), y, rtol=1e-9, atol=1e-12)  # sympy


# ---- eseries ----------------------------------------------------------------------------

@pytest.mark.parametrize("series", ["E12", "E24", "E96"])
@pytest.mark.parametrize("case", CASES, ids=[c[5] + ":" + c[0] for c in CASES])
def test_designed_values_are_iec_60063_members(case: tuple, series: str) -> None:
    """Every designed resistor (not open, not a wire) is in the series (eseries package,
    IEC 60063)."""
    import eseries

    vin_t, vout_t, rails, rs, load_, _ = case
    n = design_levels(_req(vin_t, vout_t, rails, rs, load_), series)  # type: ignore[arg-type]
    for name, r in n.network.items():
        if r == 0 or math.isinf(r):
            continue
        assert eseries.find_nearest(eseries.ESeries[series], r) == pytest.approx(r, rel=1e-12), name


# ---- the CLI: each error is one line and exit code 2 -------------------------------------

BASE = ["--rails", "+5/0", "--freq", "10Hz"]
ERRORS = [
    (["--vin-range", "80mV..0", "--vout-range", "0.25..4.75V"], "--vin-range: ", "inverted"),
    (["--vin-range", "1..1V", "--vout-range", "0.25..4.75V"], "--vin-range: ", "empty"),
    (["--vin-range", "0..1V", "--vout-range", "2..2V"], "--vout-range: ", "empty"),
    (["--vin-range", "0..1V", "--vout-range", "0.25..5.5V"], "--vout-range: ", "beyond the rails"),
    (["--vin-range", "0..80mV", "--vout-range", "0.25..4.75V", "--gain", "25"], "--gain: ",
     "disagrees"),
    (["--vin-range", "0..80mV"], "--vin-range: ", "--vout-range as well"),
    (["--vin-range", "0..80mV", "--vout-range", "0.25..4.75V", "--ref", "1V"], "--ref: ",
     "omit --ref"),
    (["--vin-range", "0..80mV", "--vout-range", "0.25..4.75V", "--vin", "40mV"], "--vin: ",
     "omit --vin"),
    (["--vin-range", "0..80mV", "--vout-range", "0.25..4.75V", "--topology", "inverting"],
     "--vin-range: ", "level-shift"),
    (["--vin-range", "0..80mV", "--vout-range", "0.25..4.75V", "--shift-source", "-1V"],
     "--shift-source: ", ""),
    (["--topology", "level-shift", "--gain", "2", "--vin", "1V"], "--vin-range: ", "missing"),
    (["--topology", "inverting", "--gain", "2", "--vin", "1V", "--shift-source", "2V"],
     "--shift-source: ", "level-shift"),
    (["--vin-range", "1..2V", "--vout-range", "0.1..0.6V"], "--vout-range: ",
     "negative reference"),
    (["--vin-range", "0 to 1V", "--vout-range", "0.5..0.25V"], "--vin-range: ", "not a range"),
]


@pytest.mark.parametrize("args,where,words", ERRORS, ids=[" ".join(e[0][:4]) for e in ERRORS])
def test_cli_errors_are_one_line_exit_2(args: list[str], where: str, words: str) -> None:
    """Bad ranges: one line on stderr naming the option, exit code 2 (project rule)."""
    run = CliRunner().invoke(main, ["net", *BASE, *args])
    assert run.exit_code == 2, run.output
    lines = run.stderr.strip().splitlines()
    assert len(lines) == 1, run.stderr
    assert where in lines[0] and words in lines[0], lines[0]


def test_cli_net_json_levels_reach_the_output_range() -> None:
    """`picker net --json` for the issue's case: levels at both ends within the E24
    error it reports, and the checks' levels (spec --json) are the real node levels."""
    run = CliRunner().invoke(main, ["net", *BASE, "--vin-range", "0..80mV", "--vout-range",
                                    "0.25..4.75V", "--load", "10k", "--json"],
                             catch_exceptions=False)
    assert run.exit_code == 0, run.output
    import json

    got = json.loads(run.stdout)
    # the mapping through the two points (common practice, no source): 4.5 V / 80 mV
    assert got["gain"] == pytest.approx(4.5 / 0.08, rel=1e-12)
    assert got["offset_v"] == pytest.approx(0.25, rel=1e-12)
    lo, hi = got["ends"]
    assert abs(lo["vout_v"] - 0.25) <= abs(got["offset_error_v"]) + 1e-12
    assert got["form"] == "sum+"


@needs_ngspice
def test_netlist_deck_holds_the_real_levels(tmp_path: Path) -> None:
    """`picker netlist` for a level-shift stage: ngspice's .op of the deck (input at the
    middle of its range, the divider on its source, ref = ground) puts the output where
    the ideal-op-amp levels say, within twice the loop's 1/T = noise gain/A0 (the demo
    part's A0 1e5, its Ro 200 Ω behind that loop: ngspice .op)."""
    db = str(tmp_path / "d.db")
    runner = CliRunner()
    assert runner.invoke(main, ["init", "--demo", "--db", db]).exit_code == 0
    args = [*BASE, "--vin-range", "0..80mV", "--vout-range", "0.25..4.75V", "--load", "10k"]
    run = runner.invoke(main, ["netlist", "cmos-rr-5v-a", "--db", db, *args],
                        catch_exceptions=False)
    assert run.exit_code == 0, run.output
    body = "\n".join(x for x in run.stdout.splitlines()  # analyses out, .ends kept
                     if x and x not in (".op", ".end")
                     and not x.startswith((".ac", ".tran", ".tf")))
    cir = tmp_path / "deck.cir"
    cir.write_text(body + "\n.control\nset numdgt=12\nop\nprint v(out) v(p)\n.endc\n.end\n")
    out = subprocess.run(["ngspice", "-b", str(cir)], capture_output=True, text=True,
                         timeout=60).stdout
    got = {k: float(re.search(re.escape(k) + r"\s*=\s*(\S+)", out).group(1))  # type: ignore[union-attr]
           for k in ("v(out)", "v(p)")}
    b = api.built(_req("0..80mV", "0.25..4.75V", "+5/0", 0.0, 10e3))
    assert b.network is not None
    want = dc_levels(dict(b.network), 0.0, 5.0, 0.04, 10e3)
    noise_gain = float(api.spec(b).noise_gain)
    assert_allclose(got["v(out)"], want.vout, rtol=2 * noise_gain / 1e5)  # ngspice .op
    assert_allclose(got["v(p)"], want.vp, rtol=2 * noise_gain / 1e5)  # ngspice .op


def test_design_file_keys_match_the_options(tmp_path: Path) -> None:
    """A TOML design file with the same keys (TOML arrays or text) gives the same stage
    as the options; the mapping through the two points (common practice, no source)."""
    f = tmp_path / "bridge.toml"
    f.write_text('vin_range = [0, 0.08]\nvout-range = "0.25..4.75V"\nrails = "+5/0"\n'
                 'freq = "10Hz"\nshift-source = "5V"\n')
    from_file = api.requirement(design=f)
    from_options = api.requirement(vin_range="0..80mV", vout_range="0.25..4.75V",
                                   rails="+5/0", freq="10Hz", shift_source="5V")
    assert from_file.vin_range == from_options.vin_range == (0.0, 0.08)
    assert from_file.vout_range == from_options.vout_range == (0.25, 4.75)
    assert from_file.gain == pytest.approx(4.5 / 0.08, rel=1e-12)
    assert from_file.ref == pytest.approx((0.25 + 4.75) / 2, rel=1e-12)
    assert from_file.vout == pytest.approx(4.5 / 2, rel=1e-12)
    assert from_file.topology == "level-shift"
    bad = tmp_path / "bad.toml"
    bad.write_text('vin-range = "0..80mV"\nvout-range = "0.25..4.75V"\nrails = "+5/0"\n'
                   'freq = "10Hz"\ngain = 25\n')
    run = CliRunner().invoke(main, ["spec", "--design", str(bad)])
    assert run.exit_code == 2
    assert run.stderr.strip().startswith("picker: error: bad.toml: gain: ")


LEVEL_STAGE = ["--vin-range", "0..80mV", "--vout-range", "0.25..4.75V", "--freq", "10Hz",
               "--rails", "+5/0", "--load", "10k", "--tolerance", "0.1%", "--offset-max",
               "20mV", "--noise-max", "1mV", "--source", "350"]


def test_every_check_explains_the_level_shift_stage() -> None:
    """The registry's generic rule for a new stage type: every applicable check explains
    its need in `spec --explain` and the printed arithmetic adds up (evaluated here)."""
    from picker.checks import applicable
    from picker.design.spec import minimum_specs
    from tests.checks.test_registry import _need_and_numbers, _si

    out = CliRunner().invoke(main, ["spec", *LEVEL_STAGE, "--explain"],
                             catch_exceptions=False).stdout
    req = api.requirement(**{k.lstrip("-").replace("-", "_"): v for k, v in
                             zip(LEVEL_STAGE[::2], LEVEL_STAGE[1::2], strict=True)})
    names = [c.name for c in applicable(minimum_specs(api.built(req)))]
    assert len(names) >= 7
    for name in names:
        m = re.search(rf"\[{name}\]: (.+)\n    formula: (.+)\n    numbers: (.+)", out)
        assert m, f"{name} missing from spec --explain"
        computed, result = _need_and_numbers(m.group(3))
        assert math.isclose(computed, result, rel_tol=2e-3, abs_tol=1e-12), (name, m.group(3))
        if name != "stock":
            assert math.isclose(_si(m.group(1).split(" (")[0]), result, rel_tol=6e-3), name


def test_why_checks_common_mode_at_the_real_input_levels(tmp_path: Path) -> None:
    """`why`: the common-mode check reports the non-inverting input's levels at the two
    ends of the input range, the ideal-op-amp nodal levels (sympy-checked above) of the
    network as built, not the output's middle level."""
    db = str(tmp_path / "d.db")
    CliRunner().invoke(main, ["init", "--demo", "--db", db], catch_exceptions=False)
    out = CliRunner().invoke(main, ["why", "cmos-rr-5v-a", "--db", db, *LEVEL_STAGE],
                             catch_exceptions=False).stdout
    b = api.built(api.requirement(**{k.lstrip("-").replace("-", "_"): v for k, v in
                                     zip(LEVEL_STAGE[::2], LEVEL_STAGE[1::2], strict=True)}))
    assert b.network is not None
    lo, hi = (dc_levels(dict(b.network), 350.0, 5.0, v, 10e3).vp for v in (0.0, 0.08))
    m = re.search(r"inputs at (\S+) mV \.\. (\S+) mV", out)
    assert m, out
    assert_allclose([float(m.group(1)) / 1e3, float(m.group(2)) / 1e3], [lo, hi], rtol=1e-3)


@pytest.mark.parametrize("vary", ["gain=10..100", "vout=1..2V"])
def test_sweep_refuses_what_the_ranges_set(vary: str, tmp_path: Path) -> None:
    """`sweep --vary gain|vout` on a level-shift stage: one line, exit 2 (project rule)."""
    db = str(tmp_path / "d.db")
    CliRunner().invoke(main, ["init", "--demo", "--db", db], catch_exceptions=False)
    run = CliRunner().invoke(main, ["sweep", "--db", db, *LEVEL_STAGE, "--vary", vary])
    assert run.exit_code == 2, run.output
    assert len(run.stderr.strip().splitlines()) == 1
    assert "--vary" in run.stderr and "--vin-range" in run.stderr


def test_note_names_the_ranges(tmp_path: Path) -> None:
    """`picker note` for a level-shift stage: the requirement lists both ranges and the
    divider's source, and the note says where the network is shown (nothing left silent)."""
    db = str(tmp_path / "d.db")
    CliRunner().invoke(main, ["init", "--demo", "--db", db], catch_exceptions=False)
    out = tmp_path / "note.md"
    run = CliRunner().invoke(main, ["note", "--db", db, *LEVEL_STAGE, "--out", str(out)],
                             catch_exceptions=False)
    assert run.exit_code == 0, run.output
    text = out.read_text(encoding="utf-8")
    assert "| input range | 0 .. 0.08 V from ground |" in text
    assert "| output range | 0.25 .. 4.75 V" in text
    assert "`picker net` with the same options" in text
