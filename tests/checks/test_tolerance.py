"""Resistor tolerance inside the gain budget.

References: the worst case of a ratio of two resistors each within ±t is
(1 + t)/(1 - t) one way and (1 - t)/(1 + t) the other (interval arithmetic on R1/R2);
the root-sum-square of two independent tolerances on a ratio is t·√2 (first-order
propagation of independent errors; common practice, no source).
"""

from __future__ import annotations

import json
import math
import re

import pandas as pd
from numpy.testing import assert_allclose

from picker import api
from picker.design.rank import select
from picker.design.requirement import Requirement
from picker.design.spec import minimum_specs
from picker.store import Store
from tests.cli.clirun import run

QUICK = ["--topology", "inverting", "--gain", "10", "--vin", "0.5Vpk", "--freq", "20kHz",
         "--rails", "±12", "--load", "2k"]


def ideal_part() -> dict[str, float]:
    return {"slew_v_per_s": 100e6, "gbw_hz": 1e9, "aol_v_per_v": 1e9, "rin_ohm": 1e12,
            "rout_ohm": 0.0, "out_head_pos_v": 0.0, "out_head_neg_v": 0.0,
            "out_rsat_pos_ohm": 0.0, "out_rsat_neg_ohm": 0.0,
            "cm_head_pos_v": 0.0, "cm_head_neg_v": 0.0, "iout_a": 1.0, "supply_min_v": 1.0,
            "supply_max_v": 100.0, "qty": 10.0, "channels": 1.0, "iq_a": 1e-3,
            "theta_ja_c_per_w": 1.0, "tj_max_c": 200.0, "vdiff_max_v": 100.0,
            "pm_unity_deg": 90.0, "cin_diff_f": 0.0, "cin_cm_f": 0.0}


def test_worst_case_and_rss_spread_of_a_two_resistor_ratio() -> None:
    req = Requirement("inverting", 10.0, 15.0, -15.0, 1e3, vin_pk=0.1,
                      network={"rf": 10e3, "rg": 1e3}, tolerance=0.01)
    b = minimum_specs(req).budget
    assert_allclose(b.tolerance_high, 1.01 / 0.99 - 1, rtol=1e-12)
    assert_allclose(b.tolerance_low, 1 - 0.99 / 1.01, rtol=1e-12)
    rss = minimum_specs(req.with_changes(tolerance_rule="rss")).budget
    assert_allclose([rss.tolerance_low, rss.tolerance_high], [0.01 * math.sqrt(2)] * 2,
                    rtol=1e-5)


def test_an_ideal_op_amp_with_5_percent_resistors_fails_a_1_percent_gain() -> None:
    """The op-amp is perfect: the whole error is the resistors' worst corner."""
    req = Requirement("inverting", 10.0, 15.0, -15.0, 1e3, vin_pk=0.1,
                      network={"rf": 10e3, "rg": 1e3}, tolerance=0.05)
    sel = select(pd.DataFrame([ideal_part()], index=["ideal"]), req)
    assert sel.rejected[0].fails == ["gain_accuracy"]
    assert_allclose(sel.table.results["gain_accuracy"].has[0], 1.05 / 0.95 - 1, rtol=1e-6)
    fine = select(pd.DataFrame([ideal_part()], index=["ideal"]),
                  req.with_changes(tolerance=0.001))
    assert [e.part for e in fine.accepted] == ["ideal"]


def test_quick_start_with_1_percent_resistors_names_the_class_that_fits(demo_db: str) -> None:
    """picker net's own worst case for the stage is beyond the budget; pick agrees, says so,
    and the tolerance it names makes parts pass when rerun."""
    lo, hi = json.loads(run("net", *QUICK, "--json").stdout)["worst_case"]
    out = run("pick", *QUICK, "--db", demo_db).stdout
    assert "Accepted: none" in out
    m = re.search(r"resistor tolerance 1% \(worst\) moves the gain by up to ±([\d.]+)% of the "
                  r"0\.800% budget.*?; ([\d.]+)% resistors leave it at least half "
                  r"\(--tolerance ([\d.]+)%\)", out)
    assert m, out
    # the same worst case as picker net's tolerance corners of the designed network
    assert_allclose(float(m.group(1)) / 100, max(1 - lo / 10, hi / 10 - 1), atol=5e-6)
    again = run("pick", *QUICK, "--tolerance", m.group(3) + "%", "--db", demo_db).stdout
    assert "Accepted: none" not in again and "resistor tolerance" not in again
    req = api.requirement(topology="inverting", gain="10", vin="0.5Vpk", freq="20kHz",
                          rails="±12", load="2k", tolerance=m.group(3) + "%")
    store = Store.open(demo_db)
    assert len(api.pick(req, store).accepted) > 0
    store.dispose()


def test_the_budget_split_shows_the_tolerance_share() -> None:
    out = run("spec", *QUICK, "--tolerance", "0.1%").stdout
    assert re.search(r"resistor tolerance -0\.\d+%/\+0\.\d+% \(worst, 0\.1%\)", out)
