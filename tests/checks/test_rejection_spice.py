"""The difference stage's worst-case CMRR against ngspice ``.op``.

One deck per case holds the four-resistor stage at each of the 16 tolerance corners,
twice (driven ±0.5 V differentially, and 1 V common mode), and for a part with a
finite CMRR once per sign of its error. The op-amp is a VCVS of gain 1e9 whose
non-inverting input is offset by a behavioural source ±x·(v(p) + v(n))/2, x =
10^(-CMRR_op/20): the part's input-referred common-mode error. ngspice's CMRR is the
smallest |Ad|/|Acm| over the instances; picker's is the ``has`` of its check.
"""

from __future__ import annotations

import itertools
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from picker.checks import run_checks
from picker.design.requirement import requirement_from
from picker.design.spec import minimum_specs
from tests.design.macromodel_spice import _n, _ngspice
from tests.design.test_boundaries import comfortable


def _deck(res: dict[str, float], rs: float, t: float, x: float) -> tuple[str, int]:
    lines = ["* picker CMRR reference: four-resistor difference stage at its corners"]
    k = 0
    for signs in itertools.product((-1, 1), repeat=4):
        r = {n: res[n] * (1 + s * t) for n, s in zip(("r1", "r2", "r3", "r4"), signs,
                                                       strict=True)}
        for sign in ((1, -1) if x else (1,)):
            for mode, (v1, v2) in (("d", (0.5, -0.5)), ("c", (1.0, 1.0))):
                m = f"{mode}{k}"
                lines += [
                    f"V1{m} s1{m} 0 DC {v1}", f"V2{m} s2{m} 0 DC {v2}",
                    f"Rsa{m} s1{m} a{m} {_n(rs)}" if rs > 0 else f"Vsa{m} s1{m} a{m} DC 0",
                    f"Rsb{m} s2{m} b{m} {_n(rs)}" if rs > 0 else f"Vsb{m} s2{m} b{m} DC 0",
                    f"R3{m} a{m} p{m} {_n(r['r3'])}", f"R4{m} p{m} 0 {_n(r['r4'])}",
                    f"R1{m} b{m} n{m} {_n(r['r1'])}", f"R2{m} o{m} n{m} {_n(r['r2'])}",
                    f"Bcm{m} pi{m} p{m} V = {_n(sign * x)}*(v(p{m})+v(n{m}))/2",
                    f"E{m} o{m} 0 pi{m} n{m} 1e9",
                ]
            k += 1
    outs = " ".join(f"v(o{mode}{i})" for i in range(k) for mode in "dc")
    lines += [".options reltol=1e-9 abstol=1e-15 vntol=1e-12", ".control", "op",
              f"wrdata @OUT0@ {outs}", ".endc", ".end"]
    return "\n".join(lines) + "\n", k


CASES = [  # gain, tolerance, source, part CMRR (dB or None)
    (1, "1%", "0", None), (10, "1%", "0", None), (10, "1%", "0", 60.0),
    (10, "0.1%", "100", 80.0), (100, "0.1%", "0", 100.0), (3.3, "5%", "1k", 40.0),
    (10, "0.01%", "0", 90.0), (2, "0%", "0", 70.0),
]


@pytest.mark.parametrize("gain,tol,source,part_db", CASES)
def test_stage_cmrr_matches_ngspice(gain: float, tol: str, source: str, part_db: float | None,
                                    tmp_path: Path) -> None:
    s = minimum_specs(requirement_from({
        "topology": "difference", "gain": str(gain), "vin": "50mV", "freq": "1kHz",
        "rails": "±15", "gain-error": "25%", "tolerance": tol, "source": source}))
    part = {**comfortable(s), "cmrr_db": math.nan if part_db is None else part_db}
    has = float(run_checks(pd.DataFrame([part], index=["p"]), s)
                .results["common_mode_rejection"].has[0])
    x = 0.0 if part_db is None else 10 ** (-part_db / 20)
    text, k = _deck(s.stage.resistors, s.requirement.source_ohm, s.requirement.tolerance, x)
    (data,) = _ngspice(text, tmp_path, "cmrr")
    values = np.asarray(data).ravel()[1::2]  # wrdata: (scale, value) for each vector
    assert values.size == 2 * k
    values = values.reshape(k, 2)
    ad, acm = np.abs(values[:, 0]), np.abs(values[:, 1])
    spice_db = float(np.min(20 * np.log10(ad / np.maximum(acm, 1e-300))))
    # source: ngspice .op. The issue asks 0.5 dB; the models differ only in the part's
    # common mode (vp for picker, (vp + vn)/2 here, vn = vp·(1 + x)): second order in
    # x, 0.035 dB at a 40 dB part, below 0.005 dB from 60 dB up
    assert abs(has - spice_db) < (0.05 if x > 3e-3 else 0.005), (has, spice_db)
