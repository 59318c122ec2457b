"""The transimpedance stage through the command line: spec, pick, why, net, bode with the
design file of data/examples, JSON equal to the API's, bad input refused with one line.

Outside references: eseries (IEC 60063) for the values `picker net --json` prints; the
feedback pole 1/(2π·rf·cf) of an RC (any circuits text) against the bandwidth asked.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

from picker import api
from picker.report.tables import to_json
from picker.store import Store
from tests.cli.clirun import fails, run

DESIGN = str(Path(__file__).resolve().parents[2] / "data" / "examples"
             / "photodiode-receiver.toml")
PART = "cmos-rr-12v-a"


def test_design_file_is_named_in_readme() -> None:
    readme = (Path(DESIGN).parents[2] / "README.md").read_text(encoding="utf-8")
    assert "data/examples/photodiode-receiver.toml" in readme
    assert api.requirement(design=DESIGN).topology == "transimpedance"


def test_spec_pick_why_bode(db: str) -> None:
    out = run("spec", "--design", DESIGN).stdout
    assert "gain-bandwidth product" in out and "feedback pole" in out
    explained = run("spec", "--design", DESIGN, "--explain").stdout
    for name in ("tia_gbw", "tia_bandwidth", "tia_bias", "tia_slew", "tia_noise", "swing",
                 "stability", "transimpedance"):
        assert f"[{name}]" in explained
    for name in ("[gain_accuracy]", "[slew]", "[noise]", "[phase]"):
        assert name not in explained  # replaced by the transimpedance checks
    assert "left out" not in explained or "input_protection" in explained
    spec_js = json.loads(run("spec", "--design", DESIGN, "--json").stdout)
    assert spec_js == json.loads(to_json(api.spec(api.requirement(design=DESIGN)).to_json()))
    picked = run("pick", "--design", DESIGN, "--db", db).stdout
    assert "Accepted" in picked and "tia_" in picked
    why_js = json.loads(run("why", PART, "--design", DESIGN, "--json", "--db", db).stdout)
    store = Store.open(db)
    try:
        assert why_js == json.loads(to_json(api.why(api.requirement(design=DESIGN), PART,
                                                    store).to_json()))
    finally:
        store.dispose()
    assert set(why_js["checks"]) >= {"tia_gbw", "tia_bandwidth", "tia_bias", "stability"}
    bode = run("bode", PART, "--design", DESIGN, "--db", db).stdout
    assert "DC transimpedance" in bode and "dBΩ" in bode
    js = json.loads(run("bode", PART, "--design", DESIGN, "--json", "--db", db).stdout)
    # the bandwidth the bode command reads agrees with the check's
    assert math.isclose(js["f3db"], why_js["checks"]["tia_bandwidth"]["has"], rel_tol=2e-3)


def test_net_values_are_series_members_and_the_pole_clears_the_bandwidth() -> None:
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)
        import eseries

    js = json.loads(run("net", "--design", DESIGN, "--json").stdout)
    assert js == json.loads(to_json(api.design_network(api.requirement(design=DESIGN))
                                    .as_json()))
    rf, cf = js["values"]["rf"], js["values"]["cf"]
    assert math.isclose(eseries.find_nearest(eseries.E24, rf), rf, rel_tol=1e-9)
    assert math.isclose(eseries.find_nearest(eseries.E12, cf), cf, rel_tol=1e-9)
    assert 1 / (2 * math.pi * rf * cf) >= js["band_hz"]
    assert "feedback pole" in run("net", "--design", DESIGN).stdout


def test_bad_input_is_one_line(db: str) -> None:
    base = ["--topology", "transimpedance", "--rails", "±12", "--zt", "100k",
            "--f3db", "100kHz"]
    assert "--iin: missing" in fails("spec", *base).stderr
    assert "--iin" in fails("spec", *base, "--iin", "10 V").stderr
    assert "--gain" in fails("spec", *base, "--iin", "1uA", "--gain", "10").stderr
    assert "--iin" in fails("spec", *base, "--iin", "5uA..1uA").stderr
    assert "--cdet: applies to the transimpedance" in fails(
        "spec", "--topology", "inverting", "--gain", "10", "--vin", "1V", "--freq", "1kHz",
        "--rails", "±12", "--cdet", "10pF").stderr
    assert "no deck yet" in fails("netlist", PART, "--design", DESIGN, "--db", db).stderr
