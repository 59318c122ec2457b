"""Closed-loop frequency response against ngspice .ac of the same macromodel."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from picker.circuit.opamp import closed_loop_gain
from picker.design.requirement import Requirement
from picker.design.response import response
from picker.stages import stage
from tests.design.macromodel_spice import Part, ac, f3db
from tests.design.wave_cases import CASES, GP

# the waveform cases, plus stages chosen for the response: a unity-gain inverter with a
# heavy source, a fast low-gain part whose output resistance meets a light load
CASES_AC = [(name, part, req) for name, part, req, _ in CASES] + [
    ("inverter-source", GP, Requirement(topology="inverting", gain=1, rail_pos=15,
                                        rail_neg=-15, freq_hz=200e3, vin_pk=1,
                                        source_ohm=2e3, load_ohm=5e3,
                                        network={"rf": 12e3, "rg": 10e3})),
    ("fast-low-aol", Part(gbw_hz=200e6, slew_v_per_s=1e9, aol_v_per_v=3e3, rin_ohm=1e5,
                          rout_ohm=10, iout_a=0.1, out_head_pos_v=1.3, out_head_neg_v=1.3),
     Requirement(topology="non-inverting", gain=10, rail_pos=6, rail_neg=-6, freq_hz=5e6,
                 vout_pk=2, load_ohm=150, source_ohm=50, network={"rf": 900.0, "rg": 100.0})),
]


@pytest.mark.parametrize("name,part,req", CASES_AC, ids=[c[0] for c in CASES_AC])
def test_response_matches_ngspice_ac(name: str, part: Part, req: Requirement,
                                     tmp_path: Path) -> None:
    got = response(req, part.frame())
    f, g, at_f = ac(req, part, tmp_path, fstart=0.1, fstop=1e10, at=req.freq_hz, name=name)
    # source: ngspice .ac of the same macromodel (tests/design/macromodel_spice.py)
    assert_allclose(got.f3db[0], f3db(f, g), rtol=0.01)
    # source: ngspice .ac at the top frequency, 0.1 dB and 1 degree
    assert_allclose(got.gain_at_f[0], 20 * math.log10(abs(at_f)), atol=0.1)
    # picker states the phase from the ideal stage: an inverting stage's 180° taken out
    sign = 1.0 if stage(req).ideal_gain >= 0 else -1.0
    dphase = (got.phase_at_f[0] - math.degrees(np.angle(at_f * sign)) + 180) % 360 - 180
    assert_allclose(dphase, 0.0, atol=1.0)
    # source: ngspice .ac, the whole sweep (gain within 0.1 dB where the sweeps overlap)
    ours = response(req, part.frame(), freqs=f[::200])
    assert_allclose(ours.gain_db[0], 20 * np.log10(np.abs(g[::200])), atol=0.1)


def test_response_equals_the_solver_exact_gain() -> None:
    # consistency with picker.circuit.opamp.closed_loop_gain (checked there against
    # ngspice .op/.ac and sympy)
    frame = pd.concat([GP.frame("gp"), Part(5e6, 1e6, np.nan, np.nan, np.nan, np.nan,
                                            1.0, 1.0).frame("sparse")])
    for _, _, req in CASES_AC:
        got = response(req, frame, freqs=[1.0, 1e3, 1e5, 1e7])
        a0 = frame["aol_v_per_v"].fillna(1e300).to_numpy()
        for k, f in enumerate(got.freqs):
            exact = closed_loop_gain(stage(req), a0, frame["gbw_hz"], frame["rin_ohm"],
                                     frame["rout_ohm"], float(f))
            assert_allclose(got.gain_db[:, k], 20 * np.log10(np.abs(exact)), atol=1e-9)


def test_unknown_gbw_gives_no_response() -> None:
    frame = pd.concat([GP.frame("known"), GP.frame("blank")])
    frame.loc["blank", "gbw_hz"] = np.nan
    got = response(CASES_AC[0][2], frame)
    assert list(got.known) == [True, False]
    assert got.summary(1) == {"part": "blank", "f3db": None, "gain_at_f": None,
                              "phase_at_f": None, "phase_margin_deg": None,
                              "crossover_hz": None, "peaking_db": None}
    # the sweep spans the top frequency and the -3 dB point
    assert got.freqs[0] < min(got.freq_hz, got.f3db[0]) / 10
    assert got.freqs[-1] > max(got.freq_hz, got.f3db[0]) * 5


def test_an_inverting_stage_reads_its_phase_from_the_ideal_inversion() -> None:
    """Far below the closed-loop pole an inverting stage lags the ideal inversion by
    almost nothing: picker shows about 0°, not 180° (the phase check's convention)."""
    req = Requirement(topology="inverting", gain=10, rail_pos=15, rail_neg=-15, freq_hz=10.0,
                      vin_pk=0.1, network={"rf": 100e3, "rg": 10e3})
    got = response(req, GP.frame())
    # source: single-pole closed loop, phase -atan(f/fc) with fc = GBW/NG = 1 MHz/11
    # (common practice, no source)
    assert_allclose(got.phase_at_f[0], -math.degrees(math.atan(10.0 / (1e6 / 11))), atol=0.01)
