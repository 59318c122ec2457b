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

import numpy as np
import numpy.typing as npt

from picker.design.checks import Array, CheckResult, Parts, result
from picker.design.circuit import closed_loop_pole_hz, loop, open_loop
from picker.design.spec import Spec

BOLTZMANN = 1.380649e-23  # J/K, exact since the 2019 SI redefinition (CODATA 2018)


def gain_accuracy(p: Parts, s: Spec) -> CheckResult:
    """Worse of the exact gain errors at DC and at the top frequency vs the budget."""
    st, req = s.stage, s.requirement
    a0, gbw = p["aol_v_per_v"], p["gbw_hz"]
    lp = loop(st, p["rin_ohm"], p["rout_ohm"])
    g_dc = lp.gain(a0)
    g_f = lp.gain(open_loop(a0, gbw, req.freq_hz))
    with np.errstate(invalid="ignore"):
        err_dc = np.abs(np.abs(g_dc) / st.gain - 1)
        err_f = np.abs(np.abs(g_f) / st.gain - 1)
        need = s.budget.allowed
        has = np.where(err_dc > need, err_dc, np.maximum(err_dc, err_f))
    sign = 1.0 if st.ideal_gain >= 0 else -1.0
    phase = np.degrees(np.angle(g_f * sign))
    ro_note = np.where(np.isnan(p["rout_ohm"]), "Ro unknown, taken as 0", "")
    rin_note = np.where(np.isnan(p["rin_ohm"]), "Rin unknown, taken as ∞", "")
    sep = np.where((ro_note != "") & (rin_note != ""), "; ", "")
    note = np.char.add(np.char.add(ro_note, sep), rin_note)
    detail = {"error_dc": err_dc, "error_f": err_f, "gain_dc": np.abs(g_dc),
              "gain_f": np.abs(g_f), "phase_f_deg": phase,
              "f_closed_loop": closed_loop_pole_hz(lp, a0, gbw)}
    return result("gain_accuracy", "ratio", "<=", need, has, detail, note,
                  ("aol_v_per_v", "gbw_hz"))


def _terms(terms: list[tuple[float, Array]], n: int) -> tuple[Array, npt.NDArray[np.bool_]]:
    """Σ coef·|x| over terms with a non-zero coefficient, and where any x is unknown."""
    total = np.zeros(n)
    unknown = np.zeros(n, dtype=bool)
    for coef, x in terms:
        if coef == 0:
            continue
        unknown |= np.isnan(x)
        total = total + coef * np.nan_to_num(np.abs(x), nan=0.0)
    return total, unknown


def _partial(name: str, need: float, known: Array, unknown: npt.NDArray[np.bool_],
             detail: dict[str, Array], note: str, fields: tuple[str, ...]) -> CheckResult:
    """Fail on what is known; otherwise unknown while any needed parameter is missing."""
    has = np.where(unknown & (known <= need), np.nan, known)
    notes = np.where(unknown & (known > need), note, "")
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
    detail = {f"{k.split('_')[0]}_out": c * np.abs(x) for k, (c, x) in parts.items()}
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
    lp = loop(st, p["rin_ohm"], p["rout_ohm"])
    f_cl = closed_loop_pole_hz(lp, p["aol_v_per_v"], p["gbw_hz"])
    enbw = math.pi / 2 * f_cl
    terms2 = [(ng**2, en**2), (i_gain2, cur**2)]
    known2, unknown = _terms(terms2, len(p))
    with np.errstate(invalid="ignore"):
        total = np.sqrt((known2 + r_density2) * enbw)
    detail = {"en_out": ng * en, "in_out": np.sqrt(i_gain2) * cur,
              "r_out": np.full(len(p), math.sqrt(r_density2)), "f_closed_loop": f_cl,
              "enbw": enbw}
    unknown = unknown | np.isnan(enbw)
    total = np.where(np.isnan(enbw), 0.0, total)
    needed = ("en_v_per_rthz",) + (("in_a_per_rthz",) if i_gain2 > 0 else ()) + ("gbw_hz",)
    return _partial("noise", req.noise_max_v / req.margin, total, unknown, detail,
                    "at least this; some terms unknown", needed)


__all__ = ["BOLTZMANN", "gain_accuracy", "noise", "offset"]
