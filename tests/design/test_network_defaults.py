"""The default designed network: its window and rules, its gain against ngspice, its
values against IEC 60063, and tolerance advice that holds when rerun."""

from __future__ import annotations

import math
import os
import re
import shutil
import subprocess
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from picker.design.network import design_network
from picker.design.requirement import Requirement
from picker.errors import BadRequirement
from tests.design.test_network_spice import netlist

needs_spice = pytest.mark.skipif(shutil.which("ngspice") is None and not os.environ.get("CI"),
                                 reason="ngspice not installed (scripts/test installs it)")


def req(topology: str, gain: float, **kw: object) -> Requirement:
    base: dict = dict(rail_pos=12.0, rail_neg=-12.0, freq_hz=1e3, vin_pk=0.2)
    base.update(kw)
    return Requirement(topology=topology, gain=gain, **base)  # type: ignore[arg-type]


def iec_member(value: float, series: str = "E24") -> bool:
    import eseries

    return bool(eseries.find_nearest(eseries.ESeries[series], value) == value)


def spice(tmp_path: Path, body: str, name: str) -> tuple[float, float]:
    """(v(o) at the .op, |v(o)| of a 1 kHz .ac) from ngspice."""
    cir = tmp_path / f"{name}.cir"
    cir.write_text(f"{name}\n{body}\n.control\nset numdgt=12\nop\nprint v(o)\n"
                   "ac lin 1 1e3 1e3\nprint vm(o)\n.endc\n.end\n")
    run = subprocess.run(["ngspice", "-b", str(cir)], capture_output=True, text=True,
                         timeout=60)
    op = re.search(r"v\(o\)\s*=\s*(\S+)", run.stdout)
    ac = re.search(r"vm\(o\)\s*=\s*(\S+)", run.stdout)
    assert op and ac, run.stdout + run.stderr
    return float(op.group(1)), float(ac.group(1))


DEFAULTS = [("inverting", 10.0, 0.0), ("inverting", 4.7, 600.0), ("non-inverting", 10.0, 0.0),
            ("non-inverting", 2.0, 1e3), ("difference", 2.2, 50.0), ("follower", 1.0, 100e3)]


@needs_spice
@pytest.mark.parametrize("topo,gain,rs", DEFAULTS)
def test_default_network_gain_agrees_with_ngspice_op_and_ac(tmp_path: Path, topo: str,
                                                            gain: float, rs: float) -> None:
    net = design_network(req(topo, gain, source_ohm=rs), None)
    values = dict(net.network)
    if topo == "follower":  # drawn as a non-inverting stage with an open ground leg
        topo, values = "non-inverting", {"rf": values.get("rf", 0.0), "rg": math.inf}
    body = netlist(topo, values, rs, None, "E1 o 0 p n 1e9")
    body = (body.replace("Vin in 0 DC 1", "Vin in 0 DC 1 AC 1")
            .replace("Vpos ip 0 DC 0.5", "Vpos ip 0 DC 0.5 AC 0.5")
            .replace("Vneg im 0 DC -0.5", "Vneg im 0 DC -0.5 AC 0.5 180"))
    op, ac = spice(tmp_path, body, topo)
    # reference: ngspice .op and .ac (1 kHz) of the circuit drawn out with a 1e9 VCVS;
    # tolerance 1e-4 relative
    assert_allclose(abs(op), net.gain, rtol=1e-4)
    assert_allclose(ac, net.gain, rtol=1e-4)


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(topo=st.sampled_from(["inverting", "non-inverting", "difference"]),
       lg=st.floats(-0.5, 2.5), rs=st.sampled_from([0.0, 50.0, 600.0, 2e3]),
       load=st.sampled_from([None, 600.0, 2e3, 10e3, 100e3]), vin=st.floats(0.005, 0.5))
def test_default_window_holds_over_random_stages(topo: str, lg: float, rs: float,
                                                 load: float | None, vin: float) -> None:
    gain = round(10**lg, 3)
    if topo == "non-inverting":
        gain = max(gain, 1.1)
    vout = gain * vin
    if vout > 11:
        vin = 11 / gain
        vout = 11.0
    r = req(topo, gain, source_ohm=rs, load_ohm=load, vin_pk=vin)
    try:
        net = design_network(r, None)
    except BadRequirement as exc:
        assert "\n" not in str(exc) and "nearest that fits" in str(exc) or "split" in str(
            exc) or "buffer" in str(exc)
        return
    for slot in net.slots:
        for v in slot.parts:
            # the window, about 1 kΩ .. 1 MΩ (common practice, no source), and
            # IEC 60063 E24 membership through the eseries package
            assert 1e3 <= v <= 1e6 and iec_member(v)
    if topo != "non-inverting":  # input impedance >= max(10 kΩ, 10 x source)
        leg = net.network["rg" if topo == "inverting" else "r1"]
        assert leg >= max(10e3, 10 * rs) * (1 - 1e-12)
    # network current at the peak <= max(10% of the load's, 1 mA), by hand: the
    # feedback leg carries (vo - vn)/rf (common practice, no source)
    i_load = 0.0 if load is None else vout / load
    fb = net.network["r2" if topo == "difference" else "rf"]
    if topo == "difference":
        vn = vin / 2 * fb / (rs + net.network["r1"] + fb)
    else:
        vn = 0.0 if topo == "inverting" else vin
    assert (vout - vn) / fb <= max(0.1 * i_load, 1e-3) * (1 + 1e-9) + 1e-15
    assert abs(net.gain_error) <= r.gain_error / r.margin * (1 + 1e-9)


GRID = [(t, g, b, tol) for t in ("inverting", "non-inverting") for g in (2.2, 4.7, 10.0, 33.0)
        for b in (0.005, 0.01, 0.03) for tol in (0.01, 0.05)]


@pytest.mark.parametrize("topo,gain,budget,tol", GRID)
def test_tolerance_advice_holds_when_rerun(topo: str, gain: float, budget: float,
                                          tol: float) -> None:
    r = req(topo, gain, gain_error=budget, tolerance=tol)
    try:
        net = design_network(r, None)
    except BadRequirement:
        return
    notes = " ".join(net.notes)
    m = re.search(r"--tolerance ([0-9.]+)%", notes)
    if m is None:
        return
    t = float(m.group(1)) / 100
    again = design_network(r.with_changes(tolerance=t), None)
    rf, rg = again.network["rf"], again.network["rg"]
    # by hand: the gain's extremes at the corners rf(1 ± t), rg(1 ∓ t) of rf/rg or
    # 1 + rf/rg (monotonic in each resistor)
    f = (lambda a, b: a / b) if topo == "inverting" else (lambda a, b: 1 + a / b)
    hi, lo = f(rf * (1 + t), rg * (1 - t)), f(rf * (1 - t), rg * (1 + t))
    assert max(abs(hi / gain - 1), abs(lo / gain - 1)) <= budget * (1 + 1e-12)
