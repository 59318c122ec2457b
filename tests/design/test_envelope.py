"""The operating envelope against outside references: the slew edge is the sine's
steepest slope, the swing edge is where ngspice's macromodel output clips, and the
gain-accuracy edge agrees with ngspice .ac of the same macromodel."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from picker.checks import Parts
from picker.design.envelope import envelope, grid
from picker.design.requirement import Requirement
from tests.cli.clirun import fails, run
from tests.design.macromodel_spice import Part, _n, _ngspice, netlist, tran

# invented parameter sets: a general-purpose and a faster one, both with Rsat
SLOW = Part(gbw_hz=1e6, slew_v_per_s=0.5e6, aol_v_per_v=2e5, rin_ohm=2e6, rout_ohm=75,
            iout_a=0.025, out_head_pos_v=1.5, out_head_neg_v=1.5, out_rsat_pos_ohm=60,
            out_rsat_neg_ohm=60)
FAST = Part(gbw_hz=8e6, slew_v_per_s=13e6, aol_v_per_v=1e5, rin_ohm=1e12, rout_ohm=100,
            iout_a=0.02, out_head_pos_v=1.2, out_head_neg_v=1.6, out_rsat_pos_ohm=40,
            out_rsat_neg_ohm=80)
PARTS = {"slow": SLOW, "fast": FAST}

STAGE = Requirement(topology="inverting", gain=10, rail_pos=12, rail_neg=-12, freq_hz=20e3,
                    vout_pk=5, load_ohm=2e3, tolerance=0.0, gain_error=0.002,
                    network={"rf": 100e3, "rg": 10e3})


def _parts() -> Parts:
    rows = []
    for label, p in PARTS.items():
        d = p.frame(label).iloc[0].to_dict()
        d.update(supply_min_v=5, supply_max_v=36, cm_head_pos_v=1.5, cm_head_neg_v=1.5,
                 qty=10, channels=1, label=label, pm_unity_deg=90.0, cin_diff_f=0.0,
                 cin_cm_f=0.0)
        rows.append(d)
    frame = pd.DataFrame(rows).set_index("label")
    frame["available"] = frame["qty"]
    return Parts(frame)


def test_slew_edge_is_the_sines_steepest_slope() -> None:
    env = envelope(STAGE, _parts(), grid(STAGE))
    for j, p in enumerate(PARTS.values()):
        # source: a sine Vp·sin(2πft) slopes at most 2πf·Vp, so the largest amplitude a
        # slew rate SR allows is SR/(2πf) (Franco, Design with Operational Amplifiers and
        # Analog Integrated Circuits, 4th ed., full-power bandwidth, from memory)
        assert_allclose(env.edges["slew"][:, j], p.slew_v_per_s / (2 * math.pi * env.freqs_hz),
                        rtol=1e-12)
    assert env.requirement.margin == 1.0  # the parts' own limits


def test_swing_edge_is_where_the_macromodel_clips(tmp_path: Path) -> None:
    env = envelope(STAGE, _parts(), [100.0])
    for j, (label, p) in enumerate(PARTS.items()):
        # drive the stage to the rails at a low frequency: the output stops at its reach
        hard = STAGE.with_changes(vout_pk=11.99)
        _, v = tran(hard, p, 100.0, tmp_path, name=f"clip-{label}", points=4000)
        # source: ngspice .tran of the behavioural macromodel with Rsat (clip levels)
        reach = min(v.max() - STAGE.ref, STAGE.ref - v.min())
        assert_allclose(env.edges["swing"][0, j], reach, rtol=2e-3)


def _ac_points(req: Requirement, part: Part, freqs: list[float], tmp_path: Path,
               name: str) -> np.ndarray:
    control = []
    for k, f in enumerate(freqs):
        control += [f"ac lin 1 {_n(f)} {_n(f)}", f"wrdata @OUT{k}@ v(out)"]
    data = _ngspice(netlist(req, part, control, ac=True), tmp_path, name, outputs=len(freqs))
    return np.array([complex(d[0, 1], d[0, 2]) for d in data])


def test_gain_accuracy_edge_matches_ngspice_at_five_frequencies(tmp_path: Path) -> None:
    freqs = [200.0, 2e3, 7e3, 20e3, 60e3]
    env = envelope(STAGE, _parts(), freqs)
    for j, (label, p) in enumerate(PARTS.items()):
        g = _ac_points(STAGE, p, [1e-3, *freqs], tmp_path, f"acc-{label}")
        err = np.abs(np.abs(g) / STAGE.gain - 1)
        # source: ngspice .ac of the same macromodel; the check compares the worse of the
        # DC and top-frequency errors with the budget (margin = budget/error)
        expected = STAGE.gain_error / np.maximum(err[0], err[1:])
        assert_allclose(env.cutoffs["gain_accuracy"][:, j], expected, rtol=1e-4)
        for i in range(len(freqs)):
            assert (env.amplitude[i, j] == 0) == (expected[i] < 1), (label, freqs[i])


DEMO_STAGE = ["--topology", "inverting", "--gain", "10", "--vout", "5V", "--freq", "20kHz",
              "--rails", "±12", "--load", "2k", "--tolerance", "0.1%"]


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> str:
    db = str(tmp_path_factory.mktemp("env") / "demo.db")
    run("init", "--demo", "--db", db)
    return db


def test_cli_table_json_and_chart(demo: str, tmp_path: Path) -> None:
    import json

    png = tmp_path / "env.png"
    out = run("envelope", "bip-gp-a", "jfet-gp-a", *DEMO_STAGE, "--db", demo,
              "--png", str(png)).stdout
    assert "20 kHz <- requirement" in out and "bip-gp-a" in out and "jfet-gp-a" in out
    assert png.stat().st_size > 10_000
    data = json.loads(run("envelope", "bip-gp-a", *DEMO_STAGE, "--db", demo, "--json").stdout)
    part = data["parts"][0]
    slew = part["edges_v"]["slew"]
    # source: SR/(2πf) with the demo part's 0.5 V/µs (the sine's steepest slope)
    assert_allclose(slew, [0.5e6 / (2 * math.pi * f) for f in data["freqs_hz"]], rtol=1e-9)
    assert len(part["amplitude_v"]) == len(data["freqs_hz"])


def test_cli_refuses_bad_span_and_unknown_part(demo: str) -> None:
    assert "--span" in fails("envelope", *DEMO_STAGE, "--db", demo, "--span", "1MHz..10Hz").stderr
    assert "--span" in fails("envelope", *DEMO_STAGE, "--db", demo, "--span", "10Hz").stderr
    assert "nope" in fails("envelope", "nope", *DEMO_STAGE, "--db", demo).stderr
