"""Checks of DC and noise accuracy: output offset and output noise (the gain's own
error and phase are in picker.checks.gain).

Both refer errors to the output of the stage, per part, vectorised.

offset (worst case over signs; ideal op-amp around the network, e.g. Franco, Design
with Operational Amplifiers and Analog Integrated Circuits, 4th ed., ch. 5, from
memory): Vos and its drift appear at the output times the noise gain NG; the bias
current of the inverting input flows through rf; that of the non-inverting input
through zp, times NG. With Ib± = Ib ± Ios/2 the worst case is ``OFFSET.formula``,
evaluated at both ends of the temperature range: Ib and Ios are the 25 °C figures scaled
by 2^((T - 25 °C)/T2), T2 the part's doubling interval (``ib_double_c``) or, when blank,
its input technology's default (picker.fields.TECH_IB_DOUBLE_C, printed as assumed).

noise (white densities at the output, added in power; same text, ch. 7):

    en·NG,  in·rf,  in·zp·NG,  √(4kT·rf),  √(4kT·rg)·rf/rg,  √(4kT·zp)·NG

integrated over the closed loop's noise bandwidth π/2·f_cl (single pole, f_cl the
closed-loop pole of the exact loop); k = 1.380649e-23 J/K (exact, SI 2019, CODATA),
T the hottest ambient. The load and Ro add nothing worth counting.

An AC-coupled stage (picker.design.coupling) reads its reduction as in the signal band
(coupling capacitors short: zp = Rs‖Rb, the bias resistor to the decoupled bias node) for
the noise, and as at DC (capacitors open: zp = Rb + the divider's Thévenin resistance,
rg open behind its capacitor, so NG = 1) for the offset (``Stage.offset_zp``,
``Stage.dc_noise_gain``). Below its corners the coupling network adds the stage's
``lf_noise_v2`` (kT/C of each capacitor, picker.design.coupling) times NG² in power.

rail ripple (``--ripple``, peak Vr at f_r): taken as an input-referred source through
the part's DC power-supply rejection, so at the output ``Vr·10^(-PSRR/20)·NG`` (peak).
It adds to the offset as a peak and to the noise as an RMS, ``peak/√2``, in power
(a sine uncorrelated with the noise). The one PSRR figure is used as the datasheet
gives it; the model leaves out PSRR's roll-off with frequency (it is the DC figure at
f_r, optimistic at high ripple frequencies). With ripple given, offset and noise need
``psrr_db``; an unknown PSRR adds nothing to the lower bound that decides a failure.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

import numpy as np
import numpy.typing as npt

from picker.checks import Check
from picker.checks.core import (
    ASSUMED,
    Array,
    CheckResult,
    Coded,
    Parts,
    result,
    unknown_unless_failing,
)
from picker.checks.gain import pole
from picker.design.requirement import T_REF_C
from picker.design.spec import Explained
from picker.fields import TECH_IB_DOUBLE_C
from picker.quantities import fmt

if TYPE_CHECKING:
    from picker.design.spec import Spec

BOLTZMANN = 1.380649e-23  # J/K, exact since the 2019 SI redefinition (CODATA 2018)



def _sum_known(terms: list[tuple[float, Array]], n: int) -> Array:
    """Σ coef·|x| over the terms with a non-zero coefficient; an unknown x adds nothing
    (the sum is then a lower bound: a part that fails on it fails for sure).

    In place, one scratch array: at a million parts each pass moves 8 MB."""
    total = np.zeros(n)
    scratch = np.empty(n)
    for coef, x in terms:
        if coef != 0:
            np.abs(x, out=scratch)
            scratch *= coef
            np.fmax(scratch, 0.0, out=scratch)  # NaN (unknown) -> 0
            total += scratch
    return total


def ripple_out(p: Parts, s: Spec) -> Array:
    """Rail ripple at the output per part, V peak: Vr·10^(-PSRR/20)·NG (module
    docstring); 0 without ``--ripple`` or where PSRR is unknown (a lower bound)."""
    if s.requirement.ripple is None:
        return np.zeros(len(p))
    vr = s.requirement.ripple[0]
    with np.errstate(over="ignore"):
        out = vr * s.noise_gain * np.power(10.0, -p["psrr_db"] / 20)
    return np.nan_to_num(out, nan=0.0)  # type: ignore[no-any-return]


#: What the ripple model leaves out, printed with every ripple term.
RIPPLE_LEAVES_OUT = "model leaves out: PSRR's roll-off with frequency (the DC figure is used)"


def _ripple_explain(s: Spec, what: str) -> list[Explained]:
    """The ripple row of offset or noise (none without --ripple)."""
    if s.requirement.ripple is None:
        return []
    vr, f_r = s.requirement.ripple
    peak = vr * s.noise_gain
    scale, unit = (1.0, "peak") if what == "offset" else (1 / math.sqrt(2), "RMS")
    return [Explained(
        f"{what}_ripple", f"rail ripple at the output before PSRR ({unit})", peak * scale,
        "voltage", "Vr·10^(-PSRR/20)·NG" + (" (peak, added)" if what == "offset"
                                            else "/√2 (RMS, added in power)"),
        f"{fmt(vr, 'voltage', 4)} × {s.noise_gain:.4g}"
        + ("" if what == "offset" else " / √2")
        + f" = {fmt(peak * scale, 'voltage', 4)} at {fmt(f_r, 'frequency')}, times "
        f"10^(-PSRR/20) per part; {RIPPLE_LEAVES_OUT}")]


def _ripple_detail(s: Spec, p: Parts, rms: bool) -> str:
    """The part's ripple term (one part), or '' without --ripple."""
    if s.requirement.ripple is None:
        return ""
    vr = s.requirement.ripple[0]
    psrr = float(p["psrr_db"][0])
    if math.isnan(psrr):
        return "; ripple unknown (no PSRR)"
    out = float(ripple_out(p, s)[0]) / (math.sqrt(2) if rms else 1.0)
    return (f"; ripple {fmt(vr, 'voltage', 4)} × 10^(-{psrr:g}/20) × NG {s.noise_gain:.4g}"
            + (" / √2" if rms else "") + f" = {fmt(out, 'voltage', 4)}"
            + (" RMS" if rms else " peak") + f" ({RIPPLE_LEAVES_OUT})")


def _ripple_needs(s: Spec) -> tuple[str, ...]:
    return ("psrr_db",) if s.requirement.ripple is not None else ()


def _offset_coefs(s: Spec) -> dict[str, float]:
    """How much of each part value reaches the output offset in this stage (field -> V/unit)."""
    st, req = s.stage, s.requirement
    ng, rf, zp = st.dc_noise_gain, st.rf, st.offset_zp  # as at DC (coupling capacitors open)
    return {"vos_v": ng, "drift_v_per_c": ng * req.drift_span_c,
            "ib_a": abs(rf - zp * ng), "ios_a": (rf + zp * ng) / 2}


def _offset_terms(p: Parts, s: Spec) -> dict[str, tuple[float, Array]]:
    """Each offset term as (coefficient, the parts' column)."""
    return {f: (c, p[f]) for f, c in _offset_coefs(s).items()}


def _ends(s: Spec) -> tuple[float, ...]:
    """The temperatures the offset is evaluated at: both ends of ``--temp``, °C."""
    req = s.requirement
    return tuple(dict.fromkeys((req.temp_min_c, req.temp_max_c)))


def _warm(s: Spec) -> bool:
    """Whether the bias currents are needed away from 25 °C (a range beyond 25 °C that
    moves an Ib or Ios term)."""
    c = _offset_coefs(s)
    return any(t != T_REF_C for t in _ends(s)) and (c["ib_a"] != 0 or c["ios_a"] != 0)


def _doubling(p: Parts) -> tuple[Array, npt.NDArray[np.bool_]]:
    """Per part the Ib doubling interval (°C; the part's own, else its input technology's
    default, picker.fields.TECH_IB_DOUBLE_C) and where the default was taken."""
    own = p["ib_double_c"]
    assumed = np.isnan(own)
    return np.where(assumed, p["ib_tech_double_c"], own), assumed


def _ib_factor(t2: Array, t_c: float) -> Array:
    """Ib(T)/Ib(25 °C) = 2^((T - 25 °C)/T2) per part (NaN: no interval known)."""
    if t_c == T_REF_C:
        return np.ones(len(t2))
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        return np.exp2((t_c - T_REF_C) / t2)  # type: ignore[no-any-return]


def _offset_ends(p: Parts, s: Spec) -> list[Array]:
    """Worst-case output offset at each end of ``--temp``, unknown terms counted as 0 (a
    lower bound): NG·(Vos + drift·|T - 25 °C|), plus the Ib and Ios terms scaled to T.
    The sums over the parts are made once and combined per end."""
    terms = _offset_terms(p, s)
    n, ng = len(p), s.stage.dc_noise_gain
    vos = _sum_known([(ng, terms["vos_v"][1])], n)
    drift = _sum_known([(ng, terms["drift_v_per_c"][1])], n)
    bias = _sum_known([terms["ib_a"], terms["ios_a"]], n)
    t2 = _doubling(p)[0] if _warm(s) else None
    out = []
    for t in _ends(s):
        total = vos + abs(t - T_REF_C) * drift
        if t2 is None or t == T_REF_C:
            total += bias
        else:
            total += np.nan_to_num(_ib_factor(t2, t), nan=0.0) * bias
        out.append(total)
    return out


def _offset(p: Parts, s: Spec) -> CheckResult:
    """Worst-case DC output offset at either end of the temperature range against
    offset_max / margin (formula in the module docstring; Ib and Ios at temperature)."""
    assert s.requirement.offset_max_v is not None
    ends = _offset_ends(p, s)
    total = ends[0] if len(ends) == 1 else np.maximum(ends[0], ends[1])
    ripple = ripple_out(p, s)
    total = total + ripple
    note: Coded | str = ""
    missing = np.zeros(len(p), dtype=bool)
    if _warm(s):
        t2, assumed = _doubling(p)
        terms = _offset_terms(p, s)
        moves = _sum_known([terms["ib_a"], terms["ios_a"]], len(p)) > 0
        missing = np.isnan(t2) & moves  # Ib or Ios counts, and how it moves is unknown
        used = assumed & ~np.isnan(t2) & moves
        words = ("",) + tuple(f"{ASSUMED}Ib, Ios x2 every {v:g} °C (input technology's "
                              "default)" for v in np.unique(t2[used]).tolist())
        codes = np.zeros(len(p), dtype=np.int8)
        for k, v in enumerate(np.unique(t2[used]).tolist(), start=1):
            codes[used & (t2 == v)] = k
        note = Coded(codes, words)
    r = result("offset", "voltage", "<=", s.requirement.offset_max_v / s.margin, total,
               note=note)
    if s.requirement.ripple is not None:
        r = r.with_figures(ripple_v=ripple)
    return unknown_unless_failing(r, missing)


def _offset_needs(s: Spec) -> tuple[str, ...]:
    return tuple(f for f, c in _offset_coefs(s).items() if c != 0) + _ripple_needs(s)


def _limit_explain(name: str, title: str, limit: float | None, m: float,
                   formula: str, extra: str) -> list[Explained]:
    assert limit is not None
    return [Explained(name, title, limit / m, "voltage", formula,
                      f"{fmt(limit, 'voltage', 4)} / {m:g} = {fmt(limit / m, 'voltage', 4)}"
                      f"{extra}")]


def _offset_explain(s: Spec) -> list[Explained]:
    req = s.requirement
    rows = _limit_explain("offset", "allowed output offset", req.offset_max_v, s.margin,
                          OFFSET.formula, f" (ΔT = {req.drift_span_c:g} °C)")
    ends = " and ".join(f"{t:g} °C" for t in _ends(s))
    defaults = ", ".join(f"{w} {v:g} °C" for w, v in TECH_IB_DOUBLE_C)
    rows.append(Explained(
        "ib_temperature", "bias currents at temperature", None, "temperature",
        "Ib(T) = Ib(25 °C)·2^((T - 25 °C)/T2), the same for Ios; T2 = ib_double_c, or the "
        "input technology's default (printed as assumed)",
        f"evaluated at {ends}; defaults by tech: {defaults}"))
    return rows + _ripple_explain(s, "offset")


def _offset_detail(s: Spec, p: Parts, i: int) -> str:
    one = p.take([i])
    terms = _offset_terms(one, s)
    at = _offset_ends(one, s)
    worst = max(zip(_ends(s), at, strict=True), key=lambda e: float(e[1][0]))[0]
    k = 1.0 if worst == T_REF_C else float(_ib_factor(_doubling(one)[0], worst)[0])
    shown = []
    for key, (c, x) in terms.items():
        if c == 0:
            continue
        if key == "drift_v_per_c":
            c = s.stage.dc_noise_gain * abs(worst - T_REF_C)
        if key in ("ib_a", "ios_a"):
            c = c * k
        shown.append(f"{key.split('_')[0]} {fmt(c * abs(float(x[0])), 'voltage')}")
    text = (f"NG {s.stage.dc_noise_gain:.4g}, rf {fmt(s.stage.rf, 'resistance')}, zp "
            f"{fmt(s.stage.offset_zp, 'resistance')}"
            + (" (at DC: coupling capacitors open)" if s.stage.coupling is not None else "")
            + f": at {worst:g} °C " + " + ".join(shown))
    if _warm(s):
        t2, assumed = (float(a[0]) for a in _doubling(one))
        if math.isnan(t2):
            text += "; Ib over temperature unknown (no ib_double_c, no rule for its tech)"
        else:
            text += (f"; Ib, Ios x{k:.4g} at {worst:g} °C (x2 every {t2:g} °C"
                     + (", assumed: the input technology's default)" if assumed else ")"))
    return text + _ripple_detail(s, one, rms=False)


OFFSET = Check(
    name="offset", kind="voltage",
    reads=("vos_v", "drift_v_per_c", "ib_a", "ios_a", "ib_double_c", "ib_tech_double_c",
           "psrr_db"),
    run=_offset, needs=_offset_needs,
    formula="max over T = both ends of --temp of NG·(|Vos| + |drift|·|T - 25 °C|) + "
            "(|Ib|·|rf - zp·NG| + Ios/2·(rf + zp·NG))·2^((T - 25 °C)/T2) "
            "+ Vr·10^(-PSRR/20)·NG (rail ripple, peak; with --ripple) <= offset max/m",
    explain=_offset_explain, detail=_offset_detail,
    applies=lambda s: s.requirement.offset_max_v is not None, amplitude="independent")


def _noise_parts(s: Spec) -> dict[str, Any]:
    st, req = s.stage, s.requirement
    ng, rf, zp, rg = s.noise_gain, st.rf, st.zp, st.rg
    four_kt = 4 * BOLTZMANN * req.temp_max_k
    r_density2 = four_kt * (rf + (0.0 if math.isinf(rg) else rf**2 / rg) + zp * ng**2)
    i_gain2 = rf**2 + (zp * ng) ** 2
    return {"ng": ng, "r_density2": r_density2, "i_gain2": i_gain2}


def _noise(p: Parts, s: Spec) -> CheckResult:
    """Output RMS noise over the closed-loop noise bandwidth against noise_max / margin."""
    assert s.requirement.noise_max_v is not None
    k = _noise_parts(s)
    en, cur = p["en_v_per_rthz"], p["in_a_per_rthz"]
    density2 = _sum_known([(k["ng"] ** 2, en * en), (k["i_gain2"], cur * cur)], len(p))
    density2 += k["r_density2"]
    total = pole(p, s.stage)
    total *= math.pi / 2  # the noise bandwidth of a single pole
    np.fmax(total, 0.0, out=total)  # unknown bandwidth (NaN) -> 0: a lower bound
    total *= density2
    total += k["ng"] ** 2 * s.stage.lf_noise_v2  # the coupling network below its corners
    np.sqrt(total, out=total)
    if s.requirement.ripple is None:
        return result("noise", "voltage", "<=", s.requirement.noise_max_v / s.margin, total)
    ripple = ripple_out(p, s) / math.sqrt(2)  # RMS of the sine
    total = np.hypot(total, ripple)
    return result("noise", "voltage", "<=", s.requirement.noise_max_v / s.margin,
                  total).with_figures(ripple_v=ripple)


def _noise_needs(s: Spec) -> tuple[str, ...]:
    k = _noise_parts(s)
    return (("en_v_per_rthz",) + (("in_a_per_rthz",) if k["i_gain2"] > 0 else ())
            + ("gbw_hz",) + _ripple_needs(s))


def _noise_explain(s: Spec) -> list[Explained]:
    req = s.requirement
    return (_limit_explain("noise", "allowed output noise (RMS)", req.noise_max_v, s.margin,
                           NOISE.formula, f" (resistors at {req.temp_max_c:g} °C)")
            + _ripple_explain(s, "noise"))


def _noise_detail(s: Spec, p: Parts, i: int) -> str:
    one = p.take([i])
    k = _noise_parts(s)
    f_cl = float(pole(one, s.stage)[0])
    en, cur = float(one["en_v_per_rthz"][0]), float(one["in_a_per_rthz"][0])
    return (f"en·NG {fmt(k['ng'] * en, 'vnoise')}, in {fmt(math.sqrt(k['i_gain2']) * cur, 'vnoise')}"
            f", resistors {fmt(math.sqrt(k['r_density2']), 'vnoise')}"
            + (f", coupling network below its corners {fmt(k['ng'] * math.sqrt(s.stage.lf_noise_v2), 'voltage')} RMS"
               if s.stage.lf_noise_v2 > 0 else "")
            + f"; closed-loop pole "
            f"{fmt(f_cl, 'frequency')}, noise bandwidth {fmt(math.pi / 2 * f_cl, 'frequency')}"
            + _ripple_detail(s, one, rms=True))


NOISE = Check(
    name="noise", kind="voltage",
    reads=("en_v_per_rthz", "in_a_per_rthz", "aol_v_per_v", "gbw_hz", "rin_ohm", "rout_ohm",
           "psrr_db"),
    run=_noise, needs=_noise_needs,
    formula="√((en·NG)² + in²·(rf² + (zp·NG)²) + 4kT·(rf + rf²/rg + zp·NG²)) × √(π/2·f_cl) "
            "<= noise max/m, f_cl the closed-loop pole; with --ripple added in power to "
            "Vr·10^(-PSRR/20)·NG/√2",
    explain=_noise_explain, detail=_noise_detail,
    applies=lambda s: s.requirement.noise_max_v is not None, amplitude="independent")


__all__ = ["BOLTZMANN", "NOISE", "OFFSET", "RIPPLE_LEAVES_OUT", "ripple_out"]
