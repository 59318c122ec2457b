"""`spec --explain`, `pick` and `why` show dissipation, input protection and the ripple
terms, in text and JSON, on the demo stockroom (a ±35 V driver of 20 Vpk into 1 kΩ at
85 °C, the issue's example)."""

from __future__ import annotations

import json
import math

import pandas as pd
from numpy.testing import assert_allclose

from picker.data import demo_stockroom
from tests.cli.clirun import fails, run

DRIVER = ["--topology", "follower", "--vout", "20V", "--freq", "1kHz", "--rails", "±35",
          "--load", "1k", "--temp", "0..85C"]
# (V+ - V-)·Vp/(π·R) - Vp²/(2R) (Sedra and Smith, Microelectronic Circuits, 7th ed.,
# ch. 12, class B dissipation, from memory)
P_OUT = 70 * 20 / (math.pi * 1e3) - 20**2 / (2 * 1e3)


def demo(label: str) -> dict[str, float]:
    with demo_stockroom().open("r", encoding="utf-8") as f:
        return pd.read_csv(f).set_index("label").loc[label].to_dict()  # type: ignore[no-any-return]


def test_spec_explain_shows_power_and_step() -> None:
    out = run("spec", *DRIVER, "--explain").stdout
    assert "[dissipation]: 85 °C" in out
    assert f"= {P_OUT * 1e3:.4g} mW" in out  # the output-stage power with its numbers
    # worst-case amplitude (V+ - V-)/π = 2·35 V/π (information)
    assert f"70 V / π = {70 / math.pi:.4g} V" in out
    assert "[input_protection]: 40 V" in out  # a 2 × 20 V step at a follower's inputs
    rip = run("spec", *DRIVER, "--offset-max", "10mV", "--noise-max", "1mV",
              "--ripple", "100mVpp@100Hz", "--explain").stdout
    assert "[offset_ripple]" in rip and "[noise_ripple]" in rip
    assert "model leaves out: PSRR's roll-off with frequency" in rip


def test_why_shows_the_parts_power_and_junction_temperature(db: str) -> None:
    part = demo("bip-hv-a")
    power = part["channels"] * part["iq_a"] * 70 + P_OUT
    tj = 85 + part["theta_ja_c_per_w"] * power  # Tj = Ta + θJA·P (common practice)
    out = run("why", "bip-hv-a", *DRIVER, "--db", db).stdout
    assert f"= {power * 1e3:.4g} mW" in out and f"= {tj:.4g} °C against Tj,max" in out
    js = json.loads(run("why", "bip-hv-a", *DRIVER, "--db", db, "--json").stdout)
    rec = js["checks"]["dissipation"]
    assert_allclose([rec["power_w"], rec["tj_c"]], [power, tj], rtol=1e-9)
    assert rec["status"] == ("pass" if tj <= part["tj_max_c"] else "fail")
    prot = js["checks"]["input_protection"]
    assert_allclose([prot["need"], prot["has"]], [40.0, part["vdiff_max_v"]], rtol=1e-12)


def test_why_suggests_a_clamp_resistor_when_the_step_is_too_large(db: str) -> None:
    stage = ["--topology", "follower", "--vin", "2V", "--freq", "1kHz", "--rails", "±15"]
    out = run("why", "bip-prec-a", *stage, "--db", db).stdout  # vdiff max 0.7 V in the demo
    assert "[FAIL] input_protection: needs >= 4 V, has 700 mV" in out
    # (4 V - 0.7 V)/10 mA = 330 Ω (Ohm's law; 10 mA common practice, no source)
    assert "add 330 Ω in series with an input" in out


def test_pick_json_carries_the_new_figures(db: str) -> None:
    js = json.loads(run("pick", *DRIVER, "--db", db, "--json").stdout)
    items = [i for k in ("accepted", "rejected", "unverified") for i in js[k]]
    by_part = {i["part"]: i["checks"] for i in items}
    hv = by_part["bip-hv-a"]
    part = demo("bip-hv-a")
    assert_allclose(hv["dissipation"]["power_w"], part["iq_a"] * 70 + P_OUT, rtol=1e-9)
    assert hv["input_protection"]["need"] == 40.0
    text = run("pick", *DRIVER, "--db", db, "--list", "all").stdout
    assert "dissipation: needs >= 85 °C" in text  # a part that runs too hot is named


def test_ripple_in_why_and_its_need_for_psrr(db: str) -> None:
    stage = ["--topology", "non-inverting", "--gain", "10", "--vin", "0.1V", "--freq", "1kHz",
             "--rails", "±15", "--offset-max", "20mV", "--ripple", "100mVpp@100Hz"]
    part = demo("bip-gp-a")
    ripple = 0.05 * 10 ** (-part["psrr_db"] / 20) * 10  # Vr·10^(-PSRR/20)·NG
    out = run("why", "bip-gp-a", *stage, "--db", db).stdout
    assert f"= {ripple * 1e6:.4g} µV peak" in out
    js = json.loads(run("why", "bip-gp-a", *stage, "--db", db, "--json").stdout)
    assert_allclose(js["checks"]["offset"]["ripple_v"], ripple, rtol=1e-9)
    blank = run("why", "bip-ss-b", *stage, "--db", db).stdout  # no PSRR in the demo
    assert "ripple unknown (no PSRR)" in blank
    fails("spec", *stage[:-1], "50mV")  # a ripple without @frequency is refused
