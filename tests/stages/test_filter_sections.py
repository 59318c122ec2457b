"""The filter stages' designs against outside references.

- scipy.signal's analog prototypes (butter, bessel with norm="mag", cheby1): the designed
  section's ideal transfer function (the stage's netlist solved with an ideal op-amp, fitted)
  has the prototype's poles within 1e-3 in f0 and Q, before E-series snapping;
- eseries (IEC 60063): every designed resistor is an E24 member, every capacitor an E12
  (or the asked series) member;
- sympy nodal analysis of each netlist (tests/design/reference.py, ideal op-amp as the
  limit A -> ∞) against the stage type's closed form (K, ωn, Q) used for tolerance analysis.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
import sympy as sp
from numpy.testing import assert_allclose
from scipy import signal

from picker import api
from picker.circuit.mna import Capacitor, OpAmp, Resistor, Source
from picker.circuit.nullor import transfer
from picker.design.filternet import design_filter
from picker.stages import kind, stage
from picker.stages.sections import fit, fit_grid

with warnings.catch_warnings():
    warnings.simplefilter("ignore", DeprecationWarning)  # eseries imports 'future'
    import eseries

SHAPES = [("butterworth", None), ("bessel", None), ("chebyshev", 0.5), ("chebyshev", 1.0),
          ("chebyshev", 3.0)]
LOWHIGH = ["vcvs-lowpass", "vcvs-highpass", "mfb-lowpass"]


def prototype(kind_: str, response: str, ripple: float | None, f0: float,
              bandwidth: float | None = None) -> tuple[float, float]:
    """(fn, Q) of the scipy.signal analog prototype's pole pair (scipy.signal, outside
    reference)."""
    wc = 2 * math.pi * f0
    if kind_ == "bandpass":
        assert bandwidth is not None
        bw = 2 * math.pi * bandwidth
        w_lo = (-bw + math.sqrt(bw * bw + 4 * wc * wc)) / 2  # √(lo·hi) = wc, hi - lo = bw
        z, p, k = signal.butter(1, [w_lo, w_lo + bw], btype="bandpass", analog=True,
                                output="zpk")
    else:
        btype = "low" if kind_ == "lowpass" else "high"
        if response == "butterworth":
            z, p, k = signal.butter(2, wc, btype=btype, analog=True, output="zpk")
        elif response == "bessel":
            z, p, k = signal.bessel(2, wc, btype=btype, analog=True, output="zpk", norm="mag")
        else:
            z, p, k = signal.cheby1(2, ripple, wc, btype=btype, analog=True, output="zpk")
    pole = p[np.argmax(p.imag)]
    wn = abs(pole)
    return wn / (2 * math.pi), wn / (-2 * pole.real)


def requirement(topology: str, response: str | None, ripple: float | None, f0: float,
                gain: float = 1.0, **more: object) -> object:
    opts: dict[str, object] = {"topology": topology, "f0": f0, "gain": gain, "vin": "0.5V",
                               "rails": "±12", **more}
    if response is not None:
        opts["response"] = response
    if ripple is not None:
        opts["passband_ripple"] = f"{ripple}dB"
    return api.requirement(**opts)


@pytest.mark.parametrize("topology", LOWHIGH)
@pytest.mark.parametrize("response,ripple", SHAPES)
@pytest.mark.parametrize("f0,gain", [(1e3, 1.0), (47.0, 2.2), (33e3, 1.5)])
def test_exact_design_has_the_prototype_poles(topology: str, response: str,
                                              ripple: float | None, f0: float,
                                              gain: float) -> None:
    req = requirement(topology, response, ripple, f0, gain)
    st = stage(req)  # no network given: the exact design (capacitors from E12)
    assert st.ideal_network
    fn, q = prototype(st.kind, response, ripple, f0)
    grid = fit_grid(fn)
    got = fit(st.kind, grid, transfer(st.circuit, grid))
    # scipy.signal analog prototype poles: f0 and Q within 1e-3
    assert_allclose(got.f0_hz, fn, rtol=1e-3)
    assert_allclose(got.q, q, rtol=1e-3)
    assert_allclose(abs(got.gain), gain, rtol=1e-3)


@pytest.mark.parametrize("f0,bandwidth,gain", [(1e3, 100.0, 2.0), (455.0, 91.0, 1.0),
                                               (20e3, 2e3, 10.0)])
def test_bandpass_design_has_the_prototype_poles(f0: float, bandwidth: float,
                                                 gain: float) -> None:
    st = stage(requirement("mfb-bandpass", None, None, f0, gain, bandwidth=bandwidth))
    fn, q = prototype("bandpass", "butterworth", None, f0, bandwidth)
    grid = fit_grid(fn)
    got = fit("bandpass", grid, transfer(st.circuit, grid))
    # scipy.signal.butter(1, band, 'bandpass') pole pair: f0 and Q within 1e-3
    assert_allclose(got.f0_hz, fn, rtol=1e-3)
    assert_allclose(got.q, q, rtol=1e-3)
    assert_allclose(got.gain, -gain, rtol=1e-3)


#: The error a snapped design is stated to stay within (README, "Second-order filters"):
#: E24 values are about 10% apart and f0 goes with the square root of a product of two.
SNAPPED_ERROR = 0.04


@pytest.mark.parametrize("topology", [*LOWHIGH, "mfb-bandpass"])
@pytest.mark.parametrize("f0", [47.0, 123.0, 1e3, 1.7e3, 3.3e3, 20e3])
def test_snapped_design_within_the_stated_error_and_in_series(topology: str, f0: float) -> None:
    bp = topology == "mfb-bandpass"
    req = requirement(topology, None if bp else "bessel", None, f0, 1.5,
                      **({"bandwidth": f0 / 4} if bp else {}))
    net = design_filter(req)
    fn, q = (prototype("bandpass", "", None, f0, f0 / 4) if topology == "mfb-bandpass" else
             prototype(kind(topology).kind, "bessel", None, f0))  # type: ignore[attr-defined]
    st = stage(req.with_changes(network=dict(net.network)))
    grid = fit_grid(fn)
    got = fit(st.kind, grid, transfer(st.circuit, grid))
    # scipy.signal prototype: the built (E-series) section within the stated error
    assert abs(got.f0_hz / fn - 1) <= SNAPPED_ERROR
    assert abs(got.q / q - 1) <= SNAPPED_ERROR
    assert abs(abs(got.gain) / 1.5 - 1) <= SNAPPED_ERROR
    # ... and the error picker reports is the netlist's own (1e-6)
    assert_allclose(net.achieved.f0_hz, got.f0_hz, rtol=1e-6)
    assert_allclose(net.achieved.q, got.q, rtol=1e-6)
    # eseries (IEC 60063): every resistor in E24, every capacitor in E12
    for name, v in net.network.items():
        if v == 0 or math.isinf(v):
            assert name in ("rf", "rg")  # the unity-gain wire and open leg
            continue
        series = eseries.E12 if name.startswith("c") else eseries.E24
        assert math.isclose(eseries.find_nearest(series, v), v, rel_tol=1e-9), (name, v)


def test_capacitors_follow_the_asked_series() -> None:
    req = requirement("vcvs-lowpass", "butterworth", None, 2.2e3, 1.0, cap_series="E6")
    net = design_filter(req)
    for name in ("c1", "c2"):
        # eseries (IEC 60063): E6 membership
        assert math.isclose(eseries.find_nearest(eseries.E6, net.network[name]),
                            net.network[name], rel_tol=1e-9)


def _sympy_section(elements: tuple[object, ...], out: str = "o") -> sp.Expr:
    """v(out)/v(in) of the netlist by sympy nodal analysis, ideal op-amp (v_p = v_n, no
    input current, any output current): sympy, outside reference. Wires (0 Ω) merge
    their nodes first."""
    s = sp.Symbol("s")
    alias: dict[str, str] = {}

    def root(n: str) -> str:
        while n in alias:
            n = alias[n]
        return n

    for e in elements:
        if isinstance(e, Resistor) and e.ohm == 0:
            a, b = root(e.a), root(e.b)
            if a != b:
                alias[b if a == "0" or b != "0" else a] = a if a == "0" or b != "0" else b
    nodes = sorted({root(n) for e in elements for n in _ends(e)} - {"0"})
    v = {n: sp.Symbol(f"v_{n}") for n in nodes}
    v["0"] = sp.Integer(0)
    eqs = []
    kcl: dict[str, sp.Expr] = {n: sp.Integer(0) for n in nodes}
    for e in elements:
        if isinstance(e, Source):
            eqs.append(sp.Eq(v[root(e.plus)] - v[root(e.minus)], sp.nsimplify(e.volt)))
            kcl.pop(root(e.plus), None)
        elif isinstance(e, OpAmp):
            eqs.append(sp.Eq(v[root(e.p)], v[root(e.n)]))
            kcl.pop(root(e.out), None)
        elif isinstance(e, Resistor | Capacitor):
            if isinstance(e, Resistor):
                if math.isinf(e.ohm) or e.ohm == 0:
                    continue
                y = 1 / sp.nsimplify(e.ohm)
            else:
                y = s * sp.nsimplify(e.farad)
            a, b = root(e.a), root(e.b)
            for x, z in ((a, b), (b, a)):
                if x in kcl:
                    kcl[x] += y * (v[x] - v[z])
    eqs += [sp.Eq(x, 0) for x in kcl.values() if x != 0]
    sol = sp.solve(eqs, [v[n] for n in nodes], dict=True)[0]
    return sp.simplify(sol[v[root(out)]])


def _ends(e: object) -> tuple[str, ...]:
    if isinstance(e, Source):
        return (e.plus, e.minus)
    if isinstance(e, OpAmp):
        return (e.p, e.n, e.out)
    return (e.a, e.b)  # type: ignore[attr-defined]


@pytest.mark.parametrize("topology,extra", [
    ("vcvs-lowpass", {"gain": 1.7}), ("vcvs-highpass", {"gain": 2.5}),
    ("mfb-lowpass", {"gain": 3.0}), ("mfb-bandpass", {"gain": 2.0, "bandwidth": 250.0})])
def test_closed_form_matches_sympy_nodal_analysis(topology: str, extra: dict[str, float]) -> None:
    rs = 0.0 if topology == "vcvs-highpass" else 330.0
    req = requirement(topology, None, None, 1e3, source=rs, **extra)
    st = stage(req)
    h = _sympy_section(st.circuit.elements)
    num, den = sp.fraction(sp.together(h))
    s = sp.Symbol("s")
    dp = sp.Poly(sp.expand(den), s)
    c = [complex(x) for x in dp.all_coeffs()]
    assert len(c) == 3  # second order (sympy)
    a2, a1, a0 = (x.real for x in c)
    k, wn, q = (float(np.asarray(x)) for x in kind(topology).biquad(rs, st.resistors))  # type: ignore[attr-defined]
    # sympy: ωn = √(a0/a2), Q = √(a0·a2)/a1, pass-band gain at DC / ∞ / ωn
    assert_allclose(wn, math.sqrt(a0 / a2), rtol=1e-9)
    assert_allclose(q, math.sqrt(a0 * a2) / a1, rtol=1e-9)
    point = {"lowpass": 0, "highpass": 1e12, "bandpass": 1j * wn}[st.kind]  # type: ignore[attr-defined]
    got = complex(h.subs(s, point)) if st.kind != "highpass" else complex(  # type: ignore[attr-defined]
        sp.limit(h, s, sp.oo))
    assert_allclose(got.real, k, rtol=1e-9)
