"""Predicted output waveform of a stage, for every part at once (numpy over parts × time).

The small-signal loop is the one-state model of picker.design.loopstate (single-pole
open-loop gain, Rin, Ro, source, load and network, all exact), with three limits of a
real output stage added in the manner of the Boyle macromodel (IEEE JSSC SC-9(6), 1974,
from memory):

- slew: |dx/dt| <= SR (the internal node's rate; the output follows through Ro);
- clip: the output stays within [V- + head-(I), V+ - head+(I)], the headroom growing
  with the output current I through the saturation resistance (picker.circuit.output,
  the swing check's own model; Rsat unknown: light-load figures). It is held as a clamp
  on x at every sample (no integrator wind-up): the x at which the linear output sits
  on that limit, x = (1 + Ro·Y)·vo,lim - Ro·J·u;
- current: the output current into load plus network is at most ±Iout; beyond it the
  output is a current source and vo = (±Iout + J·u)/Y.

A sine u = Vin·sin(2πft) drives the stage from the reference level. Between samples
(step h = T/steps) the linear dynamics dx/dt = −λx + μu + ν are integrated exactly with
u held first-order (linear in the step): with z = λh, E = exp(−z),

    x1 = E·x0 + (μ·u0 + ν)·h·φ1(z) + μ·(u1 − u0)·h·φ2(z),
    φ1(z) = (1 − e^−z)/z,   φ2(z) = (z − 1 + e^−z)/z²

(the triangle-hold equivalent; G. F. Franklin, J. D. Powell, M. L. Workman, Digital
Control of Dynamic Systems, 3rd ed., ch. 6, from memory). This stays exact however
stiff the loop is (closed-loop pole far above 1/h). The slew limit then caps the step at
±SR·h and the swing limit clamps x; the output mode (linear or current-limited) is
taken at the start of each step. The run starts from the linear steady state, settles
for at least 3 periods (and 10 closed-loop time constants), and the last 2 whole periods
are analysed: peaks, peak-to-peak, THD from their FFT, and which limits were active.

Limits reported: ``clip`` (x held at a swing limit), ``slew`` (a step capped at SR·h),
``current`` (the output current limited), ``bandwidth`` (the small-signal closed-loop
gain at f has fallen from its DC value by more than the gain-error budget).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Literal, get_args

import numpy as np
import numpy.typing as npt

from picker.circuit.output import reach
from picker.design.loopstate import LoopState, loop_state
from picker.stages import Stage, stage

if TYPE_CHECKING:
    from picker.design.requirement import Requirement

Array = npt.NDArray[np.float64]
Limit = Literal["clip", "slew", "current", "bandwidth"]
LIMITS: tuple[Limit, ...] = get_args(Limit)

#: part columns the simulation reads
COLUMNS: tuple[str, ...] = (
    "gbw_hz", "slew_v_per_s", "aol_v_per_v", "rin_ohm", "rout_ohm", "iout_a",
    "out_head_pos_v", "out_head_neg_v", "out_rsat_pos_ohm", "out_rsat_neg_ohm",
)
#: without these a part cannot be simulated (its results are NaN)
NEEDED: tuple[str, ...] = ("gbw_hz", "slew_v_per_s")
ANALYSED_PERIODS = 2


@dataclass(frozen=True)
class Drive:
    """The test signal and the supply (SI units; voltages absolute)."""

    vin_pk: float  # input peak around the reference
    freq_hz: float
    ref_v: float
    rail_pos: float
    rail_neg: float
    ideal_gain: float  # signed gain the stage is meant to have
    gain_error: float = 0.01  # budget for the ``bandwidth`` limit

    @classmethod
    def of(cls, req: Requirement, st: Stage, freq_hz: float | None = None) -> Drive:
        sign = 1.0 if st.ideal_gain >= 0 else -1.0
        return cls(req.vin, freq_hz or req.freq_hz, req.ref, req.rail_pos, req.rail_neg,
                   sign * req.gain, req.gain_error)


@dataclass(frozen=True)
class Waves:
    """Predicted waveforms and their numbers, one row per part (absolute voltages)."""

    labels: tuple[str, ...]
    drive: Drive
    t: Array  # (N,) time over the analysed periods, s
    ideal: Array  # (N,) ideal output, V
    vout: Array  # (P, N) predicted output, V
    swing_hi: Array  # (P,) highest output reachable at the input's peak (headroom at that current), V
    swing_lo: Array  # (P,) lowest output reachable at the input's trough, V
    peak_pos: Array
    peak_neg: Array
    vpp: Array
    thd: Array  # ratio (not %)
    active: npt.NDArray[np.bool_]  # (P, len(LIMITS))
    known: npt.NDArray[np.bool_]  # (P,) False: a NEEDED field is unknown

    def limits(self, i: int) -> list[str]:
        """Names of the limits active for part ``i``, in LIMITS order."""
        return [name for name, on in zip(LIMITS, self.active[i], strict=True) if on]

    def summary(self, i: int) -> dict[str, Any]:
        """The JSON record of part ``i`` (SI units; THD as a ratio)."""
        def num(v: float) -> float | None:
            return None if not math.isfinite(v) else float(v)
        return {"part": self.labels[i], "peak_pos": num(self.peak_pos[i]),
                "peak_neg": num(self.peak_neg[i]), "vpp": num(self.vpp[i]),
                "thd": num(self.thd[i]), "limits": self.limits(i)}

    def index(self, label: str) -> int:
        return self.labels.index(label)


def _phi(z: Array) -> tuple[Array, Array]:
    """φ1(z) = (1 − e^−z)/z and φ2(z) = (z − 1 + e^−z)/z², series near z = 0."""
    small = z < 1e-4
    zs = np.where(small, 1.0, z)
    em1 = np.expm1(-zs)
    phi1 = np.where(small, 1 - z / 2 + z * z / 6, -em1 / zs)
    phi2 = np.where(small, 0.5 - z / 6 + z * z / 24, (zs + em1) / (zs * zs))
    return phi1, phi2  # type: ignore[return-value]


def _labels(parts: Any, n: int) -> tuple[str, ...]:
    """Row labels: a DataFrame's index, picker.checks.Parts labels, or 0..n-1."""
    for attr in ("labels", "index"):
        got = getattr(parts, attr, None)
        if got is not None and not callable(got):
            return tuple(str(v) for v in got)
    return tuple(map(str, range(n)))


def _column(parts: Mapping[str, Any], name: str, n: int) -> Array:
    if name in parts:
        return np.asarray(parts[name], dtype=float).reshape(n)
    return np.full(n, np.nan)


def simulate(
    st: Stage,
    parts: Mapping[str, Any],
    drive: Drive,
    labels: tuple[str, ...] | None = None,
    *,
    steps: int = 512,
    settle_periods: int = 3,
    max_periods: int = 100,
) -> Waves:
    """Simulate ``st`` for every part in ``parts`` (columns of COLUMNS, one row per part).

    ``parts`` may be a DataFrame (labels from its index) or a mapping of arrays.
    """
    n = len(np.asarray(parts["gbw_hz"]).reshape(-1))
    if labels is None:
        labels = _labels(parts, n)
    cols = {c: _column(parts, c, n) for c in COLUMNS}
    known = np.all([np.isfinite(cols[c]) & (cols[c] > 0) for c in NEEDED], axis=0)
    gbw = np.where(known, cols["gbw_hz"], 1.0)
    sr = np.where(known, cols["slew_v_per_s"], 1.0)
    iout = np.where(np.isfinite(cols["iout_a"]) & (cols["iout_a"] > 0), cols["iout_a"], np.inf)
    hi_abs = drive.rail_pos - np.nan_to_num(cols["out_head_pos_v"], nan=0.0)
    lo_abs = drive.rail_neg + np.nan_to_num(cols["out_head_neg_v"], nan=0.0)
    ls = loop_state(st, cols["aol_v_per_v"], gbw, cols["rin_ohm"], cols["rout_ohm"])

    f, vin = drive.freq_hz, drive.vin_pk
    w = 2 * np.pi * f
    h = 1.0 / (f * steps)
    lam, mu = ls.lam, ls.mu
    slowest = float(lam[known].min()) if known.any() else w
    settle = int(min(max(settle_periods, math.ceil(10 * f / max(slowest, 1e-300))), max_periods))
    u = vin * np.sin(2 * np.pi * np.arange(steps + 1) / steps)
    lo, hi = lo_abs - drive.ref_v, hi_abs - drive.ref_v
    rsat = cols["out_rsat_pos_ohm"], cols["out_rsat_neg_ohm"]
    # start from the linear steady state at t = 0, x = Im(μ/(λ + jw))·vin, held within what
    # a full slew can reach (±SR·T/4) so a slew-bound part starts near its triangle
    full_slew = sr / (4 * f)
    x_lo0, x_hi0 = (b[:, 0] for b in _x_bounds(ls, lo, hi, rsat, u[:1]))
    x0 = np.clip(np.clip(-vin * mu * w / (lam**2 + w**2), -full_slew, full_slew), x_lo0, x_hi0)
    x_lo, x_hi = (b.T.copy() for b in _x_bounds(ls, lo, hi, rsat, u[1:]))
    x, _ = _run(ls, u, h, sr, iout, (x_lo, x_hi), (lo, hi), settle, max_periods, x0, known)

    u_win = np.concatenate([u[-2:-1], np.tile(u[:-1], ANALYSED_PERIODS), u[:1]])
    vo, capped = _output(ls, x, u_win[None, :], iout)
    xs, vo_an = x[:, 1:], vo[:, 1:]
    step = np.abs(np.diff(x, axis=1))
    # while the current is limited the output does not follow x: clip and slew of x count
    # only where the output follows it
    free = ~capped
    slewing = np.any((step >= sr[:, None] * h * (1 - 1e-9)) & free[:, :-1], axis=1)
    b_lo, b_hi = _x_bounds(ls, lo, hi, rsat, u_win[1:])
    clipping = np.any(((xs >= b_hi) | (xs <= b_lo)) & free[:, 1:], axis=1)
    limited = np.any(capped[:, 1:], axis=1)
    g = ls.gain([0.0, f])
    with np.errstate(divide="ignore", invalid="ignore"):
        rolled = np.abs(g[:, 1]) < (1 - drive.gain_error) * np.abs(g[:, 0])
    active = np.stack([clipping, slewing, limited, rolled], axis=1) & known[:, None]

    n_an = ANALYSED_PERIODS * steps
    out = vo_an[:, :n_an] + drive.ref_v
    spec = np.abs(np.fft.rfft(out, axis=1))
    k = ANALYSED_PERIODS
    harm = spec[:, 2 * k: n_an // 2: k]
    with np.errstate(divide="ignore", invalid="ignore"):
        thd = np.sqrt(np.sum(harm**2, axis=1)) / spec[:, k]
    nan = np.where(known, 0.0, np.nan)
    top = np.sign(drive.ideal_gain) * vin  # the input when the output is at its peak
    reach_hi = reach(hi, rsat[0], ls.y, ls.j * top) + drive.ref_v
    reach_lo = reach(lo, rsat[1], ls.y, -ls.j * top) + drive.ref_v
    peak_pos, peak_neg = out.max(axis=1) + nan, out.min(axis=1) + nan
    return Waves(
        labels=labels, drive=drive, t=np.arange(n_an, dtype=float) * h,
        ideal=drive.ref_v + drive.ideal_gain * u_win[1:n_an + 1],
        vout=out + nan[:, None], swing_hi=reach_hi, swing_lo=reach_lo, peak_pos=peak_pos,
        peak_neg=peak_neg, vpp=peak_pos - peak_neg, thd=thd + nan, active=active, known=known,
    )


def _x_bounds(ls: LoopState, lo: Array, hi: Array, rsat: tuple[Array, Array], u: Array
              ) -> tuple[Array, Array]:
    """The clamps on x, (P, len(u)): the x at which the linear output sits on the output's
    limit toward V- and toward V+ at each input sample (module docstring)."""
    c, uu = ls.column(), np.asarray(u, dtype=float)[None, :]
    ju = c.j * uu
    out = []
    for level, r in ((lo, rsat[1]), (hi, rsat[0])):
        vo = reach(level[:, None], r[:, None], c.y, ju)
        out.append((1.0 + c.ro * c.y) * vo - c.ro * ju)
    return out[0], out[1]


def _output(ls: LoopState, x: Array, u: Array, iout: Array) -> tuple[Array, npt.NDArray[np.bool_]]:
    """Output voltage (from the reference) for states x (P, N) and inputs u (1, N), and
    where the output current is at its limit."""
    lsc, cap = ls.column(), iout[:, None]
    io = lsc.io_linear(x, u)
    lim = np.abs(io) > cap
    vo = np.where(lim, lsc.vo_limited(np.sign(io) * cap, u), lsc.vo_linear(x, u))
    return vo, lim


def _run(ls: LoopState, u: Array, h: float, sr: Array, iout: Array,
         clamps: tuple[Array, Array], light: tuple[Array, Array], settle: int,
         max_periods: int, x0: Array, watch: npt.NDArray[np.bool_]) -> tuple[Array, int]:
    """Step the state period by period until settled, then over the analysed periods.

    ``u`` holds one period of input samples plus the first of the next; ``clamps``
    (steps, P) each the clamps on x after each step; ``light`` (P,) each the light-load
    limits, which also hold x while the output current is limited (the output does not
    follow x then; as in the macromodel, the internal node stops at the light-load
    level instead of winding up). Settled: after
    at least ``settle`` periods, no sample moved by more than 1e-4 of the part's
    amplitude (plus 1e-9 of its swing) from one period to the next (parts in ``watch``;
    the others have no prediction). Returns x over the
    analysed periods, from the sample before them on: (P, ANALYSED_PERIODS·steps + 2),
    and the number of periods run before them.
    """
    lam, mu = ls.lam, ls.mu
    lo, hi = clamps
    lo_light, hi_light = light
    phi1, phi2 = _phi(lam * h)
    e_lin, a1_lin, a2_lin = np.exp(-lam * h), mu * h * phi1, mu * h * phi2
    lam_c, mu_c, nu_c = ls.limited_coeffs(iout)
    phc1, phc2 = _phi(lam_c * h)
    e_c, a1_c, a2_c, n1_c = np.exp(-lam_c * h), mu_c * h * phc1, mu_c * h * phc2, nu_c * h * phc1
    dmax = sr * h
    k_io, j_io = ls.y / (1 + ls.ro * ls.y), ls.j / (1 + ls.ro * ls.y)
    any_limit = bool(np.any(np.isfinite(iout) & (ls.y > 0)))
    steps = len(u) - 1
    du = np.diff(u)

    # the input's share of each step, and of the output current, for every sample at once
    drive_lin = a1_lin[None, :] * u[:-1, None] + a2_lin[None, :] * du[:, None]
    drive_c = a1_c[None, :] * u[:-1, None] + a2_c[None, :] * du[:, None]
    io_u = j_io[None, :] * u[:-1, None]
    lo_d, hi_d = -dmax, dmax
    x1, tmp = np.empty_like(x0), np.empty_like(x0)

    def period(x: Array, keep: Array) -> Array:
        for i in range(steps):
            keep[i] = x
            np.multiply(e_lin, x, out=x1)
            np.add(x1, drive_lin[i], out=x1)
            lim = None
            if any_limit:
                io = k_io * x - io_u[i]
                lim = np.abs(io) > iout
                if lim.any():
                    xc = e_c * x + drive_c[i] + np.sign(io) * n1_c
                    np.copyto(x1, xc, where=lim)
                else:
                    lim = None
            np.subtract(x1, x, out=tmp)  # the step, capped by the slew rate
            np.minimum(tmp, hi_d, out=tmp)
            np.maximum(tmp, lo_d, out=tmp)
            x = x + tmp
            np.minimum(x, hi[i], out=x)  # and the state held within the swing
            np.maximum(x, lo[i], out=x)
            if lim is not None:
                np.copyto(x, np.clip(x, lo_light, hi_light), where=lim)
        return x

    x, p = x0, len(x0)
    cur, prev = np.empty((steps, p)), np.empty((steps, p))
    done = 0
    while True:
        x = period(x, cur)
        done += 1
        if done >= settle:
            moved = np.max(np.abs(cur - prev), axis=0) if done > 1 else np.full(p, np.inf)
            size = np.max(np.abs(cur), axis=0)
            still = (moved > 1e-4 * size + 1e-9 * (hi_light - lo_light)) & watch
            if not still.any() or done >= max_periods:
                break
        cur, prev = prev, cur
    last = cur[-1].copy()
    keep = np.empty((ANALYSED_PERIODS * steps + 2, p))
    keep[0] = last
    for k in range(ANALYSED_PERIODS):
        x = period(x, keep[1 + k * steps: 1 + (k + 1) * steps])
    keep[-1] = x
    return keep.T.copy(), done


def waveforms(req: Requirement, parts: Any, freq_hz: float | None = None, *,
              steps: int = 512) -> Waves:
    """Predicted waveforms of the requirement's stage for every part (a DataFrame by label)."""
    st = stage(req)
    return simulate(st, parts, Drive.of(req, st, freq_hz), steps=steps)


@dataclass(frozen=True)
class Candidates:
    """Waveforms of the best candidates for a stage, in the order ``pick`` ranks them."""

    waves: Waves
    status: tuple[str, ...]  # "accepted", "unverified" or "rejected: check, check"


def candidate_waveforms(req: Requirement, parts: Any, n: int = 4,
                        freq_hz: float | None = None, *, by: str = "margin",
                        strict: bool = False, steps: int = 512) -> Candidates:
    """Waveforms of the first ``n`` candidates: the accepted parts in rank order
    (picker.design.rank.select), then the unverified ones, then the nearest misses.

    One vectorised simulation over all of them (20 candidates take a few tens of ms;
    scripts that time it call this function).
    """
    from picker.design.rank import select

    sel = select(parts, req, by=by, strict=strict, misses=0)  # type: ignore[arg-type]
    chosen = ([(e, "accepted") for e in sel.accepted[:n]]
              + [(e, "unverified") for e in sel.unverified[:n]]
              + [(e, "rejected: " + ", ".join(e.fails)) for e in sel.rejected[:n]])[:n]
    rows = [e.row for e, _ in chosen]
    st = stage(req)
    waves = simulate(st, sel.parts.take(rows), Drive.of(req, st, freq_hz), steps=steps)
    return Candidates(waves, tuple(s for _, s in chosen))


__all__ = ["COLUMNS", "LIMITS", "NEEDED", "Candidates", "Drive", "Limit", "Waves",
           "candidate_waveforms", "simulate", "waveforms"]
