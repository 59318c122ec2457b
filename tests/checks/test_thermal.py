"""The dissipation check: the output-stage power of a sine into a resistive load against
numerical integration and an ngspice transient of a behavioural class-B output, and the
junction-temperature arithmetic of the check's records."""

from __future__ import annotations

import math
import os
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from picker.checks import run_checks
from picker.checks.thermal import output_stage_power, worst_amplitude
from picker.design.requirement import Requirement
from picker.design.spec import minimum_specs

# (V+, V-, ref, Vp, R): symmetric rails, single supply at mid-rail and off mid-rail,
# asymmetric rails with the reference off centre, the issue's ±35 V driver
CASES = [(15.0, -15.0, 0.0, 10.0, 1e3), (12.0, 0.0, 4.0, 3.0, 470.0),
         (5.0, 0.0, 2.5, 2.4, 100.0), (35.0, -35.0, 0.0, 20.0, 1e3),
         (30.0, -5.0, 10.0, 8.0, 2.2e3), (15.0, -15.0, 3.0, 0.5, 50.0)]


def integrated(vpos: float, vneg: float, ref: float, vp: float, r: float,
               points: int = 400_000) -> float:
    """Output-stage dissipation by direct numerical integration (numpy) over one period
    of vo = ref + Vp·sin: (V+ - vo)·i while i > 0 (sourced from V+), (vo - V-)·(-i)
    while i < 0 (sunk into V-), i = (vo - ref)/R."""
    t = np.linspace(0.0, 1.0, points, endpoint=False)
    vo = ref + vp * np.sin(2 * np.pi * t)
    i = (vo - ref) / r
    p = np.where(i > 0, (vpos - vo) * i, (vo - vneg) * (-i))
    return float(p.mean())


@pytest.mark.parametrize("case", CASES)
def test_closed_form_against_numerical_integration(case: tuple[float, ...]) -> None:
    vpos, vneg, ref, vp, r = case
    # reference: numpy integration of v·i over a period (the definition of average power)
    assert_allclose(output_stage_power(vpos - vneg, vp, 1 / r),
                    integrated(vpos, vneg, ref, vp, r), rtol=1e-7)


def test_worst_amplitude_is_the_maximum_of_the_integral() -> None:
    """2·V/π on ±V rails (Sedra and Smith, Microelectronic Circuits, 7th ed., ch. 12,
    class B dissipation, from memory): the integral peaks there, off mid-rail too."""
    for vpos, vneg, ref in ((15.0, -15.0, 0.0), (24.0, 0.0, 9.0)):
        amps = np.linspace(0.5, 0.45 * (vpos - vneg), 400)
        powers = [integrated(vpos, vneg, ref, a, 1e3, 20_000) for a in amps]
        best = amps[int(np.argmax(powers))]
        assert abs(best - worst_amplitude(vpos - vneg)) < amps[1] - amps[0]
    assert_allclose(worst_amplitude(30.0), 2 * 15.0 / math.pi, rtol=1e-15)


def _part(**values: float) -> pd.DataFrame:
    return pd.DataFrame([values], index=["p"])


def _dissipation(req: Requirement, **part: float) -> dict[str, float]:
    table = run_checks(_part(**part), minimum_specs(req))
    return table.results["dissipation"].record(0)  # type: ignore[no-any-return]


@pytest.mark.parametrize("topology,network,r_eff", [
    # effective loads by hand (the op-amp's inputs at the ideal levels):
    # inverting: rf returns to the virtual ground at ref, so RL‖rf
    ("inverting", {"rf": 10e3, "rg": 1e3}, 1 / (1 / 2e3 + 1 / 10e3)),
    # non-inverting: rf + rg in series to ref, RL‖(rf + rg)
    ("non-inverting", {"rf": 9e3, "rg": 1e3}, 1 / (1 / 2e3 + 1 / 10e3)),
    ("follower", None, 2e3),
])
def test_power_and_junction_temperature(topology: str, network: dict[str, float] | None,
                                        r_eff: float) -> None:
    gain = 1.0 if topology == "follower" else 10.0
    req = Requirement(topology, gain, 15.0, -15.0, 1e3, vout_pk=9.0, load_ohm=2e3,  # type: ignore[arg-type]
                      network=network, temp_min_c=0.0, temp_max_c=70.0, qty=1)
    iq, ch, theta, tjmax = 1.5e-3, 2.0, 120.0, 150.0
    rec = _dissipation(req, iq_a=iq, channels=ch, theta_ja_c_per_w=theta, tj_max_c=tjmax)
    # both channels draw Iq on the 30 V span; one drives the stage (numerical integral)
    power = ch * iq * 30.0 + integrated(15.0, -15.0, 0.0, 9.0, r_eff)
    assert_allclose(rec["power_w"], power, rtol=1e-6)
    # Tj = Ta + θJA·P and the headroom ratio (plain arithmetic, common practice, no source)
    assert_allclose(rec["tj_c"], 70.0 + theta * power, rtol=1e-6)
    assert_allclose(rec["has"], tjmax - theta * power, rtol=1e-6)
    assert rec["need"] == 70.0
    assert_allclose(rec["margin"], (tjmax - 70.0) / (theta * power), rtol=1e-6)
    assert rec["status"] == ("pass" if 70.0 + theta * power <= tjmax else "fail")


def test_the_issue_driver_example() -> None:
    """A part on ±35 V driving 20 Vpk into 1 kΩ as a follower: 0.14 W quiescent (2 mA)
    plus about 0.25 W in the output stage (the issue's figures, common practice, no
    source)."""
    req = Requirement("follower", 1.0, 35.0, -35.0, 1e3, vout_pk=20.0, load_ohm=1e3,
                      temp_max_c=85.0)
    rec = _dissipation(req, iq_a=2e-3, channels=1.0, theta_ja_c_per_w=140.0, tj_max_c=150.0)
    assert_allclose(rec["power_w"], 0.14 + 0.25, rtol=0.02)
    assert_allclose(rec["tj_c"], 140.0, rtol=0.02)  # "about 140 °C in a small package"


def test_idle_channels_draw_quiescent_only() -> None:
    """A quad with one channel used: four Iq, one output stage; with 8 channels needed
    each package carries four output stages (plain arithmetic, common practice)."""
    base = dict(iq_a=1e-3, channels=4.0, theta_ja_c_per_w=100.0, tj_max_c=150.0)
    p_out = integrated(15.0, -15.0, 0.0, 10.0, 1e3)
    for qty, driving in ((1, 1), (2, 2), (8, 4)):
        req = Requirement("follower", 1.0, 15.0, -15.0, 1e3, vout_pk=10.0, load_ohm=1e3,
                          qty=qty)
        rec = _dissipation(req, **base)
        assert_allclose(rec["power_w"], 4 * 1e-3 * 30.0 + driving * p_out, rtol=1e-6)


def test_unknowns_follow_the_rule() -> None:
    """θJA unknown: a part that already fails on Tj,max below the ambient fails, one that
    could pass is unknown; Tj,max unknown is unknown."""
    req = Requirement("follower", 1.0, 15.0, -15.0, 1e3, vout_pk=10.0, load_ohm=1e3,
                      temp_max_c=85.0)
    frame = pd.DataFrame([dict(iq_a=1e-3, channels=1.0, tj_max_c=80.0),
                          dict(iq_a=1e-3, channels=1.0, tj_max_c=150.0),
                          dict(iq_a=1e-3, channels=1.0, theta_ja_c_per_w=100.0)],
                         index=["hot", "cool", "no tj"])
    r = run_checks(frame, minimum_specs(req)).results["dissipation"]
    assert r.statuses() == ["fail", "unknown", "unknown"]


def _ngspice_power(vpos: float, vneg: float, ref: float, vp: float, r: float,
                   tmp_path: Path) -> tuple[float, float]:
    """(average power the three sources deliver, average load power) of a behavioural
    class-B output stage in ngspice .tran: V+ sources max(i, 0), V- sinks max(-i, 0),
    i = (vs - ref)/R, into R to the reference."""
    if shutil.which("ngspice") is None:
        if os.environ.get("CI"):
            pytest.fail("ngspice is not installed; scripts/test installs it")
        pytest.skip("ngspice is not installed (scripts/test installs it)")
    f, out = 1e3, tmp_path / "classb.txt"
    step = 1 / f / 4000
    text = "\n".join([
        "* behavioural class-B output stage into a resistive load",
        f"Vpos vp 0 DC {vpos}", f"Vneg vn 0 DC {vneg}", f"Vref ref 0 DC {ref}",
        f"Vsig s ref SIN(0 {vp} {f})",
        "Vs1 vp x1 DC 0", f"B1 x1 out I = max(v(s,ref)/{r}, 0)",
        f"B2 out x2 I = max(-v(s,ref)/{r}, 0)", "Vs2 x2 vn DC 0",
        f"RL out ref {r}",
        ".options reltol=1e-7 abstol=1e-14",
        ".control", f"tran {step:.6e} {2 / f:.6e} {1 / f:.6e} {step:.6e}",
        "linearize v(out) v(ref) i(vpos) i(vneg) i(vref)",
        f"wrdata {out} v(out) v(ref) i(vpos) i(vneg) i(vref)", ".endc", ".end", ""])
    cir = tmp_path / "classb.cir"
    cir.write_text(text)
    done = subprocess.run(["ngspice", "-b", str(cir)], capture_output=True, text=True,
                          timeout=120, cwd=tmp_path)
    assert out.exists(), done.stdout[-2000:] + done.stderr[-2000:]
    d = np.loadtxt(out, ndmin=2)
    t, vo, vr, ip, ineg, iref = d[:, 0], d[:, 1], d[:, 3], d[:, 5], d[:, 7], d[:, 9]
    keep = t < t[0] + 1 / f - step / 2  # one whole period on the uniform grid
    # ngspice's i(V) flows into the + node through the source: delivered power is -V·i
    supplied = -(vpos * ip + vneg * ineg + vr * iref)
    load = (vo - vr) ** 2 / r
    return float(supplied[keep].mean()), float(load[keep].mean())


@pytest.mark.parametrize("case", [CASES[0], CASES[1], CASES[4]])
def test_against_ngspice_class_b(case: tuple[float, ...], tmp_path: Path) -> None:
    vpos, vneg, ref, vp, r = case
    supplied, load = _ngspice_power(vpos, vneg, ref, vp, r, tmp_path)
    # reference: ngspice .tran, supply power minus load power = output-stage dissipation
    assert_allclose(load, vp**2 / (2 * r), rtol=1e-5)
    assert_allclose(output_stage_power(vpos - vneg, vp, 1 / r), supplied - load, rtol=1e-5)
