"""The stability check's phase margin and peaking against ngspice.

Reference: ngspice .ac of the behavioural macromodel (tests/design/macromodel_spice.py)
with the second open-loop pole as an RC stage after the gain stage, Ro, the load
capacitance, the input capacitances and the stage's own resistors. The loop gain comes
from a run with the loop opened by a large inductor and a large capacitor injecting the
test source (at the node the output stage reads, so no loading is lost); the peaking
from a closed-loop .ac run. The second pole is picker's (second_pole), so what is
compared is the loop: the network, the loads and the solver.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from picker.checks import Parts
from picker.checks.stability import fixes, stage_margins
from picker.circuit.opamp import second_pole
from picker.design.requirement import Requirement, requirement_from
from picker.design.spec import minimum_specs
from tests.design.macromodel_spice import Part, ac_sweep

DEMO = Path(__file__).parents[2] / "picker" / "data" / "demo_stockroom.csv"
ROWS = pd.read_csv(DEMO, index_col="label")


def spice_part(label: str, **changes: float) -> tuple[Part, Parts]:
    """The demo part as the ngspice macromodel (with picker's second pole) and as Parts."""
    row = ROWS.loc[[label]].copy()
    for k, v in changes.items():
        row[k] = v
    r = row.iloc[0]
    fp2 = float(second_pole(r["pm_unity_deg"], r["gbw_hz"], r["aol_v_per_v"])) / (2 * math.pi)
    part = Part(gbw_hz=r["gbw_hz"], slew_v_per_s=r["slew_v_per_s"], aol_v_per_v=r["aol_v_per_v"],
                rin_ohm=r["rin_ohm"], rout_ohm=r["rout_ohm"], iout_a=r["iout_a"],
                out_head_pos_v=r["out_head_pos_v"], out_head_neg_v=r["out_head_neg_v"],
                cin_diff_f=r["cin_diff_f"], cin_cm_f=r["cin_cm_f"],
                fp2_hz=None if math.isinf(fp2) else fp2)
    return part, Parts(row)


def spice_margins(req: Requirement, part: Part, tmp_path: Path, name: str, *,
                  riso: float = 0.0, cf: float = 0.0) -> tuple[float, float]:
    """(phase margin in degrees, closed-loop peaking in dB) from ngspice."""
    req = req.with_changes(network=dict(minimum_specs(req).stage.resistors))
    lo, hi = part.gbw_hz * 1e-5, part.gbw_hz * 30
    f, t = ac_sweep(req, part, tmp_path, fstart=lo, fstop=hi, per_decade=400, riso=riso,
                    cf=cf, broken=True, name=name + "-loop")
    mag = np.abs(t)
    k = int(np.flatnonzero(mag >= 1)[-1])  # the last point at or above unity
    x = np.log(f[k:k + 2])
    y = np.log(mag[k:k + 2])
    lf = x[0] + (0 - y[0]) * (x[1] - x[0]) / (y[1] - y[0])
    phase = np.unwrap(np.angle(t))
    arg = np.interp(lf, x, phase[k:k + 2])
    pm = 180 + math.degrees(arg)
    fg, g = ac_sweep(req, part, tmp_path, fstart=lo * 10, fstop=hi, per_decade=2000,
                     riso=riso, cf=cf, name=name + "-closed",
                     probe="v(ld)" if riso > 0 else "v(out)")
    peaking = max(0.0, 20 * math.log10(float(np.max(np.abs(g)) / np.abs(g[0]))))
    return pm, peaking


CASES = [
    ("decompensated follower", "bip-decomp-a",
     {"topology": "follower", "vin": "1V", "freq": "1MHz", "rails": "±12"}),
    ("decompensated at noise gain 10", "bip-decomp-a",
     {"topology": "non-inverting", "gain": "10", "vin": "0.1V", "freq": "1MHz",
      "rails": "±12", "rf": "10k"}),
    ("unity-gain stable follower", "bip-gp-a",
     {"topology": "follower", "vin": "1V", "freq": "10kHz", "rails": "±12", "load": "2k"}),
    ("inverting, large rf and input capacitance", "jfet-audio-a",
     {"topology": "inverting", "gain": "1", "vin": "1V", "freq": "10kHz", "rails": "±12",
      "rf": "1meg", "source": "10k"}),
    ("capacitive load", "bip-gp-a",
     {"topology": "follower", "vin": "1V", "freq": "10kHz", "rails": "±12", "load": "2k",
      "cload": "10nF"}),
]


@pytest.mark.parametrize(("name", "label", "options"), CASES, ids=[c[0] for c in CASES])
def test_phase_margin_and_peaking_match_ngspice(name: str, label: str, options: dict[str, str],
                                                tmp_path: Path) -> None:
    req = requirement_from(options)
    part, parts = spice_part(label)
    mg = stage_margins(parts, minimum_specs(req).stage)
    pm, peak = spice_margins(req, part, tmp_path, label)
    # source: ngspice .ac, loop opened with 1 MH / 1 MF; closed-loop .ac for the peaking
    assert abs(float(mg.pm_deg[0]) - pm) < 1.0, (name, float(mg.pm_deg[0]), pm)
    assert abs(float(mg.peaking_db[0]) - peak) < 0.2, (name, float(mg.peaking_db[0]), peak)


def test_the_suggested_isolation_resistor_restores_the_margin_in_ngspice(tmp_path: Path) -> None:
    req = requirement_from({"topology": "follower", "vin": "1V", "freq": "10kHz",
                            "rails": "±12", "load": "2k", "cload": "10nF"})
    spec = minimum_specs(req)
    part, parts = spice_part("bip-gp-a")
    fix = fixes(parts, spec)[0]
    assert fix is not None and fix.kind == "isolation resistor"
    pm, peak = spice_margins(req, part, tmp_path, "riso", riso=fix.value)
    # source: ngspice .ac with the resistor between the pin and the load, feedback at the pin
    assert abs(fix.pm_deg - pm) < 1.0
    assert pm >= 45 - 1.0
    # the DC gain lost into the 2 kΩ load: the divider Riso/(Riso + RL) (Ohm's law; the
    # loop holds the pin, common practice, no source) to the loop's own DC error
    assert fix.gain_loss == pytest.approx(fix.value / (fix.value + 2e3), rel=2e-3)


def test_the_suggested_feedback_capacitor_restores_the_margin_in_ngspice(tmp_path: Path) -> None:
    """An inverting stage with 1 MΩ feedback and a source whose input capacitance makes
    the feedback pole (the part's input capacitances raised to 40 pF to make it bite)."""
    req = requirement_from({"topology": "inverting", "gain": "1", "vin": "1V",
                            "freq": "1kHz", "rails": "±12", "rf": "1meg"})
    spec = minimum_specs(req)
    part, parts = spice_part("jfet-audio-a", cin_diff_f=40e-12, cin_cm_f=40e-12)
    before = float(stage_margins(parts, spec.stage).pm_deg[0])
    assert before < 45
    fix = fixes(parts, spec)[0]
    assert fix is not None and fix.kind == "feedback capacitor"
    pm_before, _ = spice_margins(req, part, tmp_path, "nocf")
    pm, _ = spice_margins(req, part, tmp_path, "cf", cf=fix.value)
    # source: ngspice .ac loop gain without and with the capacitor across rf
    assert abs(before - pm_before) < 1.0
    assert abs(fix.pm_deg - pm) < 1.0 and pm >= 45 - 1.0


def test_second_pole_gives_the_entered_follower_margin_in_ngspice(tmp_path: Path) -> None:
    """The derivation: the model as a follower, no load, Ro and input capacitances 0,
    has the entered phase margin (ngspice .ac loop gain of the two-pole model)."""
    req = requirement_from({"topology": "follower", "vin": "1V", "freq": "1MHz",
                            "rails": "±12"})
    for label in ("bip-decomp-a", "bip-fast-a", "bip-gp-a"):
        part, _ = spice_part(label, rout_ohm=1e-6, cin_diff_f=0.0, cin_cm_f=0.0,
                             rin_ohm=1e15)
        pm, _ = spice_margins(req, part, tmp_path, label + "-unity")
        assert abs(pm - float(ROWS.loc[label, "pm_unity_deg"])) < 0.1, label
