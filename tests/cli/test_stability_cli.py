"""The stability check on the command line: pick rejects the decompensated demo part as a
1 MHz follower, and spec --explain, why, pick --json and bode show the phase margin.

References: the demo part's notes ("stable only for noise gain >= 10": common practice,
no source, stated by the issue) and ngspice .ac of the two-pole macromodel
(tests/checks/test_stability_spice.py helpers) for the figures shown.
"""

from __future__ import annotations

import json
import re
from pathlib import Path

from picker.design.requirement import requirement_from
from tests.checks.test_stability_spice import spice_margins, spice_part
from tests.cli.clirun import run

FOLLOWER = ["--topology", "follower", "--vin", "1V", "--freq", "1MHz", "--rails", "±12"]
OPTIONS = {"topology": "follower", "vin": "1V", "freq": "1MHz", "rails": "±12"}


def test_pick_rejects_the_decompensated_part_as_a_follower(demo_db: str, tmp_path: Path) -> None:
    out = run("pick", *FOLLOWER, "--list", "all", "--db", demo_db).stdout
    block = out[out.index("Rejected"):]
    m = re.search(r"  bip-decomp-a\n(?:    .*\n)*?    stability: needs >= 45°, has ([\d.]+)° "
                  r"\([\d.]+%\) \[noise gain 1 is below the part's minimum 10\]", block)
    assert m, out
    js = json.loads(run("pick", *FOLLOWER, "--json", "--list", "all", "--db", demo_db).stdout)
    item = next(i for i in js["rejected"] if i["part"] == "bip-decomp-a")
    assert "stability" in item["fails"]
    assert item["checks"]["stability"]["status"] == "fail"
    # source: ngspice .ac loop gain and closed-loop response of the macromodel
    pm, peak = spice_margins(requirement_from(OPTIONS), spice_part("bip-decomp-a")[0],
                             tmp_path, "cli")
    assert abs(item["phase_margin_deg"] - pm) < 1.0
    assert abs(item["peaking_db"] - peak) < 0.2
    assert abs(float(m.group(1)) - pm) < 0.1  # the text shows 3 significant figures
    # every listed part carries the two figures
    for k in ("accepted", "rejected", "unverified"):
        assert all("phase_margin_deg" in i and "peaking_db" in i for i in js[k])

    why = json.loads(run("why", "bip-decomp-a", *FOLLOWER, "--json", "--db", demo_db).stdout)
    assert why["phase_margin_deg"] == item["phase_margin_deg"]
    assert why["peaking_db"] == item["peaking_db"]
    assert why["crossover_hz"] > 1e6


def test_spec_explain_and_why_show_the_stability_figures(demo_db: str) -> None:
    spec = run("spec", *FOLLOWER, "--cload", "10nF", "--phase-margin", "50", "--explain").stdout
    assert re.search(r"least phase margin of the loop \[stability\]: 50°\n    formula: PM = 180°",
                     spec), spec
    assert "load 10 nF capacitance" in spec
    why = run("why", "bip-gp-a", "--topology", "follower", "--vin", "1V", "--freq", "10kHz",
              "--rails", "±12", "--load", "2k", "--cload", "10nF", "--db", demo_db).stdout
    line = next(x for x in why.splitlines() if x.startswith("    part: phase margin"))
    assert re.search(r"phase margin [\d.]+° at crossover [\d.]+ kHz; closed-loop peaking "
                     r"[\d.]+ dB; minimum stable noise gain not given \(unity-gain stable\)", line)
    # the fix: one sentence with the value and the margin it restores
    assert re.search(r"fix: a [\d.]+ Ω isolation resistor between the output pin and the load "
                     r"\(feedback at the pin\) restores [\d.]+° phase margin, costing [\d.]+% "
                     r"of DC gain into the load", line), line
    pick = run("pick", "--topology", "follower", "--vin", "1V", "--freq", "10kHz", "--rails",
               "±12", "--load", "2k", "--cload", "10nF", "--list", "all", "--db", demo_db).stdout
    assert re.search(r"  bip-gp-a\n(?:    .*\n)*?    stability: .*\n      fix: a [\d.]+ Ω "
                     r"isolation resistor", pick), pick


def test_bode_prints_the_phase_margin(demo_db: str, tmp_path: Path) -> None:
    png = tmp_path / "b.png"
    out = run("bode", "bip-decomp-a", *FOLLOWER, "--png", str(png), "--db", demo_db).stdout
    js = json.loads(run("bode", "bip-decomp-a", *FOLLOWER, "--json", "--db", demo_db).stdout)
    m = re.search(r"phase margin\s+([\d.]+)° at crossover ([\d.]+) MHz", out)
    assert m, out
    assert abs(float(m.group(1)) - js["phase_margin_deg"]) < 0.05
    assert re.search(r"closed-loop peaking\s+[\d.]+ dB", out)
    assert png.stat().st_size > 10_000
