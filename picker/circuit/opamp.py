"""The op-amp macromodel in a stage: exact closed-loop gain per part, through the solver.

Macromodel (per part): open-loop gain ``A(s) = A0 / (1 + s·A0/(2π·GBW))`` (single
dominant pole at ``ωp = 2π·GBW/A0``), the differential input admittance
``Yin = 1/Rin + s·Cin`` between the inputs, and the output as a voltage source
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

from dataclasses import dataclass
from typing import Literal, Protocol

import numpy as np
import numpy.typing as npt

from picker.circuit.mna import Coefficients, Netlist, coefficients

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
         unknown: Unknown = "ideal") -> Loop:
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
    unknown : {"ideal", "nan"}
        "ideal": an unknown Ro counts as 0 and an unknown Rin as infinite; "nan": they
        stay NaN.

    Returns
    -------
    Loop
        ``n0``, ``d0`` per part; ``n1`` and ``d1`` the same for every part (read-only
        broadcasts, ``d1`` = 1).
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
    base, slope = c.split("a")
    scale = slope.den.get((), 0j) or 1.0  # d1: the same for every part (module docstring)
    d0 = _affine(base, "den", gin, ro_a, scale)
    n0 = _affine(base, "num", gin, ro_a, scale)
    n1 = _affine(slope, "num", gin, ro_a, scale)
    d1 = _affine(slope, "den", gin, ro_a, scale)
    shape = np.broadcast_shapes(d0.shape, n0.shape, n1.shape, d1.shape)
    return Loop(*(np.broadcast_to(x, shape) if x.shape != shape else x  # type: ignore[arg-type]
                  for x in (n0, n1, d0, d1)))


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
           "conductance", "loop", "open_loop", "transfer"]
