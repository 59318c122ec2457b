"""`picker spec`, `picker pick`, `picker why` through click's CliRunner on the demo stockroom."""

from __future__ import annotations

import json
import math
import re
from pathlib import Path

from numpy.testing import assert_allclose

from tests.cli.clirun import fails, run

STAGE = ["--topology", "non-inverting", "--gain", "20", "--vin", "0.25Vpk", "--freq", "20kHz",
         "--rails", "±12", "--load", "2k", "--tolerance", "0.1%"]


def test_spec_table_and_json() -> None:
    out = run("spec", *STAGE).stdout
    # by hand: 2π × 20 kHz × 5 V × 1.25 = 0.785 V/µs (slew of a sine at its zero crossing)
    assert "0.785 V/µs" in out and "margin 1.25" in out and "gain-error budget" in out
    js = json.loads(run("spec", *STAGE, "--json").stdout)
    assert set(js) == {"signal_gain", "noise_gain", "margin", "min", "budget"}
    assert_allclose(js["min"]["slew_v_per_s"], 2 * math.pi * 20e3 * 5 * 1.25, rtol=1e-12)
    assert js["min"]["supply_span_v"] == 24.0 and js["margin"] == 1.25


def test_spec_explain_shows_formulas_and_numbers() -> None:
    out = run("spec", *STAGE, "--explain", "--margin", "1").stdout
    assert "formula: SR >= 2π·f·Vp,out·m" in out
    assert "numbers: 2π × 20 kHz × 5 V × 1 = 0.6283 V/µs" in out
    assert out.count("formula:") >= 12


def test_bad_requirement_is_one_line_and_exit_2() -> None:
    r = fails("spec", "--topology", "non-inverting", "--gain", "0.5", "--vin", "1",
              "--freq", "1kHz", "--rails", "±12")
    assert r.stderr.strip().count("\n") == 0 and "--gain" in r.stderr and "below 1" in r.stderr
    r = fails("spec", "--topology", "inverting", "--gain", "10", "--vin", "1", "--freq", "10V",
              "--rails", "±12")
    assert "--freq" in r.stderr and "voltage" in r.stderr
    r = fails("spec", "--topology", "inverting", "--gain", "10", "--vin", "1", "--freq", "1kHz")
    assert "--rails: missing" in r.stderr


def test_caution_goes_with_every_result() -> None:
    hv = ["--topology", "inverting", "--gain", "10", "--vin", "2V", "--freq", "1kHz",
          "--rails", "±40"]
    assert "local electrical codes" in run("spec", *hv).stdout
    r = run("spec", *hv, "--json")
    json.loads(r.stdout)
    assert "licensed practice" in r.stderr
    assert "mains" in run("spec", *STAGE, "--mains").stdout


def test_pick_lists_ranked_parts_and_explains_rejections(db: str) -> None:
    out = run("pick", *STAGE, "--db", db).stdout
    assert "Accepted (" in out and "Rejected (" in out
    # every rejection line reads 'NAME: needs >= X UNIT, has Y UNIT (P%)'
    lines = [ln.strip() for ln in out.splitlines() if re.match(r"^\s{4}\w+: needs", ln)]
    assert lines
    assert any(re.match(r"slew: needs >= 0\.785 V/µs, has [\d.]+ V/µs \(\d+%\)$", ln)
               for ln in lines)


def test_pick_json_shape_and_orders(db: str) -> None:
    js = json.loads(run("pick", *STAGE, "--json", "--db", db).stdout)
    assert set(js) == {"spec", "accepted", "rejected", "unverified", "nearest"}
    assert js["accepted"], "the demo stockroom has parts for this stage"
    margins = [min(c["margin"] for n, c in a["checks"].items()
                   if n != "stock" and c["margin"] is not None) for a in js["accepted"]]
    assert margins == sorted(margins, reverse=True)
    for r in js["rejected"]:
        assert r["fails"] and all(r["checks"][n]["status"] == "fail" for n in r["fails"])
    top = json.loads(run("pick", *STAGE, "--json", "--top", "1", "--by", "price",
                         "--db", db).stdout)
    assert len(top["accepted"]) == 1


def test_pick_strict_moves_unverified_to_rejected(db: str) -> None:
    stage = ["--topology", "follower", "--vin", "1V", "--freq", "1kHz", "--rails", "±12",
             "--offset-max", "20mV", "--temp", "-40..85C"]
    loose = json.loads(run("pick", *stage, "--json", "--db", db).stdout)
    strict = json.loads(run("pick", *stage, "--json", "--strict", "--db", db).stdout)
    assert loose["unverified"], "the demo stockroom has parts with unknown drift"
    assert strict["unverified"] == []
    unverified = {u["part"] for u in loose["unverified"]}
    assert unverified <= {r["part"] for r in strict["rejected"]}


def test_pick_nearest_misses_when_nothing_passes(db: str) -> None:
    out = run("pick", "--topology", "non-inverting", "--gain", "100", "--vin", "0.05V",
              "--freq", "500kHz", "--rails", "±12", "--tolerance", "0.1%", "--db", db).stdout
    assert "Accepted: none" in out and "Nearest misses" in out
    assert re.search(r"freq <= [\d.]+ kHz \(-\d+\.\d%\)", out)


def test_why_shows_every_check_with_formula(db: str) -> None:
    out = run("why", "bip-gp-a", *STAGE, "--db", db).stdout
    for name in ("swing", "common_mode", "slew", "gain_accuracy", "stability", "output_current",
                 "supply", "dissipation", "input_protection", "stock"):
        assert re.search(rf"^\[(PASS|FAIL|UNKNOWN)\] {name}:", out, re.M), name
    assert out.count("formula:") == 10 and "Verdict: bip-gp-a" in out
    # bip-gp-a has 0.5 V/µs in picker/data/demo_stockroom.csv; the stage needs 0.785 V/µs (64%)
    assert "[FAIL] slew: needs >= 0.785 V/µs, has 0.5 V/µs (64%)" in out


def test_why_unknown_part_is_exit_2(db: str) -> None:
    r = fails("why", "no-such-part", *STAGE, "--db", db)
    assert "no-such-part" in r.stderr


def test_design_file_and_override(tmp_path: Path, db: str) -> None:
    design = tmp_path / "stage.toml"
    design.write_text('topology = "inverting"\ngain = 10\nvin = "0.5Vpk"\nfreq = "20kHz"\n'
                      'rails = "±12"\nload = "2k"\n')
    a = json.loads(run("spec", "--design", str(design), "--json").stdout)
    b = json.loads(run("spec", "--design", str(design), "--freq", "10kHz", "--json").stdout)
    assert_allclose(b["min"]["slew_v_per_s"], a["min"]["slew_v_per_s"] / 2, rtol=1e-12)
    design.write_text('topology = "inverting"\ngain = "x"\n')
    r = fails("spec", "--design", str(design))
    assert "stage.toml: gain" in r.stderr


def test_commands_have_help() -> None:
    for name in ("spec", "pick", "why"):
        out = run(name, "--help").stdout
        assert "--topology" in out and "--design" in out and "--margin" in out


def test_pick_lists_only_the_closest_rejections(db: str) -> None:
    stage = ["--topology", "inverting", "--gain", "10", "--vin", "0.5Vpk", "--freq", "20kHz",
             "--rails", "±12", "--load", "2k", "--db", db]
    full = json.loads(run("pick", *stage, "--json").stdout)
    n_rejected = len(full["rejected"])
    assert n_rejected > 3
    short = run("pick", *stage, "--list", "3").stdout
    section = short.split("\nRejected", 1)[1]
    listed = [ln.strip() for ln in section.splitlines() if ln.startswith("  ") and not ln.startswith("    ")]
    names = [r["part"] for r in full["rejected"]]
    assert listed[:3] == names[:3]  # the closest first, in the same order as the JSON
    assert f"and {n_rejected - 3} more rejected" in short
    every = run("pick", *stage, "--list", "all").stdout
    assert all(f"  {name}\n" in every for name in names)
    fails("pick", *stage, "--list", "some")


def test_why_json_matches_pick(db: str) -> None:
    stage = ["--topology", "inverting", "--gain", "10", "--vin", "0.5Vpk", "--freq", "20kHz",
             "--rails", "±12", "--load", "2k", "--db", db]
    picked = json.loads(run("pick", *stage, "--json").stdout)
    entry = next(r for r in picked["rejected"] if r["part"] == "bip-gp-a")
    sheet = json.loads(run("why", "bip-gp-a", *stage, "--json").stdout)
    assert sheet["verdict"] == "fail" and sheet["spec"] == picked["spec"]
    assert sheet["checks"] == entry["checks"]
    assert sorted(n for n, c in sheet["checks"].items() if c["status"] == "fail") == sorted(entry["fails"])
