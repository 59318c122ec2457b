"""The transimpedance stage's current step (``picker wave PART --step``) against ngspice.

Reference: ngspice ``.tran`` of the designed stage with the same linear single-pole
macromodel as picker's prediction (A0, GBW, Rin and the input capacitances of the demo
part "jfet general purpose A"; Ro = 0), the sensor current stepping from the low end of
``--iin`` to its high end over the first time step (PWL), from the DC operating point.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pandas as pd

from picker import api
from picker.design.tiawave import current_sine, current_step
from picker.stages import stage
from picker.stages.transimpedance import TiaStage
from picker.store import Store
from tests.cli.clirun import run
from tests.design.spice_raw import run_deck

# the demo part "jfet general purpose A" (picker/data/demo_stockroom.csv), single pole
PART = {"aol_v_per_v": 200000.0, "gbw_hz": 3e6, "rin_ohm": 1e12, "rout_ohm": 0.0,
        "cin_diff_f": 3e-12, "cin_cm_f": 3e-12, "slew_v_per_s": 13e6, "iout_a": 0.02,
        "out_head_pos_v": 1.5, "out_head_neg_v": 1.5}
STAGES = [
    dict(topology="transimpedance", iin="10uA", cdet="20pF", zt="100k", f3db="200kHz",
         rshunt="1G", rails="±12", load="10k"),
    dict(topology="transimpedance", iin="0..2uA", cdet="100pF", zt="1meg", f3db="20kHz",
         rails="±12", tia_response="bessel"),
]


def _tran(st: TiaStage, lo: float, hi: float, h: float, t_end: float) -> str:
    return "\n".join([
        "transimpedance stage, current step, single-pole op-amp",
        f"I1 0 n PWL(0 {lo!r} {h!r} {hi!r})",  # into the inverting input
        f"Rsh n 0 {st.rsh!r}" if math.isfinite(st.rsh) else f"Rsh n 0 {st.rn!r}",
        *([f"Cd n 0 {st.cd!r}"] if st.cd > 0 else []),
        f"Rf n o {st.rf!r}", f"Cf n o {st.cf!r}",
        f"Rin p n {PART['rin_ohm']!r}", f"Cdiff p n {PART['cin_diff_f']!r}",
        f"Ccmp p 0 {PART['cin_cm_f']!r}", f"Ccmn n 0 {PART['cin_cm_f']!r}",
        "Vp p 0 0",
        "G1 0 x p n 1",  # A(s) = A0/(1 + s·A0/(2π·GBW)) at x, then a unity buffer
        f"Rx x 0 {PART['aol_v_per_v']!r}",
        f"Cx x 0 {1 / (2 * math.pi * PART['gbw_hz'])!r}",
        "E1 o 0 x 0 1",
        *([f"Rl o 0 {st.load!r}"] if math.isfinite(st.load) else []),
        f".tran {h / 4!r} {t_end!r} 0 {h / 4!r}", ".end"]) + "\n"


def test_current_step_matches_ngspice_tran(tmp_path: Path) -> None:
    for k, opts in enumerate(STAGES):
        req = api.built(api.requirement(**opts))
        st = stage(req)
        assert isinstance(st, TiaStage)
        res = current_step(req, pd.DataFrame([PART], index=["jfet-gp-a"]))
        w = res.waves
        t, vo = w.t, w.vout[0]
        lo, hi = req.iin_a
        plots = run_deck(_tran(st, lo, hi, float(t[1] - t[0]), float(t[-1])), tmp_path,
                         f"tia_step{k}")
        tr = next(v for name, v in plots.items() if "tran" in name.lower())
        spice = np.interp(t, tr["time"].real, tr["v(o)"].real)
        span = abs(hi - lo) * st.rf
        # ngspice .tran: within 0.5% of the step at every sample (trapezoidal rule in
        # both; ngspice's own time steps are a quarter of picker's)
        assert np.max(np.abs(vo - spice)) <= 0.005 * span, (opts, np.max(np.abs(vo - spice)))
        # the rest level and the settled level are the ideal ref - I·Rf within 0.1%
        assert abs(vo[0] - (req.ref - lo * st.rf)) <= 1e-3 * span
        assert abs(vo[-1] - (req.ref - hi * st.rf)) <= 1e-3 * span


def test_wave_step_json_equals_the_api(tmp_path: Path) -> None:
    db = tmp_path / "demo.db"
    run("init", "--demo", "--db", str(db))
    args = ["--topology", "transimpedance", "--iin", "10uA", "--cdet", "20pF", "--zt", "100k",
            "--f3db", "200kHz", "--rails", "±12", "--load", "10k"]
    r = run("wave", "jfet-gp-a", "--step", *args, "--json", "--db", str(db))
    js = json.loads(r.stdout)
    req = api.requirement(topology="transimpedance", iin="10uA", cdet="20pF", zt="100k",
                          f3db="200kHz", rails="±12", load="10k")
    store = Store.open(str(db))
    res = api.step(req, store, "jfet-gp-a").summary()
    store.dispose()
    assert js["step"] == res["step"] and "second pole" in js["left_out"]
    np.testing.assert_allclose(js["final"], res["final"], rtol=1e-12)
    np.testing.assert_allclose(js["rise_time"], res["rise_time"], rtol=1e-12)
    # the step goes -10 µA -> +10 µA: the output falls by 2 V (ideal: I·Rf, rf 100 kΩ)
    np.testing.assert_allclose(js["final"], -2.0, rtol=1e-9)


def test_current_sine_matches_ngspice_ac(tmp_path: Path) -> None:
    """The settled sine (``picker wave PART``) against ngspice ``.ac`` of the same circuit
    at --freq: peak amplitude and the level it swings around within 0.1%."""
    for k, opts in enumerate(STAGES):
        req = api.built(api.requirement(**opts))
        st = stage(req)
        assert isinstance(st, TiaStage)
        w = current_sine(req, pd.DataFrame([PART], index=["jfet-gp-a"]))
        lo, hi = req.iin_a
        deck = _tran(st, 0.0, 0.0, 1e-9, 1e-6).splitlines()
        deck = [("I1 0 n DC 0 AC 1" if line.startswith("I1 ") else
                 f".ac lin 1 {req.freq_hz!r} {req.freq_hz!r}" if line.startswith(".tran")
                 else line) for line in deck]
        plots = run_deck("\n".join(deck) + "\n", tmp_path, f"tia_sine{k}")
        ac = next(v for name, v in plots.items() if "ac" in name.lower())
        h = abs(complex(ac["v(o)"][0]))  # V per A into the inverting input
        amp = (hi - lo) / 2
        peak = (float(w.peak_pos[0]) - float(w.peak_neg[0])) / 2
        np.testing.assert_allclose(peak, h * amp, rtol=1e-3)
        mid = (float(w.peak_pos[0]) + float(w.peak_neg[0])) / 2
        assert abs(mid - (req.ref - (lo + hi) / 2 * st.rf)) <= 1e-3 * h * amp
