"""Closed-loop frequency response of a stage: gain (dB) and phase over frequency, per part.

The exact closed-loop gain is picker.circuit.opamp's nodal solution written as a
bilinear function of the open-loop gain, G = (n0 + n1·A)/(d0 + d1·A). With the single
pole A(s) = ωu/(s + ωp), ωu = 2π·GBW, ωp = ωu/A0 (A0 unknown: ωp = 0), multiplying
through by (s + ωp) gives a first-order transfer function

    G(s) = (b1·s + b0)/(a1·s + a0),
    b1 = n0,  b0 = n0·ωp + n1·ωu,  a1 = d0,  a0 = d0·ωp + d1·ωu.

The -3 dB frequency is where |G(jω)|² = |G(0)|²/2:

    2·a0²·(b1²ω² + b0²) = b0²·(a1²ω² + a0²)
    ω² = a0²·b0² / (a1²·b0² − 2·a0²·b1²)

(no -3 dB point, reported as infinity, when the denominator is not positive: the
network's own feed-through keeps the gain above it). Every quantity is an array with
one element per part; the sweep is parts × frequencies.

A stage with capacitors (``Stage.reactive``) is not first order: its loop coefficients
depend on frequency, so the solver is run at every frequency of the sweep,
``G = (n0/A + n1)/(d0/A + d1)`` with ``1/A = 1/A0 + j·f/GBW`` (no infinity for an
unknown A0), and the -3 dB frequency is the first crossing of ``|G(0)|/√2`` on a fine
log grid, refined by bisection (relative width 1e-9).

A part with its phase margin as a follower (``pm_unity_deg``) gets the stability check's
model instead (picker.circuit.loopgain): the two-pole open loop, the load capacitance
behind Ro and the input capacitances, the solver's coefficients as exact polynomials in
s; the response then also carries the loop's phase margin, crossover and peaking.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
import numpy.typing as npt

from picker.circuit.loopgain import Model, closed_loop, margins
from picker.circuit.opamp import Loop, loop
from picker.design.waveform import _labels
from picker.errors import BadRequirement
from picker.stages import Stage, stage

if TYPE_CHECKING:
    from picker.design.requirement import Requirement

Array = npt.NDArray[np.float64]

#: part columns the response reads
COLUMNS: tuple[str, ...] = ("gbw_hz", "aol_v_per_v", "rin_ohm", "rout_ohm", "pm_unity_deg",
                             "cin_diff_f", "cin_cm_f")


@dataclass(frozen=True)
class Transfer:
    """G(s) = (b1·s + b0)/(a1·s + a0), one coefficient per part."""

    b1: Array
    b0: Array
    a1: Array
    a0: Array

    def gain(self, freq_hz: npt.ArrayLike) -> npt.NDArray[np.complex128]:
        """G(j2πf), shape parts × frequencies."""
        s = 2j * np.pi * np.atleast_1d(np.asarray(freq_hz, dtype=float))[None, :]
        c = {k: np.asarray(getattr(self, k))[:, None] for k in ("b1", "b0", "a1", "a0")}
        return (c["b1"] * s + c["b0"]) / (c["a1"] * s + c["a0"])  # type: ignore[no-any-return]

    @property
    def dc(self) -> Array:
        return self.b0 / self.a0  # type: ignore[no-any-return]

    @property
    def f3db(self) -> Array:
        """The -3 dB frequency (|G| = |G(0)|/√2) in Hz; inf where there is none."""
        den = self.a1**2 * self.b0**2 - 2 * self.a0**2 * self.b1**2
        with np.errstate(divide="ignore", invalid="ignore"):
            w2 = np.where(den > 0, self.a0**2 * self.b0**2 / den, np.inf)
        return np.sqrt(w2) / (2 * np.pi)  # type: ignore[no-any-return]


def transfer(st: Stage, aol: npt.ArrayLike, gbw_hz: npt.ArrayLike, rin_ohm: npt.ArrayLike,
             rout_ohm: npt.ArrayLike) -> Transfer:
    """The first-order closed-loop transfer function of ``st`` for every part.

    Exact for a resistive stage (its loop coefficients, from the solver at DC, do not
    depend on frequency); a reactive stage is refused.
    """
    if st.reactive:
        raise BadRequirement(f"the {st.topology} stage has capacitors: its response is not "
                             "first order; use simulate() or response() for its sweep")
    a0 = np.asarray(aol, dtype=float)
    wu = 2 * np.pi * np.asarray(gbw_hz, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        wp = np.where(np.isfinite(a0) & (a0 > 0), wu / a0, 0.0)
    lp = loop(st, rin_ohm, rout_ohm)
    n0, n1, d0, d1 = (np.broadcast_to(v, wu.shape) for v in (lp.n0, lp.n1, lp.d0, lp.d1))
    return Transfer(b1=n0 + 0 * wu, b0=n0 * wp + n1 * wu, a1=d0 + 0 * wu, a0=d0 * wp + d1 * wu)


@dataclass(frozen=True)
class Response:
    """Closed-loop response of one stage for every part."""

    labels: tuple[str, ...]
    freq_hz: float  # the top signal frequency
    freqs: Array  # (F,) sweep, Hz
    gain_db: Array  # (P, F)
    phase_deg: Array  # (P, F), unwrapped from its low-frequency value
    f3db: Array  # (P,) Hz (inf: none)
    dc_gain_db: Array  # (P,)
    gain_at_f: Array  # (P,) dB at freq_hz
    phase_at_f: Array  # (P,) degrees at freq_hz, in (-180, 180]
    known: npt.NDArray[np.bool_]  # (P,) False: GBW unknown
    phase_margin: Array  # (P,) degrees (NaN: no follower phase margin given)
    crossover: Array  # (P,) Hz
    peaking: Array  # (P,) dB

    def summary(self, i: int) -> dict[str, Any]:
        """The JSON record of part ``i`` (Hz, dB, degrees)."""
        def num(v: float) -> float | None:
            return None if not math.isfinite(v) else float(v)
        return {"part": self.labels[i], "f3db": num(self.f3db[i]),
                "gain_at_f": num(self.gain_at_f[i]), "phase_at_f": num(self.phase_at_f[i]),
                "phase_margin_deg": num(self.phase_margin[i]),
                "crossover_hz": num(self.crossover[i]), "peaking_db": num(self.peaking[i])}

    def index(self, label: str) -> int:
        return self.labels.index(label)


def _column(parts: Mapping[str, Any], name: str, n: int) -> Array:
    if name in parts:
        return np.asarray(parts[name], dtype=float).reshape(n)
    return np.full(n, np.nan)


def sweep(freq_hz: float, f3db: Array, points_per_decade: int = 50) -> Array:
    """A log frequency axis spanning the top frequency and every finite -3 dB point,
    two decades below the lowest and two above the highest."""
    marks = [freq_hz, *[float(v) for v in f3db[np.isfinite(f3db) & (f3db > 0)]]]
    lo = math.floor(math.log10(min(marks))) - 2
    hi = math.ceil(math.log10(max(marks))) + 2
    return np.logspace(lo, hi, (hi - lo) * points_per_decade + 1)


def _inverse_a(a0: Array, gbw: Array, f: float) -> npt.NDArray[np.complex128]:
    """1/A(j2πf) = 1/A0 + j·f/GBW, 1/A0 = 0 for an unknown A0."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.fmax(1.0 / a0, 0.0) + 1j * f / gbw  # type: ignore[no-any-return]


def _solved(lp: Loop, inv_a: npt.NDArray[np.complex128]) -> npt.NDArray[np.complex128]:
    with np.errstate(divide="ignore", invalid="ignore"):
        return (lp.n0 * inv_a + lp.n1) / (lp.d0 * inv_a + lp.d1)  # type: ignore[no-any-return]


def solved_gain(st: Stage, cols: Mapping[str, Array], gbw: Array,
                freqs: npt.ArrayLike) -> npt.NDArray[np.complex128]:
    """G(j2πf) by the solver at every frequency, shape parts × frequencies."""
    fs = np.atleast_1d(np.asarray(freqs, dtype=float))
    out = np.empty((len(gbw), len(fs)), dtype=complex)
    for k, f in enumerate(fs):
        lp = loop(st, cols["rin_ohm"], cols["rout_ohm"], freq_hz=float(f))
        out[:, k] = _solved(lp, _inverse_a(cols["aol_v_per_v"], gbw, float(f)))
    return out


def _f3db_solved(st: Stage, cols: Mapping[str, Array], gbw: Array, freq_hz: float,
                 dc: npt.NDArray[np.complex128]) -> Array:
    """The first frequency where |G| falls to |G(0)|/√2, per part (inf: none found)."""
    hi_dec = math.ceil(math.log10(max(float(np.max(gbw)), freq_hz))) + 3
    grid = np.logspace(math.floor(math.log10(freq_hz)) - 4, hi_dec, (hi_dec + 4) * 20 + 1)
    target = np.abs(dc) / math.sqrt(2)
    below = np.abs(solved_gain(st, cols, gbw, grid)) < target[:, None]
    out = np.full(len(gbw), np.inf)
    for i in np.flatnonzero(below.any(axis=1)):
        k = int(np.argmax(below[i]))
        if k == 0:
            out[i] = grid[0]
            continue
        one = {c: v[i:i + 1] for c, v in cols.items()}
        lo, hi = grid[k - 1], grid[k]
        while hi / lo - 1 > 1e-9:
            mid = math.sqrt(lo * hi)
            g = abs(solved_gain(st, one, gbw[i:i + 1], [mid])[0, 0])
            lo, hi = (mid, hi) if g >= target[i] else (lo, mid)
        out[i] = math.sqrt(lo * hi)
    return out


def _f3db_model(st: Stage, m: Model, freq_hz: float, dc: npt.NDArray[np.complex128]) -> Array:
    """The first frequency where |G| falls to |G(0)|/√2 with the two-pole model, per
    part (a log grid, then bisection in log f; inf: none found)."""
    hi_dec = math.ceil(math.log10(max(float(np.max(m.gbw)), freq_hz))) + 3
    grid = np.logspace(math.floor(math.log10(freq_hz)) - 4, hi_dec, (hi_dec + 4) * 20 + 1)
    target = np.abs(dc) / math.sqrt(2)
    below = np.abs(closed_loop(st.circuit, m.column(), grid[None, :])) < target[:, None]
    found = below.any(axis=1)
    k = np.argmax(below, axis=1)
    lo = np.log(grid[np.maximum(k - 1, 0)])
    hi = np.log(grid[k])
    for _ in range(40):
        mid = 0.5 * (lo + hi)
        under = np.abs(closed_loop(st.circuit, m, np.exp(mid))) < target
        lo, hi = np.where(under, lo, mid), np.where(under, mid, hi)
    out = np.where(k == 0, grid[0], np.exp(0.5 * (lo + hi)))
    return np.where(found, out, np.inf)  # type: ignore[no-any-return]


def simulate(st: Stage, parts: Mapping[str, Any], freq_hz: float,
             labels: tuple[str, ...] | None = None, freqs: npt.ArrayLike | None = None) -> Response:
    """The closed-loop response of ``st`` for every part in ``parts`` (columns of COLUMNS)."""
    n = len(np.asarray(parts["gbw_hz"]).reshape(-1))
    if labels is None:
        labels = _labels(parts, n)
    cols = {c: _column(parts, c, n) for c in COLUMNS}
    known = np.isfinite(cols["gbw_hz"]) & (cols["gbw_hz"] > 0)
    gbw = np.where(known, cols["gbw_hz"], 1.0)
    nan = np.where(known, 0.0, np.nan)
    two_pole = bool(np.isfinite(cols["pm_unity_deg"]).all())
    none = np.full(n, np.nan)
    mg_pm, mg_fc, mg_peak = none, none, none
    if two_pole:  # the stability check's model (module docstring)
        m = Model.of(cols["aol_v_per_v"], gbw, cols["pm_unity_deg"], cols["rin_ohm"],
                     cols["rout_ohm"], cols["cin_diff_f"], cols["cin_cm_f"])
        mg = margins(st.circuit, m)
        mg_pm, mg_fc, mg_peak = mg.pm_deg + nan, mg.fc_hz + nan, mg.peaking_db + nan
        dc = closed_loop(st.circuit, m, np.zeros(n))
        f3 = _f3db_model(st, m, freq_hz, dc) + nan
        axis = sweep(freq_hz, f3) if freqs is None else np.asarray(freqs, dtype=float)
        g = closed_loop(st.circuit, m.column(), axis[None, :])
        at_f = closed_loop(st.circuit, m, np.full(n, freq_hz))
    elif st.reactive:  # not first order: the solver at every frequency
        dc = solved_gain(st, cols, gbw, [0.0])[:, 0]
        f3 = _f3db_solved(st, cols, gbw, freq_hz, dc) + nan
        axis = sweep(freq_hz, f3) if freqs is None else np.asarray(freqs, dtype=float)
        g = solved_gain(st, cols, gbw, axis)
        at_f = solved_gain(st, cols, gbw, [freq_hz])[:, 0]
    else:
        tf = transfer(st, cols["aol_v_per_v"], gbw, cols["rin_ohm"], cols["rout_ohm"])
        dc = tf.dc.astype(complex)
        f3 = tf.f3db + nan
        axis = sweep(freq_hz, f3) if freqs is None else np.asarray(freqs, dtype=float)
        g = tf.gain(axis)
        at_f = tf.gain([freq_hz])[:, 0]
    with np.errstate(divide="ignore"):
        db = 20 * np.log10(np.abs(g)) + nan[:, None]
        at_db = 20 * np.log10(np.abs(at_f)) + nan
        dc_db = 20 * np.log10(np.abs(dc)) + nan
    # phase relative to the ideal stage (an inverting stage's 180° taken out), the
    # convention of the phase check (picker.checks.gain.phase_deg): -7°, not +173°
    sign = 1.0 if st.ideal_gain >= 0 else -1.0
    phase = np.degrees(np.unwrap(np.angle(g * sign), axis=1)) + nan[:, None]
    return Response(labels=labels, freq_hz=freq_hz, freqs=axis, gain_db=db, phase_deg=phase,
                    f3db=f3, dc_gain_db=dc_db, gain_at_f=at_db,
                    phase_at_f=np.degrees(np.angle(at_f * sign)) + nan, known=known,
                    phase_margin=mg_pm, crossover=mg_fc, peaking=mg_peak)


def response(req: Requirement, parts: Any, freq_hz: float | None = None,
             freqs: npt.ArrayLike | None = None) -> Response:
    """Closed-loop response of the requirement's stage for every part (a DataFrame by label)."""
    return simulate(stage(req), parts, freq_hz or req.freq_hz, freqs=freqs)


__all__ = ["COLUMNS", "Response", "Transfer", "response", "simulate", "solved_gain", "sweep",
           "transfer"]
