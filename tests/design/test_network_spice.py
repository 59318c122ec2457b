"""Designed networks simulated with ngspice (`ngspice -b`, a `.op` per circuit).

The netlists are written here from the circuit diagrams, independent of picker's
reduced-circuit model: the op-amp is a VCVS of gain A0 behind Ro with Rin between the
inputs (the solver's macromodel at DC). Values are written as plain floats, so no
SPICE suffix (where `M` means milli) can creep in.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from picker.circuit.opamp import closed_loop_gain
from picker.design import netmodel as nm
from picker.design.network import design_network, exact_gain
from picker.design.requirement import Requirement
from picker.stages import stage

# outside CI a missing ngspice skips these; in CI (CI set) they run and fail loudly
pytestmark = pytest.mark.skipif(shutil.which("ngspice") is None and not os.environ.get("CI"),
                                reason="ngspice not installed (scripts/test installs it)")

PART = dict(label="bipolar test part", iout_a=0.025, ib_a=8e-8, ios_a=2e-8, vos_v=2e-4,
            in_a_per_rthz=5e-13, rin_ohm=2e6, aol_v_per_v=2e5, gbw_hz=1e6, rout_ohm=75.0)


def run_op(tmp_path: Path, body: str, name: str = "c") -> float:
    """v(o) from an ngspice operating point of ``body``."""
    cir = tmp_path / f"{name}.cir"
    cir.write_text(f"{name}\n{body}\n.control\nset numdgt=12\nop\nprint v(o)\n.endc\n.end\n")
    # batch mode exits 1 when the netlist has no .print line; the control block's
    # print is the result, so the output is read rather than the exit status
    run = subprocess.run(["ngspice", "-b", str(cir)], capture_output=True, text=True,
                         timeout=60)
    m = re.search(r"v\(o\)\s*=\s*(\S+)", run.stdout)
    assert m, run.stdout + run.stderr
    return float(m.group(1))


def r_or_wire(name: str, a: str, b: str, ohms: float) -> str:
    """A resistor, or a 0 V source for a 0 Ω wire."""
    return f"V{name} {a} {b} DC 0" if ohms == 0 else f"R{name} {a} {b} {ohms!r}"


def netlist(topo: str, net: dict[str, float], rs: float, load: float | None,
            opamp: str) -> str:
    """The stage drawn out node by node; input 1 V (difference: +0.5 V and -0.5 V)."""
    lines = []
    if topo == "inverting":
        lines += ["Vin in 0 DC 1", r_or_wire("s", "in", "s", rs),
                  r_or_wire("g", "s", "n", net["rg"]), r_or_wire("f", "n", "o", net["rf"]),
                  r_or_wire("p", "p", "0", net.get("rp", 0.0))]
    elif topo == "non-inverting":
        lines += ["Vin in 0 DC 1", r_or_wire("s", "in", "s", rs),
                  r_or_wire("p", "s", "p", net.get("rp", 0.0)),
                  r_or_wire("f", "n", "o", net["rf"])]
        if np.isfinite(net["rg"]):
            lines.append(r_or_wire("g", "n", "0", net["rg"]))
    else:  # difference
        lines += ["Vpos ip 0 DC 0.5", "Vneg im 0 DC -0.5",
                  r_or_wire("s1", "im", "a", rs), r_or_wire("1", "a", "n", net["r1"]),
                  r_or_wire("2", "n", "o", net["r2"]), r_or_wire("s3", "ip", "b", rs),
                  r_or_wire("3", "b", "p", net["r3"]), r_or_wire("4", "p", "0", net["r4"])]
    if load is not None:
        lines.append(f"RL o 0 {load!r}")
    return "\n".join(lines + [opamp])


def macromodel(a0: float, rin: float, ro: float) -> str:
    return f"Rin p n {rin!r}\nE1 x 0 p n {a0!r}\nRo x o {ro!r}"


CASES = [
    ("inverting", 22.0, 600.0, 2e3, "E24", None),
    ("inverting", 10.0, 0.0, None, "E96", 100e3),  # zin forces rf = 1 MΩ and an rp
    ("non-inverting", 6.8, 1e3, 1e3, "E12", None),
    ("difference", 3.3, 50.0, 10e3, "E24", None),
]


@pytest.mark.parametrize("topo,gain,rs,load,series,zin", CASES)
def test_exact_gain_with_the_designed_network_agrees_with_ngspice(
        tmp_path: Path, topo: str, gain: float, rs: float, load: float | None,
        series: str, zin: float | None) -> None:
    req = Requirement(topology=topo, gain=gain, rail_pos=15.0, rail_neg=-15.0,  # type: ignore[arg-type]
                      freq_hz=1e3, vin_pk=0.1, source_ohm=rs, load_ohm=load)
    net = design_network(req, PART, series=series, zin_ohm=zin)  # type: ignore[arg-type]
    st = stage(req.with_changes(network=dict(net.network)))
    g = closed_loop_gain(st, np.array([PART["aol_v_per_v"]]), np.array([PART["gbw_hz"]]),
                         np.array([PART["rin_ohm"]]), np.array([PART["rout_ohm"]]), 0.0)
    vo = run_op(tmp_path, netlist(topo, dict(net.network), rs, load,
                                  macromodel(PART["aol_v_per_v"], PART["rin_ohm"],
                                             PART["rout_ohm"])))
    # reference: ngspice .op of the same circuit; tolerance 1e-7 relative
    assert_allclose(g.real[0], vo, rtol=1e-7)
    assert_allclose(g.imag[0], 0.0, atol=1e-12)
    dc, _ = exact_gain(req, net.network, PART)  # type: ignore[misc, arg-type]
    assert_allclose(dc.real, vo, rtol=1e-7)  # reference: the same ngspice .op


@pytest.mark.parametrize("topo,zin", [("inverting", 100e3), ("non-inverting", None)])
def test_bias_current_offset_agrees_with_ngspice(tmp_path: Path, topo: str,
                                                 zin: float | None) -> None:
    rs = 0.0 if topo == "inverting" else 47e3
    req = Requirement(topology=topo, gain=10.0, rail_pos=15.0, rail_neg=-15.0,  # type: ignore[arg-type]
                      freq_hz=1e3, vin_pk=0.1, source_ohm=rs)
    net = design_network(req, PART, series="E24", zin_ohm=zin)  # type: ignore[arg-type]
    ib, ios = PART["ib_a"], PART["ios_a"]
    m = nm.pair_model(topo, rs, net.network["rf"], net.network["rg"])  # type: ignore[arg-type]
    for with_rp in (False, True):
        resistors = dict(net.network)
        if not with_rp:
            resistors.pop("rp", None)
        rp = resistors.get("rp", 0.0)
        offsets = []
        for sign in (1, -1):  # which input draws the larger bias current
            ibp, ibn = ib + sign * ios / 2, ib - sign * ios / 2
            body = netlist(topo, resistors, rs, None,
                           macromodel(1e9, 1e15, 0.0)
                           + f"\nIbp p 0 DC {ibp!r}\nIbn n 0 DC {ibn!r}")
            body = body.replace("Vin in 0 DC 1", "Vin in 0 DC 0")
            offsets.append(abs(run_op(tmp_path, body, f"b{sign}")))
        lib = nm.bias_offset(m.noise_gain, m.r_plus + rp, m.r_minus, ib, ios)
        # reference: ngspice .op with the bias currents as sources; tolerance 1e-6
        assert_allclose(max(offsets), float(lib), rtol=1e-6)
    # with rf 1 MΩ (inverting) and a 47 kΩ source (non-inverting) compensation pays
    assert "rp" in net.network
