"""picker's exact closed-loop gain against ngspice and against sympy nodal analysis.

Every topology with source and load resistances, a network that is not an exact
ratio, and op-amps from slow to fast, with and without known Rin and Ro. The circuits
are written out unreduced (tests/design/reference.py), so picker's reduction of each
topology is checked too.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
import sympy as sp
from numpy.testing import assert_allclose

from picker.circuit.opamp import closed_loop_gain, closed_loop_pole_hz, loop, transfer
from picker.design.requirement import Requirement
from picker.design.spec import ng_eff
from picker.stages import stage
from tests.design.reference import (
    Circuit,
    OpAmp,
    ngspice_gains,
    stage_circuit,
    sympy_gain,
    to_complex,
)

# (name, topology, network, source Ω, load Ω or None)
STAGES = [
    ("inv", "inverting", {"rf": 47e3, "rg": 4.7e3, "rp": 3.3e3}, 600.0, 2e3),
    ("inv_light", "inverting", {"rf": 100e3, "rg": 1e3}, 0.0, None),
    ("noninv", "non-inverting", {"rf": 47e3, "rg": 4.7e3}, 10e3, 2e3),
    ("noninv_rp", "non-inverting", {"rf": 22e3, "rg": 2.2e3, "rp": 1e3}, 600.0, 600.0),
    ("follower", "follower", {}, 50e3, 1e3),
    ("follower_rf", "follower", {"rf": 10e3}, 1e3, None),
    ("difference", "difference", {"r1": 4.7e3, "r2": 47e3, "r3": 4.3e3, "r4": 51e3}, 600.0, 2e3),
]
# op-amps: (name, A0, GBW, Rin or None, Ro or None)
AMPS = [
    ("bipolar", OpAmp(2e5, 1e6, 2e6, 75.0)),
    ("low_gain", OpAmp(1e4, 3e6, 1e5, 200.0)),
    ("unknown_rin_ro", OpAmp(1e6, 10e6, None, None)),
]
FREQS = [100.0, 20e3, 300e3, 3e6]


def requirement(topology: str, net: dict[str, float], rs: float, load: float | None) -> Requirement:
    gain = 1.0 if topology == "follower" else 10.0
    return Requirement(topology, gain, 15.0, -15.0, 1e3, vin_pk=0.1,  # type: ignore[arg-type]
                       source_ohm=rs, load_ohm=load, network=net)


def picker_gains(topology: str, net: dict[str, float], rs: float, load: float | None,
                 amp: OpAmp) -> list[complex]:
    st = stage(requirement(topology, net, rs, load))
    rin = np.nan if amp.rin is None else amp.rin
    ro = np.nan if amp.ro is None else amp.ro
    args = ([amp.a0], [amp.gbw], [rin], [ro])
    return [complex(closed_loop_gain(st, *args, f)[0]) for f in [0.0] + FREQS]


def all_circuits() -> list[tuple[Circuit, list[complex]]]:
    out = []
    for name, topo, net, rs, load in STAGES:
        for amp_name, amp in AMPS:
            c = stage_circuit(f"{name}/{amp_name}", topo, net, rs, load, amp)
            out.append((c, picker_gains(topo, net, rs, load, amp)))
    return out


@pytest.fixture(scope="module")
def spice(tmp_path_factory: pytest.TempPathFactory) -> dict[str, list[complex]]:
    """One ngspice run: .op and .ac at every frequency for every stage and op-amp."""
    circuits = [c for c, _ in all_circuits()]
    return ngspice_gains(circuits, FREQS, tmp_path_factory.mktemp("spice"))


@pytest.mark.parametrize("case", all_circuits(), ids=lambda c: c[0].name)
def test_gain_matches_ngspice(case: tuple[Circuit, list[complex]],
                              spice: dict[str, list[complex]]) -> None:
    circuit, ours = case
    ref = np.array(spice[circuit.name])
    got = np.array(ours)
    # ngspice .op (DC) and .ac, the same linear macromodel: magnitude and phase to 1e-4
    assert_allclose(np.abs(got), np.abs(ref), rtol=1e-4)
    assert_allclose(np.unwrap(np.angle(got)), np.unwrap(np.angle(ref)), rtol=1e-4, atol=1e-7)
    assert_allclose(got, ref, rtol=1e-4)


@pytest.mark.parametrize("case", all_circuits()[::2], ids=lambda c: c[0].name)
def test_gain_matches_sympy_nodal_analysis(case: tuple[Circuit, list[complex]]) -> None:
    circuit, ours = case
    # sympy: modified nodal analysis of the unreduced circuit in exact arithmetic
    ref = [to_complex(sympy_gain(circuit, None))] + [to_complex(sympy_gain(circuit, f))
                                                     for f in FREQS[1:3]]
    assert_allclose(np.array([ours[0], ours[2], ours[3]]), np.array(ref), rtol=1e-9)


@pytest.mark.parametrize("name,topology,net,rs,load", STAGES, ids=[s[0] for s in STAGES])
def test_noise_gain_with_rin_is_the_return_ratio(name: str, topology: str, net: dict[str, float],
                                                  rs: float, load: float | None) -> None:
    """spec's NG_eff formula (Ro = 0) against the return ratio found by sympy."""
    a = sp.Symbol("A", positive=True)
    st = stage(requirement(topology, net, rs, load))
    for rin in (5e3, 1e6):
        c = stage_circuit(name, topology, net, rs, load, OpAmp(1.0, 1.0, rin, None))
        g = sympy_gain(c, a=a)
        g_inf = sp.limit(g, a, sp.oo)
        # G = G∞·T/(1+T) with T = A/NG_eff  =>  NG_eff = A·(G∞ - G)/G, independent of A
        ng = sp.simplify(a * (g_inf - g) / g)
        assert sp.Symbol("A") not in ng.free_symbols
        # sympy: exact return ratio of the unreduced circuit
        assert_allclose(ng_eff(st, rin), float(ng), rtol=1e-12)
        assert_allclose(1 / loop(st, [rin], [0.0]).beta[0], float(ng), rtol=1e-12)


def test_closed_loop_pole_and_transfer_match_ngspice(tmp_path: Path) -> None:
    """The closed loop's single pole is where G(s) turns by 45° less the zero's share."""
    net, rs, load = {"rf": 47e3, "rg": 4.7e3}, 1e3, 2e3
    amp = OpAmp(2e5, 1e6, 2e6, 75.0)
    st = stage(requirement("non-inverting", net, rs, load))
    lp = loop(st, [amp.rin], [amp.ro])
    f_cl = float(closed_loop_pole_hz(lp, [amp.a0], [amp.gbw])[0])
    b1, b0, a1, a0 = (float(x[0]) for x in transfer(lp, [amp.a0], [amp.gbw]))
    assert_allclose(a0 / a1 / (2 * math.pi), f_cl, rtol=1e-12)
    c = stage_circuit("pole", "non-inverting", net, rs, load, amp)
    ref = ngspice_gains([c], [f_cl / 10, f_cl, 3 * f_cl], tmp_path)["pole"]
    for f, g in zip([0.0, f_cl / 10, f_cl, 3 * f_cl], ref, strict=True):
        s = 2j * math.pi * f
        # ngspice .ac: the first-order G(s) = (b1·s + b0)/(a1·s + a0) from picker's loop
        assert_allclose((b1 * s + b0) / (a1 * s + a0), g, rtol=1e-4)


def test_ideal_network_gain_is_the_requested_gain() -> None:
    """With A0 -> ∞ and no Rin/Ro the ideal-ratio network gives exactly the gain asked."""
    for topo, gain in (("inverting", 7.5), ("non-inverting", 3.3), ("difference", 2.0),
                       ("follower", 1.0), ("non-inverting", 1.0), ("inverting", 0.5)):
        req = Requirement(topo, gain, 12.0, -12.0, 1e3, vin_pk=0.1,  # type: ignore[arg-type]
                          source_ohm=200.0, load_ohm=1e3)
        st = stage(req)
        net = {k: v for k, v in st.resistors.items() if math.isfinite(v)}
        if topo == "non-inverting" and gain == 1.0:
            net = {"rf": st.resistors["rf"]}
            c = stage_circuit(topo, "follower", net, 200.0, 1e3, OpAmp(1.0, 1.0, None, None))
        else:
            c = stage_circuit(topo, topo, net, 200.0, 1e3, OpAmp(1.0, 1.0, None, None))
        a = sp.Symbol("A", positive=True)
        g_inf = sp.limit(sympy_gain(c, a=a), a, sp.oo)
        # sympy: the unreduced circuit's gain with an ideal op-amp
        assert_allclose(abs(float(g_inf)), gain, rtol=1e-12)
        assert_allclose(st.ideal_gain, float(g_inf), rtol=1e-12)
