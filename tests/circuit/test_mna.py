"""The solver (picker.circuit) against sympy nodal analysis and the expanded closed form.

sympy: tests/design/reference.py writes the modified nodal equations of a circuit
independently of picker and solves them in exact arithmetic. The expanded closed form
is the reduced stage's gain (non-inverting input kp behind zp, inverting input kg behind
rg, rf to the output, load) solved by hand from its three node equations (Cramer's rule,
checked against sympy in tests/design/test_scale.py), here written out over thousands of
random stages and parts to show the solver keeps its accuracy over the whole range.
"""

from __future__ import annotations

import math

import numpy as np
import sympy as sp
from numpy.testing import assert_allclose

from picker.circuit import Capacitor, Netlist, OpAmp, Resistor, Source, coefficients, loop, solve
from picker.stages import Stage
from tests.design.reference import Circuit, sympy_gain, to_complex
from tests.design.reference import OpAmp as RefOpAmp

# a small circuit with every kind of element: a source through an RC divider into the
# non-inverting input, a capacitive feedback network, a load, the op-amp macromodel
AMP = RefOpAmp(1e5, 2e6, 500e3, 120.0, cin=8e-12)
REF = Circuit("small", (("V", "s", "0", 1.0), ("R", "s", "p", 2.2e3), ("C", "p", "0", 1e-9),
                        ("R", "n", "0", 1e3), ("R", "n", "o", 9.1e3), ("C", "n", "o", 47e-12),
                        ("R", "o", "0", 1.5e3), ("OPA", "p", "n", "o", AMP)))
NET = Netlist((Source("s", "0", 1.0), Resistor("s", "p", 2.2e3), Capacitor("p", "0", 1e-9),
               Resistor("n", "0", 1e3), Resistor("n", "o", 9.1e3), Capacitor("n", "o", 47e-12),
               Resistor("o", "0", 1.5e3), OpAmp("p", "n", "o")))


def test_solver_matches_sympy_nodal_analysis() -> None:
    for f in (None, 150e3):
        s = 0j if f is None else 2j * math.pi * f
        a = AMP.a0 / (1 + s * AMP.a0 / (2 * math.pi * AMP.gbw))
        yin = 1 / AMP.rin + s * (AMP.cin or 0.0)
        got = solve(NET, s, a=a, yin=yin, ro=AMP.ro or 0.0)
        # sympy: modified nodal analysis in exact arithmetic (tests/design/reference.py)
        assert_allclose(got, to_complex(sympy_gain(REF, f)), rtol=1e-12)


def test_multilinear_coefficients_match_sympy() -> None:
    """N and D as polynomials in symbolic A, Yin, Ro and the common-mode admittances
    Ycp, Ycn (each input to ground) equal sympy's, up to one factor."""
    a, y, r, cp, cn = sp.symbols("A Y R Cp Cn")
    sym = {"a": a, "yin": y, "ro": r, "ycp": cp, "ycn": cn}
    f = 40e3
    s = 2j * math.pi * f
    c = coefficients(NET, s)
    got_num = sum(v * math.prod(sym[n] for n in k) for k, v in c.num.items())
    got_den = sum(v * math.prod(sym[n] for n in k) for k, v in c.den.items())
    # sympy: the same circuit with the op-amp written out, Yin, Ro, A, Ycp, Ycn as symbols
    q = lambda x: sp.Rational(repr(x))  # noqa: E731
    sv = sp.I * 2 * sp.pi * q(f)
    vs, vp, vn, vo, io = sp.symbols("vs vp vn vo io")
    eqs = [vs - 1,
           (vp - vs) / q(2.2e3) + sv * q(1e-9) * vp + y * (vp - vn) + cp * vp,
           vn / q(1e3) + (vn - vo) / q(9.1e3) + sv * q(47e-12) * (vn - vo) + y * (vn - vp)
           + cn * vn,
           (vo - vn) / q(9.1e3) + sv * q(47e-12) * (vo - vn) + vo / q(1.5e3) + io,
           vo - a * (vp - vn) - r * io]
    ref = sp.together(sp.solve(eqs, [vs, vp, vn, vo, io])[vo])
    num, den = sp.fraction(ref)
    gens = (a, y, r, cp, cn)
    num, den = sp.Poly(sp.expand(num), *gens), sp.Poly(sp.expand(den), *gens)
    ours_n, ours_d = sp.Poly(sp.expand(got_num), *gens), sp.Poly(sp.expand(got_den), *gens)
    k = complex(den.coeff_monomial(a)) / complex(ours_d.coeff_monomial(a))
    monos = [a**i * y**j * r**m * cp**u * cn**w for i in (0, 1) for j in (0, 1) for m in (0, 1)
             for u in (0, 1) for w in (0, 1)]
    for mono in monos:
        for p_ref, p_ours in ((num, ours_n), (den, ours_d)):
            want = complex(p_ref.coeff_monomial(mono))
            have = complex(p_ours.coeff_monomial(mono)) * k
            scale = max(abs(complex(x)) for x in p_ref.coeffs())
            # a term that cancels to zero in exact arithmetic leaves rounding at 1e-16 of
            # the largest coefficient (its stamps are independent, so it is not zeroed)
            assert abs(have - want) <= 1e-12 * max(abs(want), 1e-3 * scale), (mono, have, want)


def test_coefficient_polynomials_in_s_equal_the_solver_at_every_frequency() -> None:
    """polynomials(): the exact interpolation in s reproduces the solver's coefficients
    (ratios, so the per-frequency normalisation drops out) at frequencies far from the
    interpolation circle; sympy nodal analysis above checks the solver itself."""
    from picker.circuit.mna import polynomials

    poly = polynomials(NET)
    val = {"yin": 1 / AMP.rin, "ro": 120.0, "ycp": 3e-12, "ycn": 5e-12}
    for f in (10.0, 3e3, 150e3, 20e6, 2e9):
        s = 2j * math.pi * f
        val_s = {"yin": val["yin"] + s * 8e-12, "ro": val["ro"], "ycp": s * val["ycp"],
                 "ycn": s * val["ycn"], "a": AMP.a0 / (1 + s * AMP.a0 / (2 * math.pi * AMP.gbw))}
        num, den = poly.at(np.array([s]))
        got = (sum(v[0] * math.prod(val_s[n] for n in k) for k, v in num.items())
               / sum(v[0] * math.prod(val_s[n] for n in k) for k, v in den.items()))
        # ycp and ycn differ here, so the reference sums the solver's terms directly
        c = coefficients(NET, s)
        want = (sum(v * math.prod(val_s[n] for n in k) for k, v in c.num.items())
                / sum(v * math.prod(val_s[n] for n in k) for k, v in c.den.items()))
        assert_allclose(got, want, rtol=1e-9)


def expanded_loop(kp: float, zp: float, kg: float, rg: float, rf: float, load: float,
                  gin: np.ndarray, ro: np.ndarray) -> tuple[np.ndarray, ...]:
    """n0, n1, d0 (d1 = 1) of the reduced stage, expanded by hand from its node equations."""
    gg = 0.0 if math.isinf(rg) else 1 / rg
    gl = 0.0 if math.isinf(load) else 1 / load
    d0 = ((1 + rf * gg) + gin * (rf + zp + rf * zp * gg) + ro * (gg + gl + rf * gg * gl)
          + gin * ro * (1 + gg * zp + gl * (rf + zp) + rf * zp * gg * gl))
    n0 = ro * (gg * kg + gin * (kp + gg * kg * zp))
    n1 = kp * (1 + rf * gg) - kg * rf * gg + 0 * d0
    return n0, n1, d0


def test_solver_keeps_the_expanded_form_over_the_whole_range() -> None:
    rng = np.random.default_rng(7)
    n = 2000
    rin = 10 ** rng.uniform(3, 13, n)
    ro = np.where(rng.random(n) < 0.2, 0.0, 10 ** rng.uniform(-1, 3.5, n))
    for _ in range(40):
        kp, kg = rng.choice([0.0, 1.0, 0.45]), rng.choice([0.0, 1.0, -0.5])
        zp = float(rng.choice([0.0, 10 ** rng.uniform(1, 6)]))
        rg = float(rng.choice([math.inf, 10 ** rng.uniform(1, 7)]))
        rf = float(rng.choice([0.0, 10 ** rng.uniform(1, 7)])) if math.isinf(rg) else float(
            10 ** rng.uniform(1, 7))
        load = float(rng.choice([math.inf, 10 ** rng.uniform(1, 5)]))
        st = Stage("inverting", {}, kp, zp, kg, rg, rf, load, 1.0, True)
        lp = loop(st, rin, ro)
        n0, n1, d0 = expanded_loop(kp, zp, kg, rg, rf, load, 1 / rin, ro)
        # hand-expanded closed form (the reduced node equations; sympy in test_scale.py)
        assert_allclose(lp.d0 / lp.d1, d0, rtol=1e-12)
        assert_allclose(lp.n1 / lp.d1, n1, rtol=1e-12, atol=1e-15)
        assert_allclose(lp.n0 / lp.d1, n0, rtol=1e-12, atol=1e-15 * np.abs(n1).max())
