"""The op-amp macromodel in a stage: exact closed-loop gain per part, through the solver.

Macromodel (per part): open-loop gain ``A(s) = A0 / (1 + s·A0/(2π·GBW))`` (single
dominant pole at ``ωp = 2π·GBW/A0``; the stability check and the Bode response add the
second pole of ``second_pole``), the differential input admittance
``Yin = 1/Rin + s·Cin`` between the inputs, the common-mode input admittance
``Ycm = s·Ccm`` from each input to the reference, and the output as a voltage source
``A·(vp - vn)`` behind the open-loop output resistance ``Ro``. The stage around it is
any picker.circuit.mna netlist (the stage's ``circuit``).

The solver's output voltage is multilinear in (Yin, Ro, A) (see picker.circuit.mna);
grouping by A gives the closed-loop gain as a bilinear function of the open-loop gain

    G = (n0 + n1·A) / (d0 + d1·A),

n0 = N|A=0, n1 = ∂N/∂A, d0 = D|A=0, d1 = ∂D/∂A, each affine in Yin and in Ro:

    d0 = c + cY·Yin + cR·Ro + cYR·Yin·Ro       (the same form for n0, n1, d1)

The coefficients come from the stage's netlist at one frequency (a few small
determinants); every part is then evaluated with whole-array operations. For the
op-amp in feedback, ∂D/∂A and ∂N/∂A do not depend on Yin or Ro (their bordered
determinants have dependent rows: the A stamp's row is the Ro stamp's, and its column
pattern is the Yin stamp's), so d1 and n1 are the same for every part; everything is
divided by d1 (d1 = 1). A resistive stage has real coefficients independent of
frequency, and with ``A(s)`` its gain is first order: ``G(s) = (n0·(1 + s/ωp) + n1·A0)
/ (d0·(1 + s/ωp) + d1·A0)``, one closed-loop pole at ``fp·(1 + A0·d1/d0)``.

Unknown values: with ``unknown="ideal"`` (the default, as the checks have always
done) an unknown Ro (NaN) is taken as 0 and an unknown Rin as infinite; with
``unknown="nan"`` they stay NaN and so does every result they touch. Callers decide
and say so.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Literal, Protocol

import numpy as np
import numpy.typing as npt

from picker.circuit.mna import Coefficients, Netlist, coefficients, polynomials

Array = npt.NDArray[np.float64]
Unknown = Literal["ideal", "nan"]


class HasCircuit(Protocol):
    """Anything that carries a netlist (a picker.stages Stage)."""

    @property
    def circuit(self) -> Netlist: ...


def conductance(r: npt.ArrayLike) -> Array:
    """1/R, with an unknown (NaN) or infinite resistance as an open circuit (0)."""
    r = np.asarray(r, dtype=float)
    with np.errstate(divide="ignore"):
        return np.where(np.isfinite(r), 1.0 / r, 0.0)  # type: ignore[no-any-return]


@dataclass(frozen=True)
class Loop:
    """Closed-loop gain as a bilinear function of the open-loop gain, per part."""

    n0: Array
    n1: Array
    d0: Array
    d1: Array

    def gain(self, a: npt.ArrayLike) -> npt.NDArray[np.complex128]:
        """Closed-loop gain vo/vin for open-loop gain(s) ``a`` (real or complex)."""
        a = np.asarray(a)
        with np.errstate(invalid="ignore", divide="ignore"):  # unknown parameters give NaN
            return (self.n0 + self.n1 * a) / (self.d0 + self.d1 * a)  # type: ignore[no-any-return]

    @property
    def g_inf(self) -> Array:
        """The gain with infinite open-loop gain (the network's ideal gain)."""
        return self.n1 / self.d1  # type: ignore[no-any-return]

    @property
    def beta(self) -> Array:
        """Loop gain per unit of open-loop gain (feedback factor; 1/beta = noise gain)."""
        return self.d1 / self.d0  # type: ignore[no-any-return]


def _netlist(stage: Netlist | HasCircuit) -> Netlist:
    return stage if isinstance(stage, Netlist) else stage.circuit


def _plain(c: complex) -> complex | float:
    return c.real if c.imag == 0 else c


def _affine(c: Coefficients, which: Literal["num", "den"], yin: npt.NDArray[np.generic],
            ro: npt.NDArray[np.generic], scale: complex) -> npt.NDArray[np.generic]:
    """c + cY·Yin + Ro·(cR + cYR·Yin), terms that are exactly zero skipped.

    Written with in-place operations: at a million parts each array is 8 MB, and
    updating one in place moves less memory than writing a new one.
    """
    k = getattr(c, which)
    c0, cy, cr, cyr = (_plain(k.get(s, 0j) / scale)
                       for s in ((), ("yin",), ("ro",), ("yin", "ro")))
    shape = np.broadcast_shapes(yin.shape, ro.shape)
    if not (cy or cr or cyr):  # the same for every part: a read-only broadcast
        return np.broadcast_to(np.asarray(c0), shape)
    dtype = np.result_type(yin, ro, *(np.asarray(x) for x in (c0, cy, cr, cyr)))
    if cyr:
        out = np.multiply(yin, cyr, dtype=dtype)
        out += cr
        out *= ro
    elif cr:
        out = np.multiply(ro, cr, dtype=dtype)
    else:
        out = np.zeros(shape, dtype=dtype)
    if cy:
        out += np.multiply(yin, cy, dtype=dtype)
    if c0:
        out += c0
    return np.broadcast_to(out, shape) if out.shape != shape else out


def loop(stage: Netlist | HasCircuit, rin: npt.ArrayLike, ro: npt.ArrayLike, *,
         freq_hz: float = 0.0, cin: npt.ArrayLike | None = None,
         cin_cm: npt.ArrayLike | None = None, unknown: Unknown = "ideal") -> Loop:
    """The bilinear coefficients of the exact closed-loop gain (see module docstring).

    Parameters
    ----------
    stage : Netlist or Stage
        The stage's circuit (a Stage's ``circuit``), with its op-amp element.
    rin, ro : array_like
        The parts' differential input resistance and open-loop output resistance, Ω
        (one element per part; NaN = unknown, see ``unknown``).
    freq_hz : float
        Frequency the coefficients are taken at, Hz. A resistive stage without ``cin``
        has the same coefficients at every frequency.
    cin : array_like, optional
        Differential input capacitance, F (None: 0).
    cin_cm : array_like, optional
        Common-mode input capacitance from each input to the reference, F (None: 0).
    unknown : {"ideal", "nan"}
        "ideal": an unknown Ro counts as 0, an unknown Rin as infinite and an unknown
        capacitance as 0; "nan": they stay NaN.

    Returns
    -------
    Loop
        ``n0``, ``d0`` per part; ``n1`` and ``d1`` the same for every part (read-only
        broadcasts, ``d1`` = 1) unless ``cin_cm`` is given (then ``d1`` = 1 per part).
    """
    s = 2j * np.pi * freq_hz
    c = coefficients(_netlist(stage), s)
    rin_a = np.asarray(rin, dtype=float)
    ro_a = np.asarray(ro, dtype=float)
    with np.errstate(divide="ignore"):
        if unknown == "ideal":
            # 1/Rin, open (0) for an unknown or infinite Rin: fmax drops NaN, 1/inf is 0
            gin: npt.NDArray[np.generic] = np.fmax(1.0 / rin_a, 0.0)
            ro_a = np.fmax(ro_a, 0.0)  # an unknown Ro (NaN) counts as 0
        else:
            gin = 1.0 / rin_a
    if cin is not None and s:
        cin_a = np.asarray(cin, dtype=float)
        gin = np.asarray(gin) + s * (np.nan_to_num(cin_a, nan=0.0) if unknown == "ideal" else cin_a)
    if cin_cm is not None and s:
        ccm = np.asarray(cin_cm, dtype=float)
        ycm = s * (np.nan_to_num(ccm, nan=0.0) if unknown == "ideal" else ccm)
        return _general(c.num, c.den, {"yin": np.asarray(gin), "ro": ro_a, "ycp": ycm,
                                       "ycn": ycm})
    base, slope = c.split("a")
    scale = slope.den.get((), 0j) or 1.0  # d1: the same for every part (module docstring)
    d0 = _affine(base, "den", gin, ro_a, scale)
    n0 = _affine(base, "num", gin, ro_a, scale)
    n1 = _affine(slope, "num", gin, ro_a, scale)
    d1 = _affine(slope, "den", gin, ro_a, scale)
    shape = np.broadcast_shapes(d0.shape, n0.shape, n1.shape, d1.shape)
    return Loop(*(np.broadcast_to(x, shape) if x.shape != shape else x  # type: ignore[arg-type]
                  for x in (n0, n1, d0, d1)))


def _general(num: Mapping[tuple[str, ...], npt.ArrayLike],
             den: Mapping[tuple[str, ...], npt.ArrayLike],
             val: Mapping[str, npt.ArrayLike]) -> Loop:
    """The Loop from multilinear coefficients (scalars, or arrays per part) and the
    values of every variable but A: each of n0, n1, d0, d1 is Σ_S c_S·Π_{v in S} v,
    all divided by d1 (per part)."""
    def total(c: Mapping[tuple[str, ...], npt.ArrayLike], with_a: bool) -> npt.NDArray[np.generic]:
        out: npt.NDArray[np.generic] = np.asarray(0j)
        for key, coef in c.items():
            if ("a" in key) != with_a:
                continue
            term = np.asarray(coef)
            for v in key:
                if v != "a":
                    term = term * np.asarray(val[v])
            out = out + term
        return out

    with np.errstate(invalid="ignore", divide="ignore"):
        d1 = total(den, True)
        parts = [np.divide(total(num, False), d1), np.divide(total(num, True), d1),
                 np.divide(total(den, False), d1)]
    shape = np.broadcast_shapes(*(np.shape(x) for x in parts))
    n0, n1, d0 = (np.broadcast_to(x, shape) for x in parts)
    return Loop(n0, n1, d0, np.ones(shape))  # type: ignore[arg-type]


def loop_at(stage: Netlist | HasCircuit, s: npt.ArrayLike, rin: npt.ArrayLike,
            ro: npt.ArrayLike, cin: npt.ArrayLike, cin_cm: npt.ArrayLike) -> Loop:
    """The Loop of every part at its own complex frequency ``s`` (rad/s, one per part).

    The netlist's coefficients are exact polynomials in s (picker.circuit.mna
    ``polynomials``), evaluated per part with whole-array operations; unknown values
    stay NaN (the caller applies the unknown rule).

    Parameters
    ----------
    stage : Netlist or Stage
    s : array_like of complex
        Laplace variable per part, rad/s.
    rin, ro : array_like
        Differential input resistance and output resistance, Ω (Rin = inf: open).
    cin, cin_cm : array_like
        Differential and common-mode input capacitance, F.

    Returns
    -------
    Loop
        n0, n1, d0 per part and d1 = 1.
    """
    s_a = np.asarray(s, dtype=complex)
    num, den = polynomials(_netlist(stage)).at(s_a)
    with np.errstate(divide="ignore", invalid="ignore"):
        gin = 1.0 / np.asarray(rin, dtype=float) + s_a * np.asarray(cin, dtype=float)
    ycm = s_a * np.asarray(cin_cm, dtype=float)
    return _general(num, den, {"yin": gin, "ro": np.asarray(ro, dtype=float), "ycp": ycm,
                               "ycn": ycm})


def second_pole(pm_deg: npt.ArrayLike, gbw_hz: npt.ArrayLike,
                a0: npt.ArrayLike | None = None) -> Array:
    """The second open-loop pole ωp2 (rad/s) from the phase margin as a unity-gain follower.

    Model: A(s) = A0/((1 + s/ωp1)(1 + s/ωp2)), ωp1 = 2π·GBW/A0. As a follower without
    load (β = 1, Ro ignored) the crossover ωc has |A(jωc)| = 1 and the phase margin is
    PM = 180° - atan(ωc/ωp1) - atan(ωc/ωp2).

    - A0 known (exact): |A|² = 1 is a quadratic in u = ωc², solved in closed form for a
      given ωp2; PM rises with ωp2, so ωp2 is found by bisection in log ωp2 (80 halvings,
      whole-array per part).
    - A0 unknown: the A0 -> ∞ limit (atan(ωc/ωp1) -> 90°): ωc = ωu·sin PM and
      ωp2 = ωu·sin²PM / cos PM, ωu = 2π·GBW. The limit differs from the exact value by
      about 1/(A0·sin PM) rad of phase margin (0.0007° at A0 = 1e5, PM = 60°).

    PM >= 90° means no second pole (inf); PM <= 0 or unknown gives NaN.

    Parameters
    ----------
    pm_deg : array_like
        Phase margin as a unity-gain follower, no load, degrees.
    gbw_hz : array_like
        Gain-bandwidth product, Hz.
    a0 : array_like, optional
        DC open-loop gain, V/V (None or NaN: the limit above).

    Returns
    -------
    ndarray
        ωp2 per part, rad/s.
    """
    pm = np.radians(np.asarray(pm_deg, dtype=float))
    wu = 2 * np.pi * np.asarray(gbw_hz, dtype=float)
    a0_a = np.full(np.broadcast_shapes(pm.shape, wu.shape), np.nan) if a0 is None \
        else np.asarray(a0, dtype=float)
    pm, wu, a0_a = np.broadcast_arrays(pm, wu, a0_a)
    with np.errstate(invalid="ignore", divide="ignore"):
        limit = wu * np.sin(pm) ** 2 / np.cos(pm)
        w1 = wu / a0_a
        lo, hi = np.log(wu * 1e-4), np.log(wu * 1e12)
        for _ in range(80):
            mid = 0.5 * (lo + hi)
            w2 = np.exp(mid)
            a, b, c = 1 / (w1 * w2) ** 2, 1 / w1 ** 2 + 1 / w2 ** 2, 1 - a0_a ** 2
            u = -2 * c / (b + np.sqrt(b * b - 4 * a * c))  # the stable root of a·u² + b·u + c
            wc = np.sqrt(u)
            got = np.pi - np.arctan(wc / w1) - np.arctan(wc / w2)
            low = got < pm
            lo, hi = np.where(low, mid, lo), np.where(low, hi, mid)
        exact = np.exp(0.5 * (lo + hi))
        out = np.where(np.isfinite(a0_a) & (a0_a > 1), exact, limit)
        out = np.where(pm >= np.pi / 2, np.inf, out)
        return np.where((pm > 0) & np.isfinite(wu), out, np.nan)  # type: ignore[no-any-return]


def inverse_open_loop(s: npt.ArrayLike, a0: npt.ArrayLike, gbw_hz: npt.ArrayLike,
                      wp2: npt.ArrayLike) -> npt.NDArray[np.complex128]:
    """1/A(s) = (1/A0 + s/ωu)·(1 + s/ωp2) of the two-pole model (ωu = 2π·GBW; an unknown
    A0 counts as infinite, ωp2 = inf as no second pole)."""
    s_a = np.asarray(s, dtype=complex)
    with np.errstate(divide="ignore", invalid="ignore"):
        inv_a0 = np.fmax(1.0 / np.asarray(a0, dtype=float), 0.0)
        return (inv_a0 + s_a / (2 * np.pi * np.asarray(gbw_hz, dtype=float))) \
            * (1 + s_a / np.asarray(wp2, dtype=float))  # type: ignore[no-any-return]


def open_loop(a0: npt.ArrayLike, gbw_hz: npt.ArrayLike, freq_hz: float) -> npt.NDArray[np.complex128]:
    """A(j2πf) = A0 / (1 + j·f·A0/GBW): the single-pole open-loop gain."""
    a0 = np.asarray(a0, dtype=float)
    gbw = np.asarray(gbw_hz, dtype=float)
    if freq_hz == 0:
        return a0.astype(complex)
    with np.errstate(invalid="ignore"):
        return a0 / (1 + 1j * freq_hz * a0 / gbw)  # type: ignore[no-any-return]


def closed_loop_gain(
    stage: Netlist | HasCircuit,
    a0: npt.ArrayLike,
    gbw_hz: npt.ArrayLike,
    rin: npt.ArrayLike,
    ro: npt.ArrayLike,
    freq_hz: float,
    cin: npt.ArrayLike | None = None,
) -> npt.NDArray[np.complex128]:
    """Exact closed-loop gain vo/vin at ``freq_hz`` (0 for DC), one value per part.

    Parameters
    ----------
    stage : Netlist or Stage
        The stage's circuit.
    a0, gbw_hz, rin, ro : array_like
        The parts' DC open-loop gain (V/V), gain-bandwidth product (Hz), input
        resistance and output resistance (Ω; unknown taken as ∞ and 0).
    freq_hz : float
        Frequency, Hz.
    cin : array_like, optional
        Input capacitance, F.

    Returns
    -------
    ndarray of complex
        vo/vin per part.
    """
    return loop(stage, rin, ro, freq_hz=freq_hz, cin=cin).gain(open_loop(a0, gbw_hz, freq_hz))


def closed_loop_pole_hz(lp: Loop, a0: npt.ArrayLike, gbw_hz: npt.ArrayLike) -> Array:
    """The closed loop's single pole, fp·(1 + A0·d1/d0) with fp = GBW/A0.

    With A0 unknown (NaN) the pole is taken in the limit A0 -> ∞: GBW·d1/d0.
    """
    a0 = np.asarray(a0, dtype=float)
    gbw = np.asarray(gbw_hz, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        # GBW·(1/A0 + d1/d0): the same pole; fmax turns 1/NaN into 0 (A0 -> ∞)
        f = np.fmax(1.0 / a0, 0.0)
        f += lp.beta
        f *= gbw
    return f  # type: ignore[no-any-return]


def transfer(lp: Loop, a0: npt.ArrayLike, gbw_hz: npt.ArrayLike) -> tuple[Array, Array, Array, Array]:
    """G(s) = (b1·s + b0)/(a1·s + a0) coefficients per part: (b1, b0, a1, a0).

    Valid for a resistive stage (``lp`` taken at DC, no input capacitance).
    """
    a0_ = np.asarray(a0, dtype=float)
    wp = 2 * np.pi * np.asarray(gbw_hz, dtype=float) / a0_
    return lp.n0 / wp, lp.n0 + lp.n1 * a0_, lp.d0 / wp, lp.d0 + lp.d1 * a0_


__all__ = ["HasCircuit", "Loop", "Unknown", "closed_loop_gain", "closed_loop_pole_hz",
           "conductance", "inverse_open_loop", "loop", "loop_at", "open_loop", "second_pole",
           "transfer"]
