"""pick --network-per-part: each part's own network, checked with it, rerun with why."""

from __future__ import annotations

import json

import numpy as np
import pytest
from numpy.testing import assert_allclose

from picker import api
from picker.design import netmodel as nm
from picker.design.netparts import per_part
from picker.report.tables import to_json
from picker.store import Store
from tests.cli.clirun import run
from tests.design.test_network_defaults import iec_member

# A 10 V peak into 2.7 kΩ: the load alone draws 3.7 mA; bip-micro-a (invented demo
# part) delivers 5 mA.
STAGE = ["--topology", "non-inverting", "--gain", "2", "--vin", "5V", "--freq", "100Hz",
         "--rails", "±15", "--load", "2.7k", "--gain-error", "5%"]
PART = "bip-micro-a"
MARGIN = 1.25  # picker's default design margin


def _entry(js: dict, part: str) -> tuple[str, dict]:
    for where in ("accepted", "rejected", "unverified"):
        for item in js[where]:
            if item["part"] == part:
                return where, item
    raise AssertionError(part)


def test_the_shared_network_rejects_a_part_its_own_network_accepts(db: str) -> None:
    shared = json.loads(run("pick", *STAGE, "--json", "--db", db).stdout)
    where, item = _entry(shared, PART)
    assert where == "rejected" and item["fails"] == ["output_current"]
    own = json.loads(run("pick", *STAGE, "--json", "--network-per-part", "--db", db).stdout)
    where, mine = _entry(own, PART)
    assert where == "accepted" and mine["network"]["designed_for"] == "part"
    rf, rg = mine["network"]["resistors"]["rf"], mine["network"]["resistors"]["rg"]
    # by hand (Ohm's law at the 10 V peak, the network a divider to the reference): the
    # output drives the load and rf + rg, times the design margin, within Iout = 5 mA
    vo = 10.0
    need = MARGIN * (vo / 2.7e3 + vo / (rf + rg))
    assert_allclose(mine["checks"]["output_current"]["need"], need, rtol=1e-9)
    assert need <= 5e-3
    # the shared network (designed without a part) draws more: lower resistances
    shared_net = MARGIN * vo / (item["checks"]["output_current"]["need"] - MARGIN * vo / 2.7e3)
    assert shared_net < rf + rg and item["checks"]["output_current"]["need"] > 5e-3
    # the ratio: 1 + rf/rg = 2 exactly with equal E24 values (IEC 60063, eseries package)
    assert rf == rg and iec_member(rf)
    # rerun: the accepted part passes `why` with that network given exactly
    why = json.loads(run("why", PART, *STAGE, "--rf", f"{rf:g}", "--rg", f"{rg:g}", "--json",
                         "--db", db).stdout)
    assert why["verdict"] == "pass"
    assert_allclose(why["checks"]["output_current"]["need"], need, rtol=1e-9)
    text = run("pick", *STAGE, "--network-per-part", "--db", db).stdout
    row = next(line for line in text.splitlines() if f" {PART} " in line)
    assert row.rstrip().endswith(f"Rf {rf / 1e3:g} kΩ, Rg {rg / 1e3:g} kΩ")


def test_per_part_json_equals_the_api(db: str) -> None:
    opts = {a.lstrip("-"): b for a, b in zip(STAGE[::2], STAGE[1::2], strict=True)}
    req = api.requirement(**opts)
    store = Store.open(db)
    try:
        expect = json.loads(to_json(api.pick(req, store, network_per_part=True).to_json()))
    finally:
        store.dispose()
    got = json.loads(run("pick", *STAGE, "--json", "--list", "all", "--network-per-part",
                         "--db", db).stdout)
    assert got == expect


@pytest.mark.parametrize("topology,gain", [("non-inverting", 2.0), ("inverting", 10.0),
                                           ("difference", 4.7)])
def test_every_part_network_keeps_its_own_limits(topology: str, gain: float,
                                                 demo_db: str) -> None:
    req = api.requirement(topology=topology, gain=gain, vin="1V" if gain < 5 else "0.5V",
                          freq="1kHz", rails="±15", load="2k", offset_max="5mV")
    store = Store.open(demo_db)
    try:
        frame = store.parts_frame()
    finally:
        store.dispose()
    from picker.checks import Parts

    parts = Parts(frame)
    shared = api.built(req).network
    assert shared is not None
    nets = per_part(req, parts, shared)
    assert nets.designed and len(nets.networks) >= 1
    vo = req.vout
    fa, fb = ("r2", "r1") if topology == "difference" else ("rf", "rg")
    for i in range(len(parts)):
        if not nets.own[i]:
            continue
        net = nets.network(i)
        a, b = net[fa], net[fb]
        # the window, about 1 kΩ .. 1 MΩ (common practice, no source), E24 by
        # IEC 60063 through the eseries package
        assert 1e3 <= a <= 1e6 and 1e3 <= b <= 1e6
        assert iec_member(a) or a == shared[fa]
        # inverting input impedance >= max(10 kΩ, 10 x source) (common practice, no source)
        if topology != "non-inverting":
            assert b >= 10e3
        # by hand: the feedback leg carries (vo - vn)/a at the peak; vn = 0 (inverting),
        # vo·b/(a+b) (non-inverting), vin/2·a/(b+a) (difference, matched legs)
        vn = {"inverting": 0.0, "non-inverting": vo * b / (a + b),
              "difference": req.vin / 2 * a / (b + a)}[topology]
        i_net = (vo - vn) / a
        iout = float(frame["iout_a"].iloc[i])
        assert i_net <= max(0.1 * vo / 2e3, 1e-3) * (1 + 1e-9)
        if np.isfinite(iout):
            assert MARGIN * (vo / 2e3 + i_net) <= iout * (1 + 1e-9) or \
                MARGIN * vo / 2e3 >= iout
        # by hand: bias currents through the network, the better of no compensation
        # and an ideal compensation resistor, within 50% of --offset-max over the margin
        ib, ios = float(frame["ib_a"].iloc[i]), float(frame["ios_a"].iloc[i])
        if np.isfinite(ib):
            ios = ib if not np.isfinite(ios) else ios
            m = nm.pair_model(topology, 0.0, a, b)  # type: ignore[arg-type]
            ng, rp, rm = float(m.noise_gain), float(m.r_plus), float(m.r_minus)
            unc = ng * (ib * abs(rp - rm) + ios / 2 * (rp + rm))
            off = min(unc, ng * ios * rm) if rm >= rp else unc
            assert off <= 0.5 * 5e-3 / MARGIN * (1 + 1e-9)
