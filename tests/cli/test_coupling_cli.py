"""--coupling ac --fmin on the command line: spec, pick, why and net show the designed
coupling network; nonsense is one line and exit 2.

The refusals are facts of the trade stated in the issue (common practice, no source): a
coupling corner must lie below the lowest signal frequency, which lies below the top one.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest

from tests.cli.clirun import fails, run

STAGE = ["--topology", "non-inverting", "--gain", "10", "--vin", "0.1V", "--freq", "20kHz",
         "--rails", "+5/0", "--coupling", "ac", "--fmin", "20Hz", "--source", "600"]
INV = ["--topology", "inverting", "--gain", "10", "--vin", "0.1V", "--freq", "20kHz",
       "--rails", "+5/0", "--coupling", "ac", "--fmin", "20Hz"]


def test_spec_shows_the_coupling_network() -> None:
    out = run("spec", *STAGE).output
    for words in ("AC coupling (designed):", "cin (input coupling, E6)", "rb (bias resistor",
                  "cg (ground leg, DC gain 1", "divider current", "low-frequency -3 dB point",
                  "input impedance"):
        assert words in out
    data = json.loads(run("spec", *STAGE, "--json").output)["coupling"]
    # the allowed corner is fmin/10 by default (the rule, common practice)
    assert math.isclose(data["allowed_hz"], 2.0)
    assert data["low_3db_hz"] <= data["allowed_hz"]
    assert data["cg_f"] is not None and data["rb_ohm"] is not None


def test_low_corner_sets_the_allowed_point() -> None:
    data = json.loads(run("spec", *INV, "--low-corner", "5Hz", "--json").output)["coupling"]
    assert math.isclose(data["allowed_hz"], 5.0) and data["low_3db_hz"] <= 5.0
    assert data["cg_f"] is None and data["rb_ohm"] is None  # inverting: no ground leg, no rb


def test_net_pick_why_take_the_options(db: str) -> None:
    net = run("net", *STAGE).output
    assert "AC coupling (designed):" in net and "op-amp's own input" not in net
    assert json.loads(run("net", *STAGE, "--json").output)["coupling"]["mode"] == "divider"
    assert run("pick", *INV, "--db", db).output
    why = run("why", "bip-gp-a", *STAGE, "--offset-max", "50mV", "--db", db).output
    assert "AC coupling (designed):" in why and "(at DC: coupling capacitors open): at 25 °C" in why


def test_design_file_keys(tmp_path: Path) -> None:
    f = tmp_path / "ac.toml"
    f.write_text('topology = "inverting"\ngain = 10\nvin = "0.1V"\nfreq = "20kHz"\n'
                 'rails = "+5/0"\ncoupling = "ac"\nfmin = "20Hz"\nlow_corner = "1Hz"\n')
    data = json.loads(run("spec", "--design", str(f), "--json").output)["coupling"]
    assert math.isclose(data["allowed_hz"], 1.0)


@pytest.mark.parametrize(("args", "words"), [
    (["--fmin", "30kHz"], "is not below the top frequency"),
    (["--fmin", "20kHz"], "is not below the top frequency"),
    (["--low-corner", "20Hz"], "--low-corner: 20 Hz is not below --fmin"),
    (["--low-corner", "1kHz"], "is not below --fmin"),
    (["--coupling", "dc"], "--fmin: applies to an AC-coupled stage only"),
    (["--topology", "difference"], "--coupling: ac applies to the"),
    (["--topology", "vcvs-lowpass", "--f0", "1kHz"], "--coupling: ac applies to the"),
    (["--coupling", "xy"], "--coupling"),
    (["--fmin", "-3Hz"], "--fmin"),
    (["--fmin", "0"], "--fmin"),
])
def test_nonsense_is_one_line(args: list[str], words: str) -> None:
    assert words in fails("spec", *INV, *args).stderr


def test_ac_without_fmin() -> None:
    err = fails("spec", *INV[:-2]).stderr
    assert "--fmin: missing" in err
    assert "--low-corner" in fails("spec", *INV[:-4], "--low-corner", "1Hz").stderr


def test_design_file_nonsense(tmp_path: Path) -> None:
    f = tmp_path / "bad.toml"
    f.write_text('topology = "inverting"\ngain = 10\nvin = "0.1V"\nfreq = "20kHz"\n'
                 'rails = "+5/0"\ncoupling = "sometimes"\nfmin = "20Hz"\n')
    assert "bad.toml: coupling" in fails("spec", "--design", str(f)).stderr
    f.write_text('topology = "non-inverting"\ngain = 10\nvin = "0.1V"\nfreq = "20kHz"\n'
                 'rails = "+5/0"\ncoupling = "ac"\nfmin = "20Hz"\n'
                 'network = { rf = "9k", rg = "1k", rp = "1k" }\n')
    assert "rp has no place" in fails("spec", "--design", str(f)).stderr


def test_zin_sets_the_bias_resistor() -> None:
    data = json.loads(run("spec", *STAGE, "--zin", "1meg", "--json").output)["coupling"]
    assert data["rb_ohm"] >= 1e6
