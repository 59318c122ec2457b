"""Infeasible networks are errors whose hint works, and networks as built stay exact."""

from __future__ import annotations

import json
import re

import pytest
from numpy.testing import assert_allclose

from tests.cli.clirun import fails, run

STAGE = ["--vin", "0.5Vpk", "--freq", "20kHz", "--rails", "±12"]

# (stage, limit named) — each must fail, name its limit, and pass when rerun with the hint
CASES = [
    (["--topology", "inverting", "--gain", "10", "--noise-max", "20uV", "--part", "bip-gp-a"],
     "noise"),
    (["--topology", "non-inverting", "--gain", "10", "--noise-max", "5uV"], "noise"),
    (["--topology", "inverting", "--gain", "1000", "--vin", "5mV"], "input impedance"),
    (["--topology", "inverting", "--gain", "10", "--zin", "200k"], "input impedance"),
    (["--topology", "inverting", "--gain", "6.8", "--rf", "33k"], "input impedance"),
    (["--topology", "inverting", "--gain", "10", "--offset-max", "300uV", "--part", "bip-gp-a"],
     "offset"),
    (["--topology", "inverting", "--gain", "10", "--offset-max", "1mV", "--part", "bip-gp-a",
      "--zin", "100k"], "input impedance"),
    (["--topology", "inverting", "--gain", "7.3", "--series", "E3"], "series"),
    # bip-micro-a delivers 5 mA: 8 V into 2 kΩ takes 4 mA, times the 1.25 margin all of
    # it, so no network inside the window fits (by hand: Iout/(m·Vo) - 1/RL = 0.125 µS)
    (["--topology", "non-inverting", "--gain", "2", "--vin", "3.999V", "--load", "2k",
      "--rails", "±15", "--part", "bip-micro-a"], "output load"),
    (["--topology", "non-inverting", "--gain", "2", "--vout", "7.998V", "--load", "2k",
      "--rails", "±15", "--part", "bip-micro-a"], "output load"),
    # bip-fast-a: Rin·A0 = 3e8 Ω, so rf near 300 kΩ costs rf/(Rin·A0) = 0.1% of gain,
    # above its 10% share of 1%/1.25
    (["--topology", "non-inverting", "--gain", "300", "--vin", "10mV", "--part",
      "bip-fast-a"], "input resistance"),
]


def _with(args: list[str], option: str, value: str) -> list[str]:
    out = list(args)
    if option in out:
        out[out.index(option) + 1] = value
        return out
    return [*out, option, value]


@pytest.mark.parametrize("args,limit", CASES, ids=[f"{c[1]}-{i}" for i, c in enumerate(CASES)])
def test_infeasible_names_the_limit_and_its_hint_works(args: list[str], limit: str,
                                                       db: str) -> None:
    given = set(args) | ({"--vin", "--vout"} if {"--vin", "--vout"} & set(args) else set())
    stage = [x for k, v in zip(STAGE[::2], STAGE[1::2], strict=True) if k not in given
             for x in (k, v)]  # the case's own values win
    r = fails("net", *stage, *args, "--db", db)
    line = r.stderr.strip().splitlines()[0]
    assert limit in line
    m = re.search(r"the nearest that fits: (--[a-z-]+) (\S+)$", line)
    assert m, line
    # common practice, no source: the relaxation offered must be enough; rerun with it
    rerun = _with([*stage, *args], m.group(1), m.group(2))
    js = json.loads(run("net", *rerun, "--json", "--db", db).stdout)
    assert js["resistors"]


def test_rf_and_rg_are_kept_exactly(db: str) -> None:
    for topo, gain in (("non-inverting", 10.5), ("inverting", 9.5)):
        js = json.loads(run("net", "--topology", topo, "--gain", str(gain), *STAGE,
                            "--rf", "19k", "--rg", "2k", "--json", "--db", db).stdout)
        # neither value is in E24 (IEC 60063 via eseries: 19 and 2.0 vs 20 and 2.0) ...
        assert js["resistors"] == {"rf": 19e3, "rg": 2e3}
        assert js["given"] == ["rf", "rg"]
        # by hand: 1 + 19/2 = 10.5 and 19/2 = 9.5
        assert_allclose(js["gain"], gain, rtol=1e-12)
    inv = json.loads(run("net", "--topology", "inverting", "--gain", "9.5", *STAGE,
                         "--rin", "2k", "--rf", "19k", "--json", "--db", db).stdout)
    assert inv["resistors"] == {"rf": 19e3, "rg": 2e3}
    # by hand: 0.5 V peak into 2 kΩ at a virtual ground: 0.25 mA through both legs,
    # i²R = 1.1875 mW in rf and 125 µW in rg; the source sees rg
    assert_allclose(inv["power_w"]["rf"], (0.5 / 2e3) ** 2 * 19e3, rtol=1e-12)
    assert_allclose(inv["power_w"]["rg"], (0.5 / 2e3) ** 2 * 2e3, rtol=1e-12)
    assert_allclose(inv["input_ohm"], 2e3, rtol=0)
    fails("net", "--topology", "non-inverting", "--gain", "10", *STAGE, "--rin", "2k",
          "--db", db)
    fails("net", "--topology", "inverting", "--gain", "10", *STAGE, "--rin", "2k", "--rg", "2k",
          "--db", db)


def test_rf_alone_is_exact_and_the_leg_is_designed(db: str) -> None:
    js = json.loads(run("net", "--topology", "non-inverting", "--gain", "10", *STAGE,
                        "--rf", "19k", "--json", "--db", db).stdout)
    assert js["resistors"]["rf"] == 19e3 and js["given"] == ["rf"]


def test_check_analyses_a_network_given_in_full(db: str) -> None:
    out = run("net", "--check", "--topology", "inverting", "--gain", "10", *STAGE,
              "--rf", "100k", "--rg", "10k", "--db", db).stdout
    assert "network as built" in out and "input impedance 10 kΩ" in out
    assert "worst case" in out and "Monte Carlo" in out and "power at the peak" in out
    r = fails("net", "--check", "--topology", "inverting", "--gain", "10", *STAGE, "--rf", "100k",
              "--db", db)
    assert "--rg" in r.stderr
