"""The checks at catalogue scale: same verdicts as a per-row loop, only the needed
columns read, the expanded loop coefficients against sympy.

scripts/bench times the vectorised checks against scripts/bench_loop.py, a per-row
formulation written from the formulas in the docstrings of picker.checks.limits and
.accuracy (math and complex scalars, one part at a time). The first test proves the
two reach the same verdicts, so the benchmark compares like with like.
"""

from __future__ import annotations

import importlib.util
import math
from pathlib import Path
from types import ModuleType
from typing import Any

import numpy as np
import pytest
import sympy as sp
from numpy.testing import assert_allclose, assert_array_equal

from picker.checks import Parts, needed_columns, run_checks
from picker.checks.core import result, worse
from picker.circuit.opamp import loop
from picker.design.requirement import requirement_from
from picker.design.spec import minimum_specs
from picker.stages import Stage

SCRIPTS = Path(__file__).resolve().parents[2] / "scripts"


def _script(name: str) -> ModuleType:
    spec = importlib.util.spec_from_file_location(f"bench_{name}", SCRIPTS / f"{name}.py")
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


# stages as data: every topology, with and without offset/noise limits, source, load
STAGES: list[dict[str, Any]] = [
    {"tolerance": "0.1%", "topology": "non-inverting", "gain": "10", "vin": "0.5Vpk", "freq": "20kHz",
     "rails": "±12", "load": "2k", "offset-max": "50mV", "noise-max": "1mV"},
    {"tolerance": "0", "topology": "inverting", "gain": "5", "vin": "0.3Vpk", "freq": "100kHz", "rails": "+5/0",
     "load": "10k", "source": "100", "offset-max": "20mV", "noise-max": "300uV", "qty": "2",
     "ripple": "200mVpp@100Hz"},
    {"tolerance": "0", "topology": "difference", "gain": "2", "vin": "1V", "freq": "1kHz", "rails": "±15",
     "offset-max": "5mV", "temp": "-40..85C", "margin": "1"},
    {"tolerance": "0.1%", "topology": "difference", "gain": "10", "vin": "0.2V", "freq": "5kHz",
     "rails": "±15", "vcm": "-2..7V", "cmrr": "66dB", "offset-max": "100mV"},
    {"tolerance": "0", "topology": "follower", "vin": "1V", "freq": "100kHz", "rails": "±5",
     "noise-max": "100uV", "gain-error": "0.1%"},
    {"tolerance": "0", "topology": "non-inverting", "gain": "100", "vin": "50mV", "freq": "50kHz",
     "rails": "±18", "load": "100"},
]
N_PARTS = 400


@pytest.fixture(scope="module")
def frame() -> Any:
    return _script("bench_data").synthetic_frame(N_PARTS, seed=11)


@pytest.mark.parametrize("options", STAGES, ids=lambda o: o["topology"])
def test_vectorised_checks_match_the_per_row_loop(frame: Any, options: dict[str, Any]) -> None:
    loop_checks = _script("bench_loop")
    spec = minimum_specs(requirement_from(options))
    parts = Parts(frame)
    table = run_checks(parts, spec)
    lists = {c: parts[c].tolist() for c in needed_columns(spec)}
    margins = loop_checks.check_rows(lists, spec)
    verdicts = loop_checks.verdicts(margins)
    assert list(margins) == list(table.results)
    for name, r in table.results.items():
        assert r.statuses() == verdicts[name], name
        # the same formulas in a different order of operations: equal to rounding
        assert_allclose(np.array(margins[name]), r.margin, rtol=1e-6, err_msg=name)


def test_the_loop_comparison_is_not_vacuous(frame: Any) -> None:
    seen: dict[str, set[str]] = {}
    for options in STAGES:
        table = run_checks(Parts(frame), minimum_specs(requirement_from(options)))
        for name, r in table.results.items():
            seen.setdefault(name, set()).update(r.statuses())
    assert all({"pass", "fail"} <= s for s in seen.values()), seen
    assert all("unknown" in seen[n] for n in ("gain_accuracy", "offset", "noise", "slew"))


@pytest.mark.parametrize("options", STAGES, ids=lambda o: o["topology"])
def test_needed_columns_are_all_the_checks_read(frame: Any, options: dict[str, Any]) -> None:
    spec = minimum_specs(requirement_from(options))
    cols = needed_columns(spec)
    full = run_checks(Parts(frame), spec)
    # 'available' is derived (qty - reserved) when the frame does not hold it, and
    # 'ib_tech_double_c' from the tech text (the store derives both in SQL)
    keep = [c for c in cols if c in frame.columns]
    keep += ["tech"] if "ib_tech_double_c" in cols else []
    lean = run_checks(Parts(frame[keep]), spec)
    assert len(cols) < len(frame.columns)
    for name, r in full.results.items():
        assert_array_equal(lean.results[name].margin, r.margin)
        assert_array_equal(lean.results[name].code, r.code)


STAGE_VALUES = [  # kp, zp, kg, rg, rf, load: the four reduced stages, open legs included
    (0.0, 50.0, 1.0, 1050.0, 1e4, 2e3),
    (1.0, 100.0, 0.0, 1111.0, 1e4, math.inf),
    (1.0, 0.0, 0.0, math.inf, 0.0, 600.0),
    (0.45, 900.0, -0.5, 1100.0, 1e4, 1e3),
]


@pytest.mark.parametrize("values", STAGE_VALUES)
def test_expanded_loop_coefficients_match_sympy_nodal_analysis(values: tuple[float, ...]) -> None:
    kp, zp, kg, rg, rf, load = values
    st = Stage("inverting", {}, kp, zp, kg, rg, rf, load, 1.0, True)
    rin = [2e6, 1e12, math.inf, math.nan]
    ro = [75.0, 0.0, 300.0, math.nan]
    lp = loop(st, rin, ro)
    for i in range(len(rin)):
        # sympy: the nodal equations of the reduced circuit (kp, zp, kg, rg, rf, load),
        # solved for vo as a function of the open-loop gain A
        vp, vn, vo, a = sp.symbols("vp vn vo A")
        q = sp.Rational  # exact arithmetic on the given binary values
        gin = 0 if not math.isfinite(rin[i]) else 1 / q(rin[i])
        r_o = 0 if math.isnan(ro[i]) else q(ro[i])
        gg = 0 if math.isinf(rg) else 1 / q(rg)
        gl = 0 if math.isinf(load) else 1 / q(load)
        k_p, z_p, k_g, r_f = q(kp), q(zp), q(kg), q(rf)
        eqs = [(vp - k_p) + z_p * gin * (vp - vn),
               r_f * gg * (vn - k_g) + r_f * gin * (vn - vp) + (vn - vo),
               (vo - a * (vp - vn)) + r_o * (gl * vo + gg * (vn - k_g) + gin * (vn - vp))]
        num, den = sp.fraction(sp.together(sp.solve(eqs, [vp, vn, vo])[vo]))
        num, den = sp.Poly(sp.expand(num), a), sp.Poly(sp.expand(den), a)
        d1 = float(den.coeff_monomial(a))
        want = [float(num.coeff_monomial(1)) / d1, float(num.coeff_monomial(a)) / d1,
                float(den.coeff_monomial(1)) / d1]
        got = [lp.n0[i] / lp.d1[i], lp.n1[i] / lp.d1[i], lp.d0[i] / lp.d1[i]]
        assert_allclose(got, want, rtol=1e-12, atol=1e-15)


def test_json_records_built_by_column_equal_the_per_part_records(frame: Any) -> None:
    table = run_checks(Parts(frame), minimum_specs(requirement_from(STAGES[0])))
    rows = [0, 5, 17, 399, 5]
    assert table.records_for(rows) == [table.records(i) for i in rows]


def _rule(ma: float, mb: float) -> str:
    """The worse side by the rule of picker.checks.core.worse, one part at a time:
    fail < unknown < pass, then the smaller margin, a on a tie."""
    def rank(m: float) -> int:
        return 1 if math.isnan(m) else (2 if m >= 1 else 0)
    ra, rb = rank(ma), rank(mb)
    return "b" if rb < ra or (rb == ra and mb < ma) else "a"


@pytest.mark.parametrize("same_need", [True, False])
def test_worse_follows_the_rule_part_by_part(same_need: bool) -> None:
    rng = np.random.default_rng(5)
    values = np.array([0.5, 1.0, 2.0, 3.0, math.nan, 0.0, math.inf])
    ha = rng.choice(values, 500)
    hb = rng.choice(values, 500)
    a = result("supply", "voltage", ">=", 1.0, ha, note="rated maximum")
    b = (result("supply", "voltage", ">=", 1.0, hb, note="rated minimum") if same_need
         else result("supply", "voltage", "<=", 2.0, hb, note="rated minimum"))
    w = worse(a, b)
    for i in range(500):
        side = a if _rule(a.margin[i], b.margin[i]) == "a" else b
        assert_array_equal([w.margin[i], w.has[i], w.need[i]],
                           [side.margin[i], side.has[i], side.need[i]])
        assert (w.sense[i], w.note[i], w.status(i)) == (side.sense[i], side.note[i],
                                                        side.status(i))
