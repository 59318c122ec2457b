"""Loop gain, phase margin and closed-loop peaking of a stage, per part.

Open loop: the two-pole model ``A(s) = A0/((1 + s/ωp1)(1 + s/ωp2))``, ωp1 = 2π·GBW/A0,
ωp2 from the part's phase margin as a unity-gain follower (picker.circuit.opamp
``second_pole``). The stage's own netlist (network, source resistance, load and load
capacitance) is solved with the part's Rin, Ro, differential input capacitance Cin
(between the inputs) and common-mode input capacitance Ccm (from each input to the
reference); grouping the solution by A gives G = (n0 + n1·A)/(d0 + d1·A), and the loop
gain is the return ratio of the controlled source A,

    T(s) = A(s)·β(s),  β = d1/d0

(Bode's return ratio; e.g. Gray, Hurst, Lewis and Meyer, Analysis and Design of Analog
Integrated Circuits, 5th ed., §8.8 (return ratio), from memory). The netlist's
coefficients are exact polynomials in s (picker.circuit.mna ``polynomials``), so every
part is evaluated at its own frequencies with whole-array operations:

- the crossover fc is the highest frequency with |T| = 1: a per-part log grid
  (``PER_DECADE`` points a decade from GBW·1e-7 to GBW·100) brackets it, bisection in
  log f (``BISECTIONS`` halvings) refines it;
- the phase margin is PM = 180° + arg T(j2πfc), arg T unwrapped along the grid from
  DC (where T = A0·β(0) > 0) and continued to fc;
- the closed-loop peaking is max over f of 20·log10(|G(f)|/|G(0)|) (0 dB when the
  gain never rises above its DC value): the grid's largest value refined by
  golden-section search in log f over the two grid steps around it.

Unknown values stay NaN (the check's unknown rule decides); an unknown Rin counts as
open, an unknown Ro or capacitance as 0 only where the check says they do not matter.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from picker.circuit.mna import Netlist
from picker.circuit.opamp import inverse_open_loop, loop_at, second_pole

Array = npt.NDArray[np.float64]
Complex = npt.NDArray[np.complex128]

#: grid points a decade for bracketing the crossover and the peak
PER_DECADE = 10
#: the grid spans GBW·10^LOW .. GBW·10^HIGH per part
LOW, HIGH = -7, 2
#: bisection halvings of the grid step (0.1 decade) around the crossover: 2^-30 of a
#: step leaves fc within 2e-10 relative, far below the 0.001° agreement with ngspice
BISECTIONS = 30
#: golden-section steps over two grid steps around the peak: 0.618^28 of 0.2 decade
#: puts the peak's frequency within 7e-8 decade; |G| is flat there to second order
GOLDEN_STEPS = 28
#: parts evaluated at once: the grid then takes CHUNK x 91 complex values (5.8 MB), which
#: stays in cache; a pick of 10,000 synthetic parts (scripts/bench_data.py) took 1.1 s with 20000, 0.7 s with
#: 4000 and 1.4 s with 1000 (one machine, one run each)
CHUNK = 4000


@dataclass(frozen=True)
class Model:
    """The parts' macromodel values, one element per part (SI units)."""

    a0: Array
    gbw: Array
    wp2: Array  # second pole, rad/s (inf: none)
    rin: Array  # inf: open
    ro: Array
    cin: Array
    ccm: Array

    @classmethod
    def of(cls, a0: npt.ArrayLike, gbw: npt.ArrayLike, pm_unity_deg: npt.ArrayLike,
           rin: npt.ArrayLike, ro: npt.ArrayLike, cin: npt.ArrayLike,
           ccm: npt.ArrayLike) -> Model:
        """The model from part fields; unknown Rin -> open, unknown Ro and capacitances
        -> 0 (the caller's unknown rule says where that may not pass)."""
        f = [np.asarray(x, dtype=float) for x in (a0, gbw, pm_unity_deg, rin, ro, cin, ccm)]
        a0_a, gbw_a, pm, rin_a, ro_a, cin_a, ccm_a = np.broadcast_arrays(*f)
        return cls(a0_a, gbw_a, second_pole(pm, gbw_a, a0_a),
                   np.where(np.isnan(rin_a), np.inf, rin_a), np.nan_to_num(ro_a, nan=0.0),
                   np.nan_to_num(cin_a, nan=0.0), np.nan_to_num(ccm_a, nan=0.0))

    def __len__(self) -> int:
        return len(self.gbw)

    def take(self, index: npt.ArrayLike) -> Model:
        idx = np.asarray(index)
        return Model(*(getattr(self, k)[idx] for k in
                       ("a0", "gbw", "wp2", "rin", "ro", "cin", "ccm")))

    def column(self) -> Model:
        """Every array as a column (parts × 1), to broadcast against frequency grids."""
        return Model(*(getattr(self, k)[:, None] for k in
                       ("a0", "gbw", "wp2", "rin", "ro", "cin", "ccm")))


def _terms(net: Netlist, m: Model, f: npt.ArrayLike) -> tuple[Complex, Complex, Complex,
                                                                 Complex]:
    """(n0, n1, d0, 1/A) at f (Hz, broadcast against the model's arrays), d1 = 1."""
    s = 2j * np.pi * np.asarray(f, dtype=float)
    s = np.broadcast_to(s, np.broadcast_shapes(s.shape, m.gbw.shape))
    lp = loop_at(net, s, m.rin, m.ro, m.cin, m.ccm)
    n0, n1, d0 = (np.asarray(x, dtype=complex) for x in (lp.n0, lp.n1, lp.d0))
    return n0, n1, d0, inverse_open_loop(s, m.a0, m.gbw, m.wp2)


def loop_gain(net: Netlist, m: Model, f: npt.ArrayLike) -> Complex:
    """T(j2πf) = A·d1/d0 per part (f broadcast against the model's arrays)."""
    _, _, d0, inv_a = _terms(net, m, f)
    with np.errstate(divide="ignore", invalid="ignore"):
        return 1.0 / (d0 * inv_a)  # type: ignore[no-any-return]


def closed_loop(net: Netlist, m: Model, f: npt.ArrayLike) -> Complex:
    """G(j2πf) = (n0 + n1·A)/(d0 + d1·A) per part, with the two-pole A(s)."""
    n0, n1, d0, inv_a = _terms(net, m, f)
    with np.errstate(divide="ignore", invalid="ignore"):
        return (n0 * inv_a + n1) / (d0 * inv_a + 1.0)  # type: ignore[no-any-return]


@dataclass(frozen=True)
class Margins:
    """Per part: phase margin (degrees; inf: |T| never reaches 1), crossover (Hz) and
    closed-loop peaking (dB, >= 0)."""

    pm_deg: Array
    fc_hz: Array
    peaking_db: Array


def _grid(m: Model) -> Array:
    """Per-part frequency grid, parts × points, Hz."""
    u = np.linspace(LOW, HIGH, (HIGH - LOW) * PER_DECADE + 1)
    return m.gbw[:, None] * 10.0 ** u[None, :]  # type: ignore[no-any-return]


def _wrap(x: Array) -> Array:
    return (x + np.pi) % (2 * np.pi) - np.pi  # type: ignore[no-any-return]


def _chunk_margins(net: Netlist, m: Model) -> Margins:
    n = len(m)
    f = _grid(m)
    col = m.column()
    # one evaluation of the grid serves the loop gain and the closed loop (the grid is
    # most of the check's time: 2 x 91 points a part against 30 + 25 refinement steps)
    n0_g, n1_g, d0_g, inv_a_g = _terms(net, col, f)
    with np.errstate(divide="ignore", invalid="ignore"):
        t = 1.0 / (d0_g * inv_a_g)
        g_grid = (n0_g * inv_a_g + n1_g) / (d0_g * inv_a_g + 1.0)
    mag = np.abs(t)
    phase = np.unwrap(np.angle(t), axis=1)
    above = mag >= 1
    rows = np.arange(n)
    k_last = f.shape[1] - 1 - np.argmax(above[:, ::-1], axis=1)  # the highest point >= 1
    has = above.any(axis=1) & (k_last < f.shape[1] - 1) & np.isfinite(mag).all(axis=1)
    k = np.where(has, k_last, 0)
    lo, hi = np.log(f[rows, k]), np.log(f[rows, np.minimum(k + 1, f.shape[1] - 1)])
    for _ in range(BISECTIONS):
        mid = 0.5 * (lo + hi)
        up = np.abs(loop_gain(net, m, np.exp(mid))) >= 1
        lo, hi = np.where(up, mid, lo), np.where(up, hi, mid)
    fc = np.exp(0.5 * (lo + hi))
    arg = phase[rows, k] + _wrap(np.angle(loop_gain(net, m, fc)) - np.angle(t[rows, k]))
    known = np.isfinite(m.gbw) & (m.gbw > 0) & ~np.isnan(m.wp2)
    pm = np.where(has, 180.0 + np.degrees(arg), np.where(above.any(axis=1), np.nan, np.inf))
    pm = np.where(known, pm, np.nan)
    fc = np.where(has & known, fc, np.nan)
    # peaking: |G|/|G(0)| on the grid, refined around the largest value
    g0 = np.abs(closed_loop(net, m, np.zeros(n)))
    g = np.abs(g_grid) / g0[:, None]
    kmax = np.argmax(np.nan_to_num(g, nan=-1.0), axis=1)
    a = np.log(f[rows, np.maximum(kmax - 1, 0)])
    b = np.log(f[rows, np.minimum(kmax + 1, f.shape[1] - 1)])
    ratio = (math.sqrt(5) - 1) / 2

    def gain(x: Array) -> Array:
        return np.abs(closed_loop(net, m, np.exp(x))) / g0  # type: ignore[no-any-return]

    x1, x2 = b - ratio * (b - a), a + ratio * (b - a)
    g1, g2 = gain(x1), gain(x2)
    for _ in range(GOLDEN_STEPS):
        left = g1 >= g2  # the maximum lies in [a, x2]
        b = np.where(left, x2, b)
        a = np.where(left, a, x1)
        x1n = np.where(left, b - ratio * (b - a), x2)
        x2n = np.where(left, x1, a + ratio * (b - a))
        g_new = gain(np.where(left, x1n, x2n))
        g1, g2 = np.where(left, g_new, g2), np.where(left, g1, g_new)
        x1, x2 = x1n, x2n
    peak = np.fmax(np.fmax(g[rows, kmax], g1), g2)
    with np.errstate(divide="ignore", invalid="ignore"):
        peaking = np.maximum(20 * np.log10(peak), 0.0)
    peaking = np.where(np.isfinite(g).all(axis=1) & known, peaking, np.nan)
    return Margins(pm, fc, peaking)


def margins(net: Netlist, m: Model) -> Margins:
    """Phase margin, crossover and peaking of ``net`` for every part (module docstring).

    Parameters
    ----------
    net : Netlist
        The stage's circuit with its op-amp element.
    m : Model
        The parts (one array element per part).

    Returns
    -------
    Margins
        NaN where a value the loop needs is unknown (GBW, PM as a follower).
    """
    out = [_chunk_margins(net, m.take(np.arange(i, min(i + CHUNK, len(m)))))
           for i in range(0, len(m), CHUNK)]
    if not out:
        empty = np.zeros(0)
        return Margins(empty, empty, empty)
    return Margins(*(np.concatenate([getattr(o, k) for o in out])
                     for k in ("pm_deg", "fc_hz", "peaking_db")))


__all__ = ["CHUNK", "Margins", "Model", "closed_loop", "loop_gain", "margins"]
