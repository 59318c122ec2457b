"""Output noise and DC offset against CODATA, hand calculations and ngspice."""

from __future__ import annotations

import itertools
import math
from pathlib import Path

import numpy as np
import pandas as pd
from numpy.testing import assert_allclose

from picker.checks import run_checks
from picker.checks.accuracy import BOLTZMANN
from picker.design.requirement import Requirement
from picker.design.spec import minimum_specs
from tests.design.reference import Circuit, OpAmp, ngspice_dc, ngspice_noise, stage_circuit


def part(**values: float) -> pd.DataFrame:
    return pd.DataFrame([values], index=["under test"])


def check(req: Requirement, frame: pd.DataFrame, name: str):  # type: ignore[no-untyped-def]
    return run_checks(frame, minimum_specs(req)).results[name]


def test_boltzmann_constant_is_codata() -> None:
    from sympy.physics.units import boltzmann_constant, convert_to, joule, kelvin

    # CODATA 2018 / SI 2019: k = 1.380649e-23 J/K exactly (through sympy's unit system)
    codata = float(convert_to(boltzmann_constant, joule / kelvin) / (joule / kelvin))
    assert_allclose(BOLTZMANN, codata, rtol=0)


def test_follower_voltage_noise_by_hand() -> None:
    """Follower from 0 Ω, en 10 nV/√Hz, GBW 1 MHz: 10 nV × √(π/2 × 1 MHz) = 12.53 µV."""
    req = Requirement("follower", 1.0, 5.0, -5.0, 1e3, vin_pk=0.1, noise_max_v=1.0, margin=1.0)
    r = check(req, part(en_v_per_rthz=10e-9, in_a_per_rthz=0.0, gbw_hz=1e6, aol_v_per_v=1e9), "noise")
    # by hand: noise bandwidth π/2·f3dB of a single pole, f3dB = GBW/NG (+ GBW/A0, 1 mHz here)
    hand = 10e-9 * math.sqrt(math.pi / 2 * (1e6 + 1e-3))
    assert_allclose(r.has[0], hand, rtol=1e-12)
    assert_allclose(r.has[0], 12.533e-6, rtol=1e-4)


def test_resistor_noise_by_hand() -> None:
    """Inverting x1 with 10 kΩ + 10 kΩ at 25 °C: 4kT·20 kΩ over π/2 × GBW/2."""
    req = Requirement("inverting", 1.0, 5.0, -5.0, 1e3, vin_pk=0.1, noise_max_v=1.0, margin=1.0)
    r = check(req, part(en_v_per_rthz=0.0, in_a_per_rthz=0.0, gbw_hz=1e6, aol_v_per_v=1e12), "noise")
    k, t = 1.380649e-23, 298.15  # CODATA k (exact); 25 °C
    density = math.sqrt(4 * k * t * 20e3)  # rf: gain 1; rg: gain rf/rg = 1 (by hand: 18.2 nV/√Hz)
    assert_allclose(density, 18.15e-9, rtol=1e-3)
    assert_allclose(r.has[0], density * math.sqrt(math.pi / 2 * 0.5e6), rtol=1e-9)


def test_noise_matches_ngspice(tmp_path: Path) -> None:
    """ngspice .noise, integrated 1 Hz .. 100 GHz, of the same macromodel and resistors.

    en is modelled in ngspice as a resistor in series with the non-inverting input
    (its 4kTR is en²); Rin and Ro are left out (picker counts no noise from them).
    """
    temp = 25.0
    cases = [
        ("inverting", {"rf": 100e3, "rg": 10e3}, 600.0, 0.0, OpAmp(1e6, 1e6, None, None)),
        ("non-inverting", {"rf": 47e3, "rg": 4.7e3}, 10e3, 3.3e3, OpAmp(2e5, 3e6, None, None)),
        ("follower", {}, 47e3, 1e3, OpAmp(1e5, 1e6, None, None)),
        ("difference", {"r1": 10e3, "r2": 20e3, "r3": 10e3, "r4": 20e3}, 0.0, 0.0,
         OpAmp(1e6, 4e6, None, None)),
    ]
    for i, (topo, net, rs, r_en, amp) in enumerate(cases):
        gain = {"inverting": 10.0, "non-inverting": 11.0, "follower": 1.0, "difference": 2.0}[topo]
        req = Requirement(topo, gain, 15.0, -15.0, 1e3, vin_pk=0.1,  # type: ignore[arg-type]
                          source_ohm=rs, network=net or None, noise_max_v=1.0, margin=1.0,
                          temp_min_c=temp, temp_max_c=temp)
        en = math.sqrt(4 * BOLTZMANN * (temp + 273.15) * r_en)
        r = check(req, part(en_v_per_rthz=en, in_a_per_rthz=0.0, gbw_hz=amp.gbw,
                            aol_v_per_v=amp.a0), "noise")
        c = stage_circuit(topo, topo, net, rs, None, amp)
        if r_en:  # the en resistor between the network's p node and the op-amp's input
            els = [el if el[0] != "OPA" else ("OPA", "pi", el[2], el[3], el[4])
                   for el in c.elements]
            els.append(("R", "p", "pi", r_en))
            c = Circuit(c.name, tuple(els))
        sub = tmp_path / str(i)
        sub.mkdir()
        ref = ngspice_noise(c, sub, temp)
        # ngspice .noise onoise_total (numerical integration; agreement seen: 6e-5)
        assert_allclose(r.has[0], ref, rtol=1e-3, err_msg=topo)


def test_offset_worst_case_matches_ngspice(tmp_path: Path) -> None:
    """Vos, Ib and Ios through the real resistances: the worst of every sign in ngspice .op."""
    vos, ib, ios = 1e-3, 100e-9, 10e-9
    cases = [
        ("non-inverting", {"rf": 9e3, "rg": 1e3}, 10e3, 10.0),
        ("inverting", {"rf": 100e3, "rg": 10e3, "rp": 9.1e3}, 0.0, 10.0),
        ("follower", {}, 100e3, 1.0),
        ("difference", {"r1": 10e3, "r2": 47e3, "r3": 10e3, "r4": 47e3}, 1e3, 4.7),
    ]
    amp = OpAmp(1e9, 1e9, None, None)
    for i, (topo, net, rs, gain) in enumerate(cases):
        req = Requirement(topo, gain, 15.0, -15.0, 1e3, vin_pk=0.1,  # type: ignore[arg-type]
                          source_ohm=rs, network=net or None, offset_max_v=1.0, margin=1.0)
        r = check(req, part(vos_v=vos, ib_a=ib, ios_a=ios, drift_v_per_c=0.0), "offset")
        c = stage_circuit(topo, topo, net, rs, None, amp)
        # signal sources at 0 V; Vos in series with the non-inverting input; bias currents
        # drawn out of both inputs (Ib ± Ios/2), every combination of signs
        els = [(el[0], el[1], el[2], 0.0) if el[0] == "V" else el for el in c.elements]
        els = [el if el[0] != "OPA" else ("OPA", "pi", el[2], el[3], el[4]) for el in els]
        sims = []
        for s_v, s_b, s_o in itertools.product((1, -1), repeat=3):
            extra = [f"VOS{{k}} c{{k}}_pi c{{k}}_p DC {s_v * vos!r}",
                     f"IBP{{k}} c{{k}}_pi 0 DC {s_b * ib + s_o * ios / 2!r}",
                     f"IBN{{k}} c{{k}}_n 0 DC {s_b * ib - s_o * ios / 2!r}"]
            sims.append((Circuit(f"{topo}{s_v}{s_b}{s_o}", tuple(els)), extra))
        sub = tmp_path / str(i)
        sub.mkdir()
        worst = max(abs(v) for v, _ in ngspice_dc(sims, sub))
        # ngspice .op, A0 = 1e9: the worst case over signs equals the formula to 1e-6
        assert_allclose(r.has[0], worst, rtol=1e-6, err_msg=topo)


def test_offset_drift_over_temperature_by_hand() -> None:
    """-40..85 °C: drift applies over 65 °C from 25 °C; x NG = 11."""
    req = Requirement("non-inverting", 11.0, 15.0, -15.0, 1e3, vin_pk=0.1, offset_max_v=1.0,
                      margin=1.0, temp_min_c=-40.0, temp_max_c=85.0)
    r = check(req, part(vos_v=0.5e-3, drift_v_per_c=5e-6, ib_a=0.0, ios_a=0.0), "offset")
    # by hand: (0.5 mV + 5 µV/°C × 65 °C) × 11 = 9.075 mV
    assert_allclose(r.has[0], 9.075e-3, rtol=1e-12)


def test_unknown_parameters_never_pass_silently() -> None:
    req = Requirement("non-inverting", 10.0, 15.0, -15.0, 1e3, vin_pk=0.1, source_ohm=1e4,
                      offset_max_v=10e-3, noise_max_v=1e-3)
    frame = pd.DataFrame(
        [{"vos_v": 0.1e-3, "ib_a": np.nan, "ios_a": 1e-9, "drift_v_per_c": 0.0,
          "en_v_per_rthz": np.nan, "in_a_per_rthz": 1e-12, "gbw_hz": 1e6, "aol_v_per_v": 1e5},
         {"vos_v": 5e-3, "ib_a": np.nan, "ios_a": 1e-9, "drift_v_per_c": 0.0,
          "en_v_per_rthz": 1e-9, "in_a_per_rthz": np.nan, "gbw_hz": np.nan, "aol_v_per_v": 1e5}],
        index=["small Vos, Ib unknown", "large Vos, Ib unknown"])
    t = run_checks(frame, minimum_specs(req))
    # unknown Ib: unknown unless the known terms already exceed the limit (50 mV > 8 mV)
    assert t.results["offset"].statuses() == ["unknown", "fail"]
    assert t.results["noise"].statuses() == ["unknown", "unknown"]
