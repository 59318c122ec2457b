"""`picker wave` and `picker bode` through click's CliRunner on the demo stockroom."""

from __future__ import annotations

import json
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from matplotlib.image import imread
from numpy.testing import assert_allclose

from picker.design.requirement import load_design
from picker.stages import stage
from tests.cli.clirun import fails, run
from tests.design.macromodel_spice import Part, ac, f3db, tran

DEMO = Path(__file__).parents[2] / "picker" / "data" / "demo_stockroom.csv"
STAGE = ["--topology", "inverting", "--gain", "10", "--vout", "10V", "--freq", "20kHz",
         "--rails", "±15", "--load", "2k", "--tolerance", "0.1%"]
# a stage with its own resistors, so the ngspice netlist can be written from the file
DESIGN = """\
topology = "inverting"
gain = 20
vout = "10Vpk"
freq = "{freq}"
rails = "±10"
load = "10k"
source = "600"

[network]
rf = "20k"
rg = "400"
"""


def demo_part(label: str, two_pole: bool = False) -> Part:
    """The demo part as the macromodel: single pole, no input capacitance (the waveform's
    model), or with ``two_pole`` the bode model: the second pole from the follower phase
    margin (its derivation checked against ngspice in tests/checks/test_stability_spice.py)
    and the input capacitances."""
    import math

    import pandas as pd

    from picker.circuit.opamp import second_pole

    row = pd.read_csv(DEMO, index_col="label").loc[label]
    stab = ("cin_diff_f", "cin_cm_f", "fp2_hz")
    part = Part(**{k: float(row[k]) for k in Part.__dataclass_fields__ if k not in stab})
    if not two_pole:
        return part
    w2 = float(second_pole(row["pm_unity_deg"], row["gbw_hz"], row["aol_v_per_v"]))
    return replace(part, cin_diff_f=float(row["cin_diff_f"]), cin_cm_f=float(row["cin_cm_f"]),
                   fp2_hz=None if math.isinf(w2) else w2 / (2 * math.pi))


def design_file(tmp_path: Path, freq: str) -> str:
    path = tmp_path / "stage.toml"
    path.write_text(DESIGN.format(freq=freq))
    return str(path)


@pytest.mark.parametrize("label,freq", [("bip-gp-a", "1kHz"), ("bip-gp-a", "20kHz"),
                                        ("jfet-gp-a", "100kHz")])
def test_wave_json_matches_ngspice(label: str, freq: str, db: str, tmp_path: Path) -> None:
    design = design_file(tmp_path, freq)
    js = json.loads(run("wave", label, "--design", design, "--json", "--db", db).stdout)
    assert set(js) == {"part", "peak_pos", "peak_neg", "vpp", "thd", "limits"}
    assert js["part"] == label
    req = load_design(design)
    t, v = tran(req, demo_part(label), req.freq_hz, tmp_path)
    # source: ngspice .tran of the behavioural macromodel with the demo part's numbers
    assert_allclose([js["peak_pos"], js["peak_neg"]], [v.max(), v.min()], rtol=0.02)
    assert_allclose(js["vpp"], v.max() - v.min(), rtol=0.02)
    assert set(js["limits"]) <= {"clip", "slew", "current", "bandwidth"}
    assert 0 <= js["thd"] < 1


def test_wave_limits_for_the_gain_20_stage(db: str, tmp_path: Path) -> None:
    # common practice, no source: gain 20 driven to an ideal 10 V peak on ±10 V clips
    js = json.loads(run("wave", "bip-gp-a", "--design", design_file(tmp_path, "1kHz"),
                        "--json", "--db", db).stdout)
    assert js["limits"] == ["clip"]
    assert 8.0 < js["peak_pos"] < 10.0 and -10.0 < js["peak_neg"] < -8.0
    # common practice, no source: a 0.5 V/µs part cannot make 10 V peak at 20 kHz
    # (it would need 2π·20 kHz·10 V = 1.26 V/µs): the output turns triangular
    js = json.loads(run("wave", "bip-gp-a", "--design", design_file(tmp_path, "20kHz"),
                        "--json", "--db", db).stdout)
    assert "slew" in js["limits"] and js["thd"] > 0.05


def test_bode_json_matches_ngspice(db: str, tmp_path: Path) -> None:
    design = design_file(tmp_path, "20kHz")
    js = json.loads(run("bode", "bip-gp-a", "--design", design, "--json", "--db", db).stdout)
    assert set(js) == {"part", "f3db", "gain_at_f", "phase_at_f", "phase_margin_deg",
                       "crossover_hz", "peaking_db"}
    req = load_design(design)
    f, g, at_f = ac(req, demo_part("bip-gp-a", two_pole=True), tmp_path, fstart=1, fstop=1e9,
                    at=20e3)
    # source: ngspice .ac of the same macromodel: -3 dB within 1 %, 0.1 dB, 1 degree
    assert_allclose(js["f3db"], f3db(f, g), rtol=0.01)
    assert_allclose(js["gain_at_f"], 20 * math.log10(abs(at_f)), atol=0.1)
    # picker states the phase from the ideal stage (an inverting stage's 180° taken out)
    sign = 1.0 if stage(req).ideal_gain >= 0 else -1.0
    assert_allclose((js["phase_at_f"] - math.degrees(np.angle(at_f * sign)) + 180) % 360 - 180,
                    0, atol=1.0)


def _png(path: Path, size: tuple[int, int]) -> None:
    img = imread(path)
    assert (img.shape[1], img.shape[0]) == size
    assert img[..., :3].std() > 0.02  # not blank


def test_wave_png(db: str, tmp_path: Path) -> None:
    png = tmp_path / "wave.png"
    out = run("wave", "bip-gp-a", *STAGE, "--png", str(png), "--size", "800x500", "--db", db)
    _png(png, (800, 500))
    assert "peak +" in out.stdout and "THD" in out.stdout and "limits" in out.stdout
    assert str(png) in out.stdout


def test_bode_png_default_size(db: str, tmp_path: Path) -> None:
    png = tmp_path / "bode.png"
    out = run("bode", "jfet-gp-a", *STAGE, "--png", str(png), "--db", db)
    _png(png, (1000, 750))
    assert "-3 dB frequency" in out.stdout


def test_top_candidates_follow_pick(db: str, tmp_path: Path) -> None:
    png = tmp_path / "top.png"
    js = json.loads(run("wave", "--top", "4", *STAGE, "--png", str(png), "--json",
                        "--db", db).stdout)
    picked = json.loads(run("pick", *STAGE, "--json", "--db", db).stdout)
    assert [r["part"] for r in js] == [a["part"] for a in picked["accepted"]][:4]
    assert all(set(r) == {"part", "peak_pos", "peak_neg", "vpp", "thd", "limits"} for r in js)
    _png(png, (1200, 900))
    text = run("wave", "--top", "2", *STAGE, "--db", db).stdout
    assert picked["accepted"][0]["part"] in text and "accepted" in text


@pytest.mark.parametrize("args", [
    ["wave", "no-such-part", *STAGE],
    ["wave", *STAGE],  # neither a part nor --top
    ["wave", "bip-gp-a", "--top", "3", *STAGE],  # both
    ["wave", "bip-gp-a", "--topology", "inverting", "--gain", "10"],  # no rails, freq, ...
    ["wave", "bip-gp-a", *STAGE, "--size", "12"],
    ["wave", "bip-gp-a", *STAGE, "--png", "/no/such/folder/w.png"],
    ["bode", "no-such-part", *STAGE],
    ["bode", "bip-gp-a", *STAGE, "--freq", "0Hz"],
])
def test_bad_input_is_one_line_exit_2(args: list[str], db: str) -> None:
    fails(*args, "--db", db)


def test_caution_beyond_extra_low_voltage(db: str) -> None:
    out = run("wave", "bip-hv-a", "--topology", "non-inverting", "--gain", "10", "--vout",
              "30V", "--freq", "5kHz", "--rails", "±40", "--db", db)
    assert "Caution" in out.stdout and "licensed" in out.stdout
