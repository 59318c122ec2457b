"""Checks of accuracy: closed-loop gain error, DC output offset and output noise.

All three refer errors to the output of the stage, per part, vectorised.

gain_accuracy: the exact closed-loop gain of picker.design.circuit (single-pole A(s),
Rin, Ro, source, load, network) at DC and at the top frequency; the error is
| |G|/G - 1 | against the requested gain G, and the verdict is the worse of the two
against the budget gain error / margin.

offset (worst case over signs; ideal op-amp around the network, e.g. Franco, Design
with Operational Amplifiers and Analog Integrated Circuits, 4th ed., ch. 5, from
memory): Vos and its drift appear at the output times the noise gain NG; the bias
current of the inverting input flows through rf; that of the non-inverting input
through zp, times NG. With Ib± = Ib ± Ios/2:

    Vout = NG·(|Vos| + |drift|·ΔT) + |Ib|·|rf - zp·NG| + Ios/2·(rf + zp·NG)

noise (white densities at the output, added in power; same text, ch. 7):

    en·NG,  in·rf,  in·zp·NG,  √(4kT·rf),  √(4kT·rg)·rf/rg,  √(4kT·zp)·NG

integrated over the closed loop's noise bandwidth π/2·f_cl (single pole, f_cl the
closed-loop pole of the exact loop); k = 1.380649e-23 J/K (exact, SI 2019, CODATA),
T the hottest ambient. The load and Ro add nothing worth counting.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import numpy.typing as npt

from picker.circuit.opamp import Loop, closed_loop_pole_hz, loop, open_loop
from picker.design.checks import Array, CheckResult, Parts, result, select_where
from picker.design.coded import Words
from picker.design.spec import Spec
from picker.stages import Stage

BOLTZMANN = 1.380649e-23  # J/K, exact since the 2019 SI redefinition (CODATA 2018)


def _loop(p: Parts, st: Stage) -> Loop:
    """The loop coefficients of these parts in this stage (shared by gain and noise)."""
    key = ("loop", st.kp, st.zp, st.kg, st.rg, st.rf, st.load)
    return p.memo(key, lambda: loop(st, p["rin_ohm"], p["rout_ohm"]))  # type: ignore[no-any-return]


_GAIN_NOTES = ("", "Ro unknown, taken as 0", "Rin unknown, taken as ∞",
               "Ro unknown, taken as 0; Rin unknown, taken as ∞")


def _gains(p: Parts, st: Stage, f: float) -> tuple[Array, Array]:
    """|G| at DC and at f, per part (see gain_accuracy).

    Written with in-place operations: at a million parts each array is 8 MB, and
    updating one in place moves less memory than writing a new one.
    """
    a0, gbw = p["aol_v_per_v"], p["gbw_hz"]
    lp = _loop(p, st)
    n0, d0 = lp.n0, lp.d0
    with np.errstate(invalid="ignore", divide="ignore"):
        num = np.multiply(a0, _same(lp.n1))
        num += n0
        den = np.multiply(a0, _same(lp.d1))
        den += d0
        g_dc = np.divide(num, den)
        np.abs(g_dc, out=g_dc)
        if not f:
            return g_dc, g_dc
        x = np.divide(f, gbw)
        x *= a0
        n0x = np.multiply(n0, x)
        x *= d0  # now d0·x
        num *= num
        n0x *= n0x
        num += n0x
        den *= den
        x *= x
        den += x
        num /= den
        return g_dc, np.sqrt(num, out=num)


def _same(x: Array) -> Array | float:
    """A coefficient that is the same for every part (a stride-0 broadcast) as a float."""
    return float(x[0]) if x.ndim == 1 and len(x) and x.strides == (0,) else x


def _errors(p: Parts, st: Stage, f: float) -> tuple[Array, Array]:
    """Relative gain errors | |G|/G - 1 | at DC and at f, per part."""
    out = []
    for g in _gains(p, st, f):
        e = np.multiply(g, 1 / st.gain)
        e -= 1
        out.append(np.abs(e, out=e))
    return out[0], out[1]


def gain_accuracy(p: Parts, s: Spec) -> CheckResult:
    """Worse of the exact gain errors at DC and at the top frequency vs the budget.

    G = (n0 + n1·A)/(d0 + d1·A) with A = A0/(1 + jx), x = f·A0/GBW; multiplying
    through by (1 + jx), |G(f)| = |num + j·n0·x| / |den + j·d0·x| with num = n0 + n1·A0,
    den = d0 + d1·A0 (the DC gain is num/den): real arithmetic only. The details for
    ``picker why`` are computed again when read, so a pick keeps no extra arrays.
    """
    st, req = s.stage, s.requirement
    f = req.freq_hz
    err_dc, err_f = _errors(p, st, f)
    need = s.budget.allowed
    with np.errstate(invalid="ignore"):
        has = select_where(err_dc > need, np.maximum(err_dc, err_f), err_dc)
    del err_dc, err_f
    sign = 1.0 if st.ideal_gain >= 0 else -1.0

    def phase() -> Array:
        g = _loop(p, st).gain(open_loop(p["aol_v_per_v"], p["gbw_hz"], f))
        return np.degrees(np.angle(g * sign))  # type: ignore[no-any-return]

    note = Words(lambda: np.isnan(p["rout_ohm"]).view(np.int8)
                 + 2 * np.isnan(p["rin_ohm"]).view(np.int8), _GAIN_NOTES)
    detail = {"error_dc": lambda: _errors(p, st, f)[0], "error_f": lambda: _errors(p, st, f)[1],
              "gain_dc": lambda: _gains(p, st, f)[0], "gain_f": lambda: _gains(p, st, f)[1],
              "phase_f_deg": phase, "f_closed_loop": lambda: _pole(p, st)}
    return result("gain_accuracy", "ratio", "<=", need, has, detail, note,
                  ("aol_v_per_v", "gbw_hz"))


def _pole(p: Parts, st: Stage) -> Array:
    """The closed loop's pole per part (Hz)."""
    return closed_loop_pole_hz(_loop(p, st), p["aol_v_per_v"], p["gbw_hz"])


def _terms(terms: list[tuple[float, Array]], n: int) -> tuple[Array, npt.NDArray[np.bool_]]:
    """Σ coef·|x| over terms with a non-zero coefficient, and where any x is unknown.

    An unknown term adds nothing to the sum (it is at least the known part).
    """
    parts = []
    for coef, x in terms:
        if coef != 0:
            t = np.abs(x)
            t *= coef
            parts.append(t)
    if not parts:
        return np.zeros(n), np.zeros(n, dtype=bool)
    total = parts[0] + parts[1] if len(parts) > 1 else parts[0].copy()
    for t in parts[2:]:
        total += t
    unknown = np.isnan(total)  # NaN when any term is unknown
    rows = np.flatnonzero(unknown)
    if len(rows):
        total[rows] = sum(np.fmax(t[rows], 0.0) for t in parts)  # fmax drops NaN
    return total, unknown


def _partial(name: str, need: float, known: Array, unknown: npt.NDArray[np.bool_],
             detail: dict[str, Any], note: str, fields: tuple[str, ...]) -> CheckResult:
    """Fail on what is known; otherwise unknown while any needed parameter is missing.

    ``known`` becomes ``has`` (changed in place)."""
    over = known > need
    has = known
    has[unknown & ~over] = np.nan
    notes = Words(lambda: (unknown & over).view(np.int8), ("", note))
    return result(name, "voltage", "<=", need, has, detail, notes, fields)  # type: ignore[arg-type]


def offset(p: Parts, s: Spec) -> CheckResult:
    """Worst-case DC output offset against offset_max / margin (formula above)."""
    st, req = s.stage, s.requirement
    assert req.offset_max_v is not None
    ng, rf, zp, dt = s.noise_gain, st.rf, st.zp, req.drift_span_c
    parts = {
        "vos_v": (ng, p["vos_v"]),
        "drift_v_per_c": (ng * dt, p["drift_v_per_c"]),
        "ib_a": (abs(rf - zp * ng), p["ib_a"]),
        "ios_a": ((rf + zp * ng) / 2, p["ios_a"]),
    }
    known, unknown = _terms(list(parts.values()), len(p))
    detail = {f"{k.split('_')[0]}_out": (lambda c=c, x=x: c * np.abs(x))
              for k, (c, x) in parts.items()}
    needed = tuple(k for k, (c, _) in parts.items() if c != 0)
    return _partial("offset", req.offset_max_v / req.margin, known, unknown, detail,
                    "at least this; some terms unknown", needed)


def noise(p: Parts, s: Spec) -> CheckResult:
    """Output RMS noise over the closed-loop noise bandwidth against noise_max / margin."""
    st, req = s.stage, s.requirement
    assert req.noise_max_v is not None
    ng, rf, zp, rg = s.noise_gain, st.rf, st.zp, st.rg
    four_kt = 4 * BOLTZMANN * req.temp_max_k
    r_density2 = four_kt * (rf + (0.0 if math.isinf(rg) else rf**2 / rg) + zp * ng**2)
    en, cur = p["en_v_per_rthz"], p["in_a_per_rthz"]
    i_gain2 = rf**2 + (zp * ng) ** 2
    enbw = _pole(p, st)
    enbw *= math.pi / 2  # noise bandwidth of a single pole
    terms2 = [(ng**2, en * en), (i_gain2, cur * cur)]
    known2, unknown = _terms(terms2, len(p))
    no_bw = np.isnan(enbw)
    total = known2  # √((known2 + resistor density²)·ENBW), in place
    total += r_density2
    total *= enbw
    with np.errstate(invalid="ignore"):
        np.sqrt(total, out=total)
    detail = {"en_out": lambda: ng * en, "in_out": lambda: math.sqrt(i_gain2) * cur,
              "r_out": lambda: np.full(len(p), math.sqrt(r_density2)),
              "f_closed_loop": lambda: _pole(p, st), "enbw": lambda: math.pi / 2 * _pole(p, st)}
    unknown |= no_bw
    total[no_bw] = 0.0
    needed = ("en_v_per_rthz",) + (("in_a_per_rthz",) if i_gain2 > 0 else ()) + ("gbw_hz",)
    return _partial("noise", req.noise_max_v / req.margin, total, unknown, detail,
                    "at least this; some terms unknown", needed)


__all__ = ["BOLTZMANN", "gain_accuracy", "noise", "offset"]
