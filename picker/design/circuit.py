"""Exact closed-loop gain of a stage with the op-amp's linear macromodel.

Macromodel (per part): open-loop gain ``A(s) = A0 / (1 + s/ωp)`` with
``ωp = 2π·GBW/A0`` (single dominant pole), a differential input resistance ``Rin``
between the inputs, and the output as a voltage source ``A·(vp - vn)`` behind the
open-loop output resistance ``Ro``. A missing ``Ro`` is taken as 0 and a missing
``Rin`` as infinite (callers note it); the circuit around the op-amp is the reduced
stage of picker.design.topology (``kp``/``zp`` at the non-inverting input, ``kg``/``rg``
and ``rf`` at the inverting input, ``RL`` at the output; input = 1 V).

Nodal analysis, unknowns vp, vn, vo (conductances G = 1/R, 0 for an open element).
Each equation is multiplied by a resistance so a zero resistance (a wire) stays finite:

    p:  (vp - kp) + zp·Gin·(vp - vn) = 0
    n:  rf·Gg·(vn - kg) + rf·Gin·(vn - vp) + (vn - vo) = 0
    o:  (vo - A·(vp - vn)) + Ro·(GL·vo + Gg·(vn - kg) + Gin·(vn - vp)) = 0

(the output equation is the KCL at the output with the current in rf taken from the
KCL at the inverting input). A appears in one row only, so by Cramer's rule

    vo = (n0 + n1·A) / (d0 + d1·A)

with d0 = det M|A=0, d1 = det M with the output row replaced by its A-coefficients
[-1, 1, 0], and n0, n1 the same with the vo column replaced by the right-hand side.
Derivation check (sympy, run offline; tests/design/test_circuit.py repeats it on the
unreduced circuits)::

    import sympy as sp
    vp, vn, vo, A, kp, kg, zp, rf, Ro, Gin, Gg, GL = sp.symbols("vp vn vo A kp kg zp rf Ro Gin Gg GL")
    eqs = [(vp - kp) + zp*Gin*(vp - vn),
           rf*Gg*(vn - kg) + rf*Gin*(vn - vp) + (vn - vo),
           (vo - A*(vp - vn)) + Ro*(GL*vo + Gg*(vn - kg) + Gin*(vn - vp))]
    sol = sp.solve(eqs, [vp, vn, vo])[vo]   # equals (n0 + n1*A)/(d0 + d1*A)

Expanding the four determinants (sympy ``expand`` of the expressions above, grouped
by powers of Gin and Ro) leaves one per-part factor each, which is how they are
computed (a few array operations per part instead of four 3x3 determinants)::

    d1 = 1
    n1 = kp·(1 + rf·Gg) - kg·rf·Gg                        (the same for every part)
    d0 = (1 + rf·Gg) + Gin·(rf + zp + rf·zp·Gg)
         + Ro·(Gg + GL + rf·Gg·GL) + Gin·Ro·(1 + Gg·zp + GL·(rf + zp) + rf·zp·Gg·GL)
    n0 = Ro·(Gg·kg + Gin·(kp + Gg·kg·zp))

With ``A(s)`` the gain is first order: ``G(s) = (n0·(1 + s/ωp) + n1·A0) /
(d0·(1 + s/ωp) + d1·A0)``, one closed-loop pole at ``fp·(1 + A0·d1/d0)``.
Everything is vectorised: one array element per part.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from picker.design.topology import Stage

Array = npt.NDArray[np.float64]


def _det3(r1: tuple, r2: tuple, r3: tuple) -> Array:  # type: ignore[type-arg]
    a0, a1, a2 = r1
    b0, b1, b2 = r2
    c0, c1, c2 = r3
    return a0 * (b1 * c2 - b2 * c1) - a1 * (b0 * c2 - b2 * c0) + a2 * (b0 * c1 - b1 * c0)  # type: ignore[no-any-return]


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


def loop(stage: Stage, rin: npt.ArrayLike, ro: npt.ArrayLike) -> Loop:
    """The bilinear coefficients of the exact closed-loop gain (see module docstring).

    ``rin`` and ``ro`` are arrays over parts (NaN Rin = infinite, NaN Ro = 0).
    ``n1`` and ``d1`` are the same for every part (read-only broadcasts).
    """
    with np.errstate(divide="ignore"):
        # 1/Rin, open (0) for an unknown or infinite Rin: fmax drops NaN, 1/inf is 0
        gin = np.fmax(1.0 / np.asarray(rin, dtype=float), 0.0)
    ro_a = np.fmax(np.asarray(ro, dtype=float), 0.0)  # an unknown Ro (NaN) counts as 0
    gg = 0.0 if np.isinf(stage.rg) else 1.0 / stage.rg
    gl = 0.0 if np.isinf(stage.load) else 1.0 / stage.load
    kp, kg, zp, rf = stage.kp, stage.kg, stage.zp, stage.rf
    c00 = 1 + rf * gg
    c10 = rf + zp + rf * zp * gg
    c01 = gg + gl + rf * gg * gl
    c11 = 1 + gg * zp + gl * (rf + zp) + rf * zp * gg * gl
    d0 = np.multiply(gin, c11)  # d0 = c00 + c10·Gin + Ro·(c01 + c11·Gin), in place
    d0 += c01
    d0 *= ro_a
    t = np.multiply(gin, c10)
    d0 += t
    d0 += c00
    n0 = np.multiply(gin, kp + gg * kg * zp, out=t)  # n0 = Ro·(Gg·kg + (kp + Gg·kg·zp)·Gin)
    n0 += gg * kg
    n0 *= ro_a
    shape = d0.shape
    n1 = np.broadcast_to(kp * (1 + rf * gg) - kg * rf * gg, shape)
    d1 = np.broadcast_to(1.0, shape)
    return Loop(n0, n1, d0, d1)


def loop_nodal(stage: Stage, rin: npt.ArrayLike, ro: npt.ArrayLike) -> Loop:
    """``loop`` by Cramer's rule on the unexpanded nodal matrix (the reference the
    expanded form is tested against)."""
    rin_a = np.asarray(rin, dtype=float)
    ro_a = np.nan_to_num(np.asarray(ro, dtype=float), nan=0.0)
    gin = conductance(rin_a)
    gg = 0.0 if np.isinf(stage.rg) else 1.0 / stage.rg
    gl = 0.0 if np.isinf(stage.load) else 1.0 / stage.load
    kp, kg, zp, rf = stage.kp, stage.kg, stage.zp, stage.rf
    zero = np.zeros_like(gin)
    r1 = (1 + zp * gin, -zp * gin, zero)
    r2 = (-rf * gin, 1 + rf * gg + rf * gin, zero - 1)
    r3 = (-ro_a * gin, ro_a * gg + ro_a * gin, 1 + ro_a * gl)
    ra = (zero - 1, zero + 1, zero)  # A-coefficients of the output row
    rhs = (zero + kp, zero + rf * gg * kg, ro_a * gg * kg)
    d0 = _det3(r1, r2, r3)
    d1 = _det3(r1, r2, ra)
    # the vo column replaced by the right-hand side (the A row has rhs 0)
    n0 = _det3((r1[0], r1[1], rhs[0]), (r2[0], r2[1], rhs[1]), (r3[0], r3[1], rhs[2]))
    n1 = _det3((r1[0], r1[1], rhs[0]), (r2[0], r2[1], rhs[1]), (ra[0], ra[1], zero))
    return Loop(n0, n1, d0, d1)


def open_loop(a0: npt.ArrayLike, gbw_hz: npt.ArrayLike, freq_hz: float) -> npt.NDArray[np.complex128]:
    """A(j2πf) = A0 / (1 + j·f·A0/GBW): the single-pole open-loop gain."""
    a0 = np.asarray(a0, dtype=float)
    gbw = np.asarray(gbw_hz, dtype=float)
    if freq_hz == 0:
        return a0.astype(complex)
    with np.errstate(invalid="ignore"):
        return a0 / (1 + 1j * freq_hz * a0 / gbw)  # type: ignore[no-any-return]


def closed_loop_gain(
    stage: Stage,
    a0: npt.ArrayLike,
    gbw_hz: npt.ArrayLike,
    rin: npt.ArrayLike,
    ro: npt.ArrayLike,
    freq_hz: float,
) -> npt.NDArray[np.complex128]:
    """Exact closed-loop gain vo/vin at ``freq_hz`` (0 for DC), one value per part."""
    return loop(stage, rin, ro).gain(open_loop(a0, gbw_hz, freq_hz))


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
    """G(s) = (b1·s + b0)/(a1·s + a0) coefficients per part: (b1, b0, a1, a0)."""
    a0_ = np.asarray(a0, dtype=float)
    wp = 2 * np.pi * np.asarray(gbw_hz, dtype=float) / a0_
    return lp.n0 / wp, lp.n0 + lp.n1 * a0_, lp.d0 / wp, lp.d0 + lp.d1 * a0_


__all__ = ["Loop", "closed_loop_gain", "closed_loop_pole_hz", "conductance", "loop",
           "loop_nodal", "open_loop", "transfer"]
