"""`picker net` through click's CliRunner on the demo stockroom."""

from __future__ import annotations

import json
import re

import pytest
from numpy.testing import assert_allclose

from tests.cli.clirun import fails, run

STAGE = ["--vin", "0.5Vpk", "--freq", "20kHz", "--rails", "±12"]
KEYS = {"series", "resistors", "gain", "gain_error", "worst_case", "mc_p99_error", "why",
        "input_ohm", "source_share", "network_current_a", "power_w", "given"}


def is_member(value: float, series: str) -> bool:
    import eseries

    return bool(eseries.find_nearest(eseries.ESeries[series], value) == value)


@pytest.mark.parametrize("topo,gain,series,names", [
    ("inverting", "4.7", "E24", {"rf", "rg"}),
    ("non-inverting", "21", "E96", {"rf", "rg"}),
    ("difference", "2.15", "E48", {"r1", "r2", "r3", "r4"}),
])
def test_json_has_exactly_the_documented_keys(topo: str, gain: str, series: str,
                                              names: set[str], db: str) -> None:
    js = json.loads(run("net", "--topology", topo, "--gain", gain, *STAGE, "--series", series,
                        "--json", "--db", db).stdout)
    assert set(js) == KEYS and js["series"] == series
    assert set(js["resistors"]) == names
    for v in js["resistors"].values():
        assert is_member(v, series)  # reference: IEC 60063 via the eseries package
    r = js["resistors"]
    # by hand: ideal-op-amp gains rf/rg, 1 + rf/rg, r2/r1 (matched r4/r3 = r2/r1)
    hand = {"inverting": lambda: r["rf"] / r["rg"], "non-inverting": lambda: 1 + r["rf"] / r["rg"],
            "difference": lambda: r["r2"] / r["r1"]}[topo]()
    assert_allclose(js["gain"], hand, rtol=1e-12)
    assert_allclose(js["gain_error"], hand / float(gain) - 1, rtol=1e-9, atol=1e-15)
    lo, hi = js["worst_case"]
    assert lo < js["gain"] < hi and 0 < js["mc_p99_error"] <= max(
        abs(lo / float(gain) - 1), abs(hi / float(gain) - 1))


def test_text_names_each_resistor_with_its_series(db: str) -> None:
    out = run("net", "--topology", "inverting", "--gain", "4.7", *STAGE, "--db", db).stdout
    values = re.findall(r"^  (Rf|Rg) (\S+ \S*Ω) \(E24\)", out, flags=re.M)
    assert [n for n, _ in values] == ["Rf", "Rg"]
    assert "worst case at ±1%" in out and "99% within" in out and "limits:" in out


def test_two_resistor_leg_is_said(db: str) -> None:
    res = run("net", "--topology", "inverting", "--gain", "7.3", *STAGE, "--series", "E12",
              "--db", db)
    assert re.search(r"Rg .*: .* \+ .* in (series|parallel) \(E12\)", res.stdout)
    js = json.loads(run("net", "--topology", "inverting", "--gain", "7.3", *STAGE, "--series",
                        "E12", "--json", "--db", db).stdout)
    assert set(js) == KEYS | {"combined"}
    parts = js["combined"]["rg"]["parts"]
    assert all(is_member(p, "E12") for p in parts)  # reference: eseries (IEC 60063)


def test_part_limits_compensation_and_exact_gain(db: str) -> None:
    out = run("net", "--topology", "inverting", "--gain", "10", *STAGE, "--zin", "100k",
              "--part", "bip-gp-a", "--db", db).stdout
    assert "limits from bip-gp-a" in out and "exact model" in out
    assert re.search(r"^  Rp \S+ \S*Ω \(E24\)", out, flags=re.M)
    assert re.search(r"^  Rg (\d+) kΩ", out, flags=re.M)


def test_five_percent_parts_warning(db: str) -> None:
    out = run("net", "--topology", "non-inverting", "--gain", "11", *STAGE, "--tolerance", "5%",
              "--db", db).stdout
    # common practice, no source: 5% resistors alone can move a gain by several percent,
    # so a 1% budget needs 1% parts or better
    assert "tighter than ±5% resistors allow" in out


def test_rf_pins_the_feedback_resistor(db: str) -> None:
    js = json.loads(run("net", "--topology", "non-inverting", "--gain", "3.2", *STAGE,
                        "--rf", "47k", "--json", "--db", db).stdout)
    assert js["resistors"]["rf"] == 47e3


def test_caution_goes_to_stderr_with_json(db: str) -> None:
    res = run("net", "--topology", "inverting", "--gain", "2", "--vin", "1V", "--freq", "1kHz",
              "--rails", "±40", "--json", "--db", db)
    assert set(json.loads(res.stdout)) == KEYS
    assert "Caution" in res.stderr and "licensed" in res.stderr


@pytest.mark.parametrize("args,word", [
    (["--topology", "inverting", "--gain", "10", "--series", "E25"], "--series"),
    (["--topology", "non-inverting", "--gain", "10", "--zin", "10k"], "--zin"),
    (["--topology", "inverting", "--gain", "10", "--part", "no-such-part"], "no-such-part"),
    (["--topology", "inverting", "--gain", "10", "--tolerance", "abc"], "--tolerance"),
    (["--topology", "inverting", "--gain", "10", "--noise-max", "1uV", "--part", "bip-gp-a"],
     "noise"),
])
def test_bad_input_is_one_line_and_exit_2(args: list[str], word: str, db: str) -> None:
    r = fails("net", *args, *STAGE, "--db", db)
    assert word in r.stderr


def test_spec_pick_and_why_use_the_designed_network(db: str, tmp_path) -> None:  # type: ignore[no-untyped-def]
    from picker.quantities import fmt

    stage = ["--topology", "inverting", "--gain", "6.8", *STAGE]
    js = json.loads(run("net", *stage, "--json", "--db", db).stdout)
    shown = ", ".join(f"{k} {fmt(v, 'resistance')}" for k, v in js["resistors"].items())
    assert f"network: {shown}" in run("spec", *stage).stdout
    sheet = run("why", "bip-gp-a", *stage, "--db", db).stdout
    assert "gain_accuracy" in sheet
    # a design file's rf pins the feedback resistor like --rf does
    f = tmp_path / "stage.toml"
    f.write_text('topology = "inverting"\ngain = 6.8\nvin = "0.5Vpk"\nfreq = "20kHz"\n'
                 'rails = "±12"\nrf = "150k"\n', encoding="utf-8")
    pinned = json.loads(run("net", "--design", str(f), "--json", "--db", db).stdout)
    assert pinned["resistors"]["rf"] == 150e3
    assert "network: rf 150 kΩ" in run("spec", "--design", str(f)).stdout
