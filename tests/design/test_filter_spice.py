"""Each designed filter stage with a demo part against ngspice `.ac`.

The circuits are written out here element by element from the stage descriptions (the
module docstrings of picker.stages.vcvs_lowpass, ...), independently of picker's
netlists, with the linear macromodel of tests/design/reference.py (single pole, Rin, Ro;
it writes capacitors too). ngspice's response at 41 points from fn/2 to 2·fn is fitted
with the same least-squares section fit picker uses; picker's gain, f0 and Q with the
part and its -3 dB edges must agree within 1% (ngspice, outside reference). Boundary
parts 2% either side of the response limit are confirmed by ngspice as well.
"""

from __future__ import annotations

import csv
import io
import math
from pathlib import Path

import numpy as np
import pytest

from picker import api
from picker.checks import Parts, run_checks
from picker.checks.filters import part_sections
from picker.data import demo_stockroom
from picker.design.filterresp import filter_response
from picker.stages import stage
from picker.stages.filterbase import FilterStage
from picker.stages.sections import fit, fit_grid
from tests.design.reference import Circuit, OpAmp, ngspice_gains

CASES = {
    "vcvs-lowpass": {"f0": "20kHz", "gain": 1.0, "response": "butterworth"},
    "vcvs-highpass": {"f0": "5kHz", "gain": 2.0, "response": "chebyshev",
                      "passband_ripple": "1dB"},
    "mfb-lowpass": {"f0": "20kHz", "gain": 2.0, "response": "bessel"},
    "mfb-bandpass": {"f0": "10kHz", "gain": 2.0, "bandwidth": "1kHz"},
}
RS, LOAD = 100.0, 10e3


def demo_part(label: str) -> dict[str, float]:
    rows = csv.DictReader(io.StringIO(demo_stockroom().read_text(encoding="utf-8")))
    row = next(r for r in rows if r["label"] == label)
    return {k: float(row[k]) for k in ("aol_v_per_v", "gbw_hz", "rin_ohm", "rout_ohm")}


def spice_circuit(name: str, topology: str, v: dict[str, float], amp: OpAmp) -> Circuit:
    """The stage written from its description (not from picker's netlist)."""
    e: list[tuple] = [("V", "s", "0", 1.0)]  # type: ignore[type-arg]
    rs = RS if topology != "vcvs-highpass" else 0.0
    e.append(("R", "s", "i", rs))
    if topology.startswith("vcvs-"):
        if topology == "vcvs-lowpass":
            e += [("R", "i", "a", v["r1"]), ("R", "a", "p", v["r2"]), ("C", "a", "o", v["c1"]),
                  ("C", "p", "0", v["c2"])]
        else:
            e += [("C", "i", "a", v["c1"]), ("C", "a", "p", v["c2"]), ("R", "a", "o", v["r1"]),
                  ("R", "p", "0", v["r2"])]
        e.append(("R", "n", "o", v["rf"]))  # 0: a wire
        if math.isfinite(v["rg"]):
            e.append(("R", "n", "0", v["rg"]))
    elif topology == "mfb-lowpass":
        e += [("R", "i", "a", v["r1"]), ("R", "a", "o", v["r2"]), ("R", "a", "n", v["r3"]),
              ("C", "a", "0", v["c1"]), ("C", "n", "o", v["c2"]), ("R", "p", "0", 0.0)]
    else:
        e += [("R", "i", "a", v["r1"]), ("R", "a", "0", v["r2"]), ("C", "a", "n", v["c1"]),
              ("C", "a", "o", v["c2"]), ("R", "n", "o", v["r3"]), ("R", "p", "0", 0.0)]
    e += [("R", "o", "0", LOAD), ("OPA", "p", "n", "o", amp)]
    return Circuit(name, tuple(e))


def built(topology: str) -> tuple[object, FilterStage]:
    opts = dict(CASES[topology])
    req = api.built(api.requirement(topology=topology, vin="1V", rails="±15", load=LOAD,
                                    source=RS if topology != "vcvs-highpass" else 0,
                                    **opts))
    st = stage(req)
    assert isinstance(st, FilterStage)
    return req, st


@pytest.mark.parametrize("label", ["jfet-gp-a", "bip-audio-a"])
@pytest.mark.parametrize("topology", list(CASES))
def test_filter_with_part_matches_ngspice(topology: str, label: str, tmp_path: Path) -> None:
    req, st = built(topology)
    part = demo_part(label)
    amp = OpAmp(part["aol_v_per_v"], part["gbw_hz"], part["rin_ohm"], part["rout_ohm"])
    cols = {k: np.array([x]) for k, x in part.items()}
    r = filter_response(st, cols, req.freq_hz)  # type: ignore[attr-defined]
    assert st.ideal is not None
    grid = fit_grid(st.ideal.f0_hz)
    edges = [float(x) for x in (r.f_low[0], r.f_high[0]) if math.isfinite(x)]
    assert edges, "picker found no -3 dB edge"
    spice = ngspice_gains([spice_circuit("f", topology, dict(st.resistors), amp)],
                          [*grid, *edges], tmp_path)["f"][1:]
    ref = fit(st.kind, grid, np.array(spice[:len(grid)]))
    # ngspice .ac, fitted the same way: gain, f0 and Q within 1% of picker's
    np.testing.assert_allclose(r.gain[0], ref.gain, rtol=0.01)
    np.testing.assert_allclose(r.f0_hz[0], ref.f0_hz, rtol=0.01)
    np.testing.assert_allclose(r.q[0], ref.q, rtol=0.01)
    # ngspice .ac at picker's -3 dB edges: |H| = |K|/√2 within 1%
    for k in range(len(edges)):
        np.testing.assert_allclose(abs(spice[len(grid) + k]), abs(ref.gain) / math.sqrt(2),
                                   rtol=0.01)
    # the check's own fit is the response's (one computation)
    f0, q, g = part_sections(Parts.from_columns([label], cols), api.spec(req))
    np.testing.assert_allclose([f0[0], q[0], g[0]], [r.f0_hz[0], r.q[0], r.gain[0]], rtol=1e-9)


def _response_move(req: object, gbw: float) -> tuple[str, float]:
    cols = {"aol_v_per_v": [1e6], "gbw_hz": [gbw], "rin_ohm": [1e12], "rout_ohm": [10.0],
            "slew_v_per_s": [1e9], "iout_a": [1.0], "min_noise_gain": [1.0]}
    res = run_checks(Parts.from_columns(["boundary"], cols), api.spec(req)).results["filter_response"]
    return res.status(0), float(res.has[0])


@pytest.mark.parametrize("topology", ["vcvs-lowpass", "mfb-bandpass"])
def test_boundary_parts_around_the_response_limit(topology: str, tmp_path: Path) -> None:
    req, st = built(topology)
    allowed = api.spec(req).budget.allowed
    lo, hi = 1e4, 1e10  # GBW: the move falls as GBW grows; bisect where it equals the budget
    for _ in range(60):
        mid = math.sqrt(lo * hi)
        lo, hi = (mid, hi) if _response_move(req, mid)[1] > allowed else (lo, mid)
    edge = math.sqrt(lo * hi)
    assert st.ideal is not None
    grid = fit_grid(st.ideal.f0_hz)
    own = st.ideal
    for scale, verdict in ((0.98, "fail"), (1.02, "pass")):
        status, _ = _response_move(req, edge * scale)
        assert status == verdict
        amp = OpAmp(1e6, edge * scale, 1e12, 10.0)
        spice = ngspice_gains([spice_circuit("b", topology, dict(st.resistors), amp)], list(grid),
                              tmp_path)["b"][1:]
        ref = fit(st.kind, grid, np.array(spice))
        move = max(abs(ref.f0_hz / own.f0_hz - 1), abs(ref.q / own.q - 1),
                   abs(ref.gain / own.gain - 1))
        # ngspice: 2% below the limit's GBW the move exceeds the budget, 2% above it does not
        assert (move <= allowed) == (verdict == "pass"), (scale, move, allowed)


def test_boundary_parts_around_the_gbw_rule() -> None:
    req, st = built("mfb-lowpass")
    assert st.ideal is not None
    # the rule as stated in README (common practice, no source): 100·(1 + |K|)·Q·fn
    rule = 100 * (1 + abs(st.ideal.gain)) * st.ideal.q * st.ideal.f0_hz
    for scale, verdict in ((0.98, "fail"), (1.02, "pass")):
        parts = Parts.from_columns(["b"], {"gbw_hz": [rule * scale]})
        assert run_checks(parts, api.spec(req)).results["filter_gbw"].status(0) == verdict


@pytest.mark.parametrize("topology", ["vcvs-lowpass", "mfb-bandpass"])
def test_step_response_matches_ngspice_tran(topology: str, tmp_path: Path) -> None:
    import subprocess

    from picker.design.filterwave import step
    from tests.design.reference import _netlist_lines, need_ngspice

    req, st = built(topology)
    part = demo_part("jfet-gp-a")
    frame = {k: [v] for k, v in part.items()}
    w = step(req, frame)
    t, vo = w.t, w.vout[0] - w.drive.ref_v
    amp = OpAmp(part["aol_v_per_v"], part["gbw_hz"], part["rin_ohm"], part["rout_ohm"])
    lines = _netlist_lines(spice_circuit("t", topology, dict(st.resistors), amp), 0)
    h = float(t[1] - t[0])
    vin = req.vin  # type: ignore[attr-defined]
    lines = [f"V0_0 c0_s 0 PWL(0 0 {h!r} {vin!r})" if ln.startswith("V0_0 ") else ln
             for ln in lines]
    stop = float(t[-1])
    deck = ["* step", *lines, ".control", "set wr_singlescale", "set wr_vecnames",
            f"tran {h / 4!r} {stop!r} 0 {h / 4!r}", "wrdata tran.txt v(c0_o)", ".endc", ".end", ""]
    (tmp_path / "step.cir").write_text("\n".join(deck))
    subprocess.run([need_ngspice(), "-b", "step.cir"], cwd=tmp_path, capture_output=True,
                   timeout=120, check=False)
    rows = np.loadtxt(tmp_path / "tran.txt", skiprows=1)
    spice = np.interp(t, rows[:, 0], rows[:, 1])
    scale = float(np.max(np.abs(spice)))
    # ngspice .tran of the same circuit: the step response within 1% of its peak
    np.testing.assert_allclose(vo, spice, atol=0.01 * scale)
