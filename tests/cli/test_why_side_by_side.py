"""`picker why A B [C]`: two or three check sheets in columns, each equal to its own sheet."""

from __future__ import annotations

import json
import math
import re

from numpy.testing import assert_allclose

from picker import api
from picker.checks import registered
from picker.store import Store
from tests.cli.clirun import fails, run

STAGE = ["--topology", "inverting", "--gain", "10", "--vin", "0.5Vpk", "--freq", "20kHz",
         "--rails", "±12", "--load", "2k", "--tolerance", "0.1%"]
#: the checks pick ranks by (the registry's own flag)
RANKED = {c.name for c in registered() if c.ranked}
PARTS = ["bip-gp-a", "jfet-gp-a", "bip-ss-b"]


def test_json_is_the_list_of_single_sheets_and_equals_the_api(db: str) -> None:
    got = json.loads(run("why", *PARTS, *STAGE, "--db", db, "--json").stdout)
    singles = [json.loads(run("why", p, *STAGE, "--db", db, "--json").stdout) for p in PARTS]
    assert got == singles
    store = Store.open(db)
    try:
        req = api.requirement(topology="inverting", gain=10, vin="0.5Vpk", freq="20kHz",
                              rails="±12", load="2k", tolerance="0.1%")
        assert got == json.loads(json.dumps(api.why_side_by_side(req, PARTS, store).to_json()))
    finally:
        store.dispose()
    # by hand (common practice, no source): a sine of Vp at f slews at 2π·f·Vp at its zero
    # crossing; with the 1.25 margin 2π × 20 kHz × 5 V × 1.25
    for sheet in got:
        assert_allclose(sheet["checks"]["slew"]["need"], 2 * math.pi * 20e3 * 5 * 1.25,
                        rtol=1e-12)


def test_text_has_a_column_group_per_part_and_marks_each_limiting_check(db: str) -> None:
    out = run("why", *PARTS[:2], *STAGE, "--db", db).stdout
    sheets = [json.loads(run("why", p, *STAGE, "--db", db, "--json").stdout) for p in PARTS[:2]]
    lines = out.splitlines()
    header = next(ln for ln in lines if ln.startswith("check"))
    assert header.split()[:2] == ["check", "need"]
    assert all(p in header for p in PARTS[:2])
    rows = {ln.split()[0]: ln for ln in lines if ln.split() and ln.split()[0] in sheets[0]["checks"]}
    assert set(rows) == set(sheets[0]["checks"])
    for k, sheet in enumerate(sheets):
        # the limiting check: the smallest margin among the checks pick ranks by (the
        # margin-bearing ones); recomputed here from the sheet's own records
        ranked = {n: c["margin"] for n, c in sheet["checks"].items()
                  if c["margin"] is not None and n in RANKED}
        limiting = min(ranked, key=lambda n: ranked[n])
        for name, row in rows.items():
            cells = re.split(r"\s{2,}", row.strip())
            status = cells[2 + 3 * k + 2]  # check, need, then has/margin/status per part
            assert status == sheet["checks"][name]["status"] + (" *" if name == limiting
                                                                 else ""), row
        assert f"Verdict: {sheet['part']}" in out
    assert out.count("*") == 2 + 1  # one mark per part plus the legend


def test_side_by_side_refuses_repeats_too_many_and_unknown_parts(db: str) -> None:
    assert "named twice" in fails("why", "bip-gp-a", "bip-gp-a", *STAGE, "--db", db).stderr
    assert "two or three" in fails("why", *PARTS, "bip-gp-b", *STAGE, "--db", db).stderr
    assert "no-such" in fails("why", "bip-gp-a", "no-such", *STAGE, "--db", db).stderr
