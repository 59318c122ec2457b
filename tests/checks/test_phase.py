"""The phase shift of the closed-loop gain at the top frequency: shown by pick and why,
limited by --phase-error.

References: ngspice .ac of the behavioural macromodel with a demo part's numbers (the
same macromodel the waveform tests use); and the single-pole closed loop's phase
-arctan(f·NG/GBW) for A0 -> ∞ (e.g. Franco, Design with Operational Amplifiers and Analog
Integrated Circuits, 4th ed., ch. 6, from memory).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
from numpy.testing import assert_allclose

from picker.design.rank import select
from picker.design.requirement import Requirement, load_design
from tests.cli.clirun import run
from tests.design.macromodel_spice import Part, ac

DEMO = Path(__file__).parents[2] / "picker" / "data" / "demo_stockroom.csv"
DESIGN = """\
topology = "non-inverting"
gain = 2
vout = "10Vpk"
freq = "50kHz"
rails = "±15"
load = "10k"
tolerance = "0.1%"

[network]
rf = "10k"
rg = "10k"
"""


def demo_part(label: str) -> Part:
    row = pd.read_csv(DEMO, index_col="label").loc[label]
    return Part(**{k: float(row[k]) for k in Part.__dataclass_fields__ if k in row.index})


def test_pick_and_why_phase_match_ngspice(demo_db: str, tmp_path: Path) -> None:
    design = tmp_path / "stage.toml"
    design.write_text(DESIGN, encoding="utf-8")
    js = json.loads(run("pick", "--design", str(design), "--json", "--db", demo_db).stdout)
    listed = {i["part"]: i["phase_at_f_deg"] for k in ("accepted", "rejected", "unverified")
              for i in js[k]}
    req = load_design(design)
    for label in ("bip-gp-a", "jfet-gp-a"):
        _, _, at_f = ac(req, demo_part(label), tmp_path, fstart=1e3, fstop=1e5, at=50e3,
                        per_decade=10, name=label)
        # source: ngspice .ac of the macromodel, phase of v(out) per volt in at 50 kHz
        assert_allclose(listed[label], math.degrees(np.angle(at_f)), atol=0.01)
        why = json.loads(run("why", label, "--design", str(design), "--json",
                             "--db", demo_db).stdout)
        assert why["phase_at_f_deg"] == listed[label]
    out = run("pick", "--design", str(design), "--db", demo_db).stdout
    assert "phase at f" in out


def test_phase_error_limit_at_the_single_pole_boundary() -> None:
    """A part with huge A0 and GBW k x NG·f/tan(φ): passes at k = 1.02, fails at 0.98."""
    req = Requirement("non-inverting", 2.0, 15.0, -15.0, 50e3, vout_pk=1.0,
                      network={"rf": 10e3, "rg": 10e3}, tolerance=0.0, gain_error=0.5,
                      phase_error_deg=5.0)
    boundary = 2 * 50e3 / math.tan(math.radians(5.0))
    rows = {}
    for k in (1.02, 0.98):
        rows[f"k={k}"] = {"slew_v_per_s": 1e9, "gbw_hz": k * boundary, "aol_v_per_v": 1e12,
                          "rin_ohm": 1e15, "rout_ohm": 0.0, "out_head_pos_v": 0.0,
                          "out_rsat_pos_ohm": 0.0, "out_rsat_neg_ohm": 0.0,
                          "out_head_neg_v": 0.0, "cm_head_pos_v": 0.0, "cm_head_neg_v": 0.0,
                          "iout_a": 1.0, "supply_min_v": 1.0, "supply_max_v": 100.0,
                          "qty": 1.0, "channels": 1.0, "iq_a": 1e-3,
                          "theta_ja_c_per_w": 1.0, "tj_max_c": 200.0, "vdiff_max_v": 100.0,
                          "pm_unity_deg": 90.0, "cin_diff_f": 0.0, "cin_cm_f": 0.0}
    sel = select(pd.DataFrame(list(rows.values()), index=list(rows)), req)
    assert [e.part for e in sel.accepted] == ["k=1.02"]
    assert sel.rejected[0].fails == ["phase"]
    has = sel.table.results["phase"].has
    want = [math.degrees(math.atan(50e3 * 2 / (k * boundary))) for k in (1.02, 0.98)]
    assert_allclose(has, want, rtol=1e-6)


def test_explain_shows_what_the_phase_rule_would_ask() -> None:
    out = run("spec", "--topology", "non-inverting", "--gain", "2", "--vout", "10Vpk",
              "--freq", "50kHz", "--rails", "±15", "--explain", "--margin", "1").stdout
    # common practice, no source: GBW >= NG·f/e, here 2 × 50 kHz / 1% = 10 MHz
    assert "GBW the phase rule would ask [gbw_phase_rule]: 10 MHz" in out
    assert "for the magnitude error only" in out
