"""`picker netlist`: the stage as a SPICE deck, run as written by ngspice (the outside
reference), reproduces picker's own figures: the DC gain (ngspice ``.tf``), the -3 dB
frequency (ngspice ``.ac``) and the clipped peaks (ngspice ``.tran``) within 1e-3 relative.

The deck's macromodel is linear with an output reach per rail; it leaves out the slew
rate and the output current limit, so every case is one where picker's waveform says the
only active limit is ``clip`` (checked first).
"""

from __future__ import annotations

import math
import re
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from numpy.testing import assert_allclose

from picker import api
from picker.store import Store
from tests.cli.clirun import fails, run
from tests.design.spice_raw import run_deck

# (requirement, two parts) per topology; amplitudes chosen to drive the output into its
# reach on both rails (ideal peak within the rails, beyond the part's headroom)
CASES: list[tuple[dict[str, Any], tuple[str, str]]] = [
    (dict(topology="inverting", gain=10, vin="1.15V", freq="1kHz", rails="±12", load="2k"),
     ("bip-gp-a", "jfet-gp-a")),
    (dict(topology="non-inverting", gain=5, vin="0.48V", freq="1kHz", rails="+5/0",
          load="1k"), ("cmos-rr-5v-a", "cmos-rr-5v-b")),
    (dict(topology="follower", vin="2.45V", freq="1kHz", rails="+5/0", load="1k",
          source="1k"), ("cmos-rr-5v-a", "cmos-rr-5v-b")),
    (dict(topology="difference", gain=2, vin="5.9V", freq="1kHz", rails="±12", load="2k",
          source="100"), ("bip-gp-a", "jfet-gp-a")),
]
PARAMS = [(kw, p) for kw, parts in CASES for p in parts]


@pytest.fixture(scope="module")
def store(tmp_path_factory: pytest.TempPathFactory):  # type: ignore[no-untyped-def]
    path = tmp_path_factory.mktemp("deck") / "demo.db"
    run("init", "--demo", "--db", str(path))
    s = Store.open(str(path))
    yield s
    s.dispose()


def _f3db(f: np.ndarray, g: np.ndarray) -> float:
    """The first frequency where |g| falls 10·log10(2) dB below its first (near-DC)
    point, interpolated linearly in log frequency between the bracketing points."""
    db = 20 * np.log10(np.abs(g))
    thr = db[0] - 10 * math.log10(2)
    i = int(np.argmax(db < thr))
    assert i > 0, "the sweep never falls 3 dB"
    return float(10 ** np.interp(thr, [db[i], db[i - 1]], np.log10([f[i], f[i - 1]])))


@pytest.mark.parametrize(("kw", "part"), PARAMS,
                         ids=[f"{kw['topology']}-{p}" for kw, p in PARAMS])
def test_ngspice_runs_the_deck_and_reproduces_picker(kw: dict[str, Any], part: str,
                                                     store: Any, tmp_path: Path) -> None:
    req = api.requirement(**kw)
    wave = api.waveform(req, store, part).summary(0)
    assert wave["limits"] == ["clip"], wave  # precondition: the deck models this limit
    # the deck's macromodel is the dominant-pole one (its header says so): compare with
    # picker's response of that model, the second pole's phase margin field left out
    from picker.design.response import COLUMNS, response

    frame = api.part_frame(store, part, COLUMNS).assign(pm_unity_deg=np.nan)
    resp = response(api.built(req), frame)
    plots = run_deck(api.netlist(req, store, part), tmp_path, "stage")

    # DC gain: ngspice .tf (signed: inverting stages invert; the others do not)
    tf = float(plots["Transfer Function"]["v(transfer_function)"][0])
    assert_allclose(abs(tf), 10 ** (resp.dc_gain_db[0] / 20), rtol=1e-3)
    assert (tf < 0) == (kw["topology"] == "inverting")
    # -3 dB frequency: ngspice .ac (200 points per decade)
    ac = plots["AC Analysis"]
    assert_allclose(_f3db(ac["frequency"].real, ac["v(out)"]), resp.f3db[0], rtol=1e-3)
    # clipped peaks: ngspice .tran over the deck's shown (settled) periods
    tr = plots["Transient Analysis"]
    assert_allclose(tr["v(out)"].max(), wave["peak_pos"], rtol=1e-3)
    assert_allclose(tr["v(out)"].min(), wave["peak_neg"], rtol=1e-3)
    # and they are clipped: below the ideal peak by more than the tolerance
    ideal = req.ref + req.vout
    assert tr["v(out)"].max() < ideal * (1 - 1e-2)


def test_cli_writes_the_api_deck_with_only_its_own_model(store: Any, tmp_path: Path) -> None:
    kw, (part, _) = CASES[0]
    stage = ["--topology", "inverting", "--gain", "10", "--vin", "1.15V", "--freq", "1kHz",
             "--rails", "±12", "--load", "2k"]
    db = store.url
    text = run("netlist", part, *stage, "--db", db).stdout
    assert text == api.netlist(api.requirement(**kw), store, part)
    out = tmp_path / "stage.cir"
    run("netlist", part, *stage, "--db", db, "--out", str(out))
    assert out.read_text() == text
    # plain ASCII, no vendor library or model: one subcircuit of our own, generic names
    assert text.isascii()
    assert not re.search(r"^\.(include|lib|model)\b", text, re.M | re.I)
    assert re.findall(r"^\.subckt (\S+)", text, re.M) == ["opamp_model"]
    for word in (".op", ".tf ", ".ac ", ".tran ", "Bout ", "Rin ", "Rpole "):
        assert word in text


def test_unknown_value_is_refused_unless_assumed(store: Any, tmp_path: Path) -> None:
    stage = ["--topology", "inverting", "--gain", "10", "--vin", "0.5V", "--freq", "1kHz",
             "--rails", "±12", "--load", "2k"]
    r = fails("netlist", "bip-ss-b", *stage, "--db", store.url)  # Ro not recorded
    assert "rout_ohm" in r.stderr and "--assume" in r.stderr
    r = fails("netlist", "bip-ss-b", *stage, "--assume", "rout_ohm=100", "--db", store.url)
    assert "out_rsat_pos_ohm" in r.stderr  # the next blank is named in its turn
    text = run("netlist", "bip-ss-b", *stage, "--assume", "rout_ohm=100",
               "--light-load-swing", "--db", store.url).stdout
    assert "* assumed: rout_ohm = 100.0 (--assume)" in text
    assert "out_rsat_pos_ohm = 0: the light-load reach" in text


def test_out_never_replaces_the_stockroom(store: Any) -> None:
    db = store.url.split("///", 1)[1]
    before = Path(db).read_bytes()
    r = fails("netlist", "bip-gp-a", "--topology", "follower", "--vin", "1V", "--freq", "1kHz",
              "--rails", "±12", "--db", db, "--out", db)
    assert "stockroom itself" in r.stderr
    assert Path(db).read_bytes() == before
