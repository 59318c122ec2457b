"""Checks of the transimpedance stage (picker.stages.transimpedance; minimums in
picker.design.tiaspec). They replace the voltage stage's slew, noise, gain-accuracy and
phase checks; swing, supply, output current, dissipation, offset (Vos·NG + Ib·rf),
stability (the phase margin of the loop with cf, the sensor's and the part's input
capacitances) and stock apply as they are.

- tia_gbw: GBW >= m·GBW_needed(rf, cf, Cd + Cin,diff + Cin,cm): Q at most the
  response's and the bandwidth reached, single-pole loop (closed forms in the stage);
- tia_bandwidth: the -3 dB frequency of the whole circuit with the part's two-pole
  model (picker.circuit.loopgain ``closed_loop``: A0, GBW, second pole from its phase
  margin, Rin, Ro, input capacitances, the sensor's Rsh and Cd, load) >= the bandwidth
  asked for; found on a grid of 20 points a decade and refined by bisection;
- tia_bias: |Ib| <= BIAS_SHARE·I_smallest/m (the bias current must not swamp the
  smallest signal current; common practice, no source);
- tia_slew: SR >= the slew minimum (a sine at the top frequency, or a step over a DC
  range through a single pole at B);
- tia_noise: the output RMS noise, integrated numerically over frequency per part,
  e_o² = ∫ |H|²·(en²·|1 + Zf·Yd|² + (in² + 4kT/rf + 4kT/Rsh)·|Zf|²) df with
  Zf = rf/(1 + j2πf·rf·cf), Yd = 1/Rsh + j2πf·Ct, H = T/(1 + T) the loop's closing,
  T = A/(1 + Zf·Yd), A single pole (A0, GBW); k = 1.380649e-23 J/K (CODATA), resistors
  at the top of --temp. (The rising noise gain 1 + Ct/cf above the zero 1/(2π·rf·Ct)
  is what makes en dominate a fast stage; Graeme, Photodiode Amplifiers, 1996, ch. 5,
  from memory.)

Left out (said in the spec's notes): the input-protection check (the inputs sit at
the reference), the DC transimpedance error from finite A0 (the bandwidth check's solver
includes it, no separate budget), 1/f noise, the sensor's own shot noise and dark
current, and the minimum stable noise gain of a decompensated part against the stage's
high-frequency noise gain 1 + Ct/cf (the stability check compares its DC noise gain,
which rejects such parts conservatively).
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np

from picker.checks import Check
from picker.checks.accuracy import BOLTZMANN
from picker.checks.core import Array, CheckResult, Parts, result
from picker.checks.limits import rated_slew
from picker.checks.stability import model
from picker.circuit.loopgain import closed_loop
from picker.design.spec import Explained
from picker.design.tiaspec import gbw_need
from picker.quantities import fmt
from picker.stages.transimpedance import TiaStage, gbw_needed

if TYPE_CHECKING:
    from picker.design.spec import Spec

#: The bias current may be at most this share of the smallest signal current.
BIAS_SHARE = 0.01
#: Parts evaluated at once in the grid computations (bounds memory).
CHUNK = 5000
#: Bandwidth grid: B·10^-3 .. B·10^3, this many points a decade.
PER_DECADE = 20
#: Noise integral grid: points a decade from B/10⁴ to 100·GBW.
NOISE_PER_DECADE = 60


def _is_tia(s: Spec) -> bool:
    return isinstance(s.stage, TiaStage)


def _st(s: Spec) -> TiaStage:
    st = s.stage
    assert isinstance(st, TiaStage)
    return st


def _f(x: float) -> str:
    return fmt(x, "frequency", 4)


def input_cap(p: Parts) -> Array:
    """Each part's capacitance at the inverting input, F: cin_diff + cin_cm (NaN unknown)."""
    return p["cin_diff_f"] + p["cin_cm_f"]  # type: ignore[no-any-return]


# -- GBW -----------------------------------------------------------------------------------

def gbw_needs(p: Parts, s: Spec) -> Array:
    """Per part m·GBW_needed with its own input capacitance, Hz (NaN where unknown)."""
    st = _st(s)
    cin = input_cap(p)
    known = np.isfinite(cin)
    need = s.margin * gbw_needed(st.response_q, st.band_hz, st.rf, st.cf,
                                 st.cd + np.where(known, cin, 0.0))
    return np.where(known, need, np.nan)  # type: ignore[no-any-return]


def _gbw(p: Parts, s: Spec) -> CheckResult:
    return result("tia_gbw", "frequency", ">=", gbw_needs(p, s), p["gbw_hz"])


def _gbw_explain(s: Spec) -> list[Explained]:
    st = _st(s)
    need = gbw_need(st, s.margin)
    return [Explained("tia_gbw", "GBW for the response and the bandwidth (sensor "
                      "capacitance only; each part adds its own)", need, "frequency",
                      TIA_GBW.formula,
                      f"{s.margin:g} × GBW(rf {fmt(st.rf, 'resistance', 4)}, cf "
                      f"{fmt(st.cf, 'capacitance', 4)}, Ct {fmt(st.cd, 'capacitance', 4)}"
                      f" + Cin, Q <= {st.response_q:.4g}, f3 >= {_f(st.band_hz)}) = "
                      f"{_f(need)}")]


def _gbw_detail(s: Spec, p: Parts, i: int) -> str:
    cin = float(input_cap(p)[i])
    if not math.isfinite(cin):
        return f"GBW {_f(float(p['gbw_hz'][i]))}; input capacitance unknown"
    need = gbw_need(_st(s), s.margin, cin)
    return (f"GBW {_f(float(p['gbw_hz'][i]))}; with its input capacitance "
            f"{fmt(cin, 'capacitance', 4)} (Ct {fmt(_st(s).cd + cin, 'capacitance', 4)}) the "
            f"need is {_f(need)}")


TIA_GBW = Check(
    name="tia_gbw", kind="frequency", reads=("gbw_hz", "cin_diff_f", "cin_cm_f"), run=_gbw,
    formula="GBW >= m·GBW_needed: the least GBW with Q = √(ωa·rf·(cf + Ct))/(1 + ωa·rf·cf) "
            "<= Q_response and f3 >= B, Ct = Cd + cin_diff + cin_cm (single-pole loop)",
    explain=_gbw_explain, detail=_gbw_detail, applies=_is_tia, amplitude="independent")


# -- bandwidth ---------------------------------------------------------------------------

def part_bandwidth(p: Parts, s: Spec) -> Array:
    """Per part the -3 dB frequency of the whole circuit, Hz (module docstring); inf
    when it stays within 3 dB up to 1000·B; NaN where GBW or the follower phase margin
    is unknown."""
    st = _st(s)
    key = ("tia_bandwidth", st.circuit)

    def make() -> Array:
        m = model(p)
        out = [np.empty(0)]
        for i in range(0, len(m), CHUNK):
            out.append(_bandwidth_chunk(st, m.take(np.arange(i, min(i + CHUNK, len(m))))))
        return np.concatenate(out)

    return p.memo(key, make)  # type: ignore[no-any-return]


def _bandwidth_chunk(st: TiaStage, m: object) -> Array:
    from picker.circuit.loopgain import Model

    assert isinstance(m, Model)
    n = len(m)
    u = np.linspace(-3, 3, 6 * PER_DECADE + 1)
    f = st.band_hz * 10.0 ** u
    with np.errstate(invalid="ignore", divide="ignore"):
        g0 = np.abs(closed_loop(st.circuit, m, np.zeros(n)))
        g = np.abs(closed_loop(st.circuit, m.column(), f[None, :])) / g0[:, None]
    below = g < 1 / math.sqrt(2)
    has = below.any(axis=1)
    k = np.argmax(below, axis=1)  # the first grid point below -3 dB
    rows = np.arange(n)
    lo = np.log(f[np.maximum(k - 1, 0)])
    hi = np.log(f[k])
    for _ in range(40):
        mid = 0.5 * (lo + hi)
        with np.errstate(invalid="ignore", divide="ignore"):
            down = np.abs(closed_loop(st.circuit, m, np.exp(mid))) / g0 < 1 / math.sqrt(2)
        lo, hi = np.where(down, lo, mid), np.where(down, mid, hi)
    f3 = np.where(k == 0, f[0], np.exp(0.5 * (lo + hi)))
    f3 = np.where(has, f3, np.inf)
    known = np.isfinite(m.gbw) & (m.gbw > 0) & ~np.isnan(m.wp2) & np.isfinite(g0)
    del rows
    return np.where(known, f3, np.nan)  # type: ignore[no-any-return]


def _bandwidth(p: Parts, s: Spec) -> CheckResult:
    return result("tia_bandwidth", "frequency", ">=", _st(s).band_hz, part_bandwidth(p, s))


def _bandwidth_needs(s: Spec) -> tuple[str, ...]:
    st = _st(s)
    out: tuple[str, ...] = ("gbw_hz", "pm_unity_deg", "aol_v_per_v", "cin_diff_f", "cin_cm_f")
    if st.cload > 0 or not math.isinf(st.load):
        out += ("rout_ohm",)
    return out


def _bandwidth_explain(s: Spec) -> list[Explained]:
    st = _st(s)
    return [Explained("tia_bandwidth", "-3 dB bandwidth the stage must reach", st.band_hz,
                      "frequency", TIA_BANDWIDTH.formula,
                      f"B = {_f(st.band_hz)} (--f3db" + (", 0.35/--rise)"
                                                         if s.requirement.rise_s else ")"))]


def _bandwidth_detail(s: Spec, p: Parts, i: int) -> str:
    one = p.take([i])
    f3 = float(part_bandwidth(one, s)[0])
    st = _st(s)
    g0 = abs(complex(closed_loop(st.circuit, model(one), np.zeros(1))[0])) * st.rn
    return (f"with the part: -3 dB at {_f(f3) if math.isfinite(f3) else 'above 1000 × B'}, "
            f"DC transimpedance {fmt(g0, 'resistance', 5)}")


TIA_BANDWIDTH = Check(
    name="tia_bandwidth", kind="frequency",
    reads=("aol_v_per_v", "gbw_hz", "pm_unity_deg", "rin_ohm", "rout_ohm", "cin_diff_f",
           "cin_cm_f"),
    run=_bandwidth, needs=_bandwidth_needs,
    formula="f3 >= B, f3 the first frequency where |vo/I| falls 3 dB below its DC value, "
            "solved for the whole circuit with the part's two-pole model (A0, GBW, phase "
            "margin, Rin, Ro, input capacitances; sensor Rsh and Cd; rf, cf, load)",
    explain=_bandwidth_explain, detail=_bandwidth_detail, applies=_is_tia,
    amplitude="independent")


# -- bias current --------------------------------------------------------------------------

def bias_limit(s: Spec) -> float:
    """The largest bias current allowed, A: BIAS_SHARE·I_smallest/m."""
    return BIAS_SHARE * s.requirement.iin_smallest / s.margin


def _bias(p: Parts, s: Spec) -> CheckResult:
    return result("tia_bias", "current", "<=", bias_limit(s), np.abs(p["ib_a"]))


def _bias_explain(s: Spec) -> list[Explained]:
    req = s.requirement
    return [Explained("tia_bias", "largest input bias current", bias_limit(s), "current",
                      TIA_BIAS.formula,
                      f"{BIAS_SHARE:g} × {fmt(req.iin_smallest, 'current', 4)} / {s.margin:g}"
                      f" = {fmt(bias_limit(s), 'current', 4)}" + (
                          " (--iin-min)" if req.iin_min_a is not None else " (the peak)"))]


TIA_BIAS = Check(
    name="tia_bias", kind="current", reads=("ib_a",), run=_bias,
    formula="|Ib| <= 0.01·I_smallest/m (the bias current at most 1% of the smallest signal "
            "current, --iin-min or the peak; at 25 °C)",
    explain=_bias_explain,
    detail=lambda s, p, i: f"Ib {fmt(abs(float(p['ib_a'][i])), 'current', 4)}",
    applies=_is_tia, amplitude="proportional")


# -- slew ----------------------------------------------------------------------------------

def _slew_explain(s: Spec) -> list[Explained]:
    from picker.design.tiaspec import step_span

    req = s.requirement
    dv = step_span(req)
    text = (f"{req.margin:g} × 2π × {_f(req.band_hz or 0.0)} × {fmt(dv, 'voltage', 4)} (step "
            f"over the range)" if dv > 0 else
            f"{req.margin:g} × 2π × {_f(req.freq_hz)} × {fmt(req.vout, 'voltage', 4)}")
    return [Explained("tia_slew", "minimum slew rate", s.minimum.slew_v_per_s, "slew",
                      TIA_SLEW.formula,
                      text + f" = {fmt(s.minimum.slew_v_per_s, 'slew', 4)}")]


TIA_SLEW = rated_slew(
    "tia_slew", "SR >= m·2π·f·Vp,out for a peak current (a sine at --freq, default the "
    "bandwidth), m·2π·B·ΔV for a DC range (a full-range step through a single pole)",
    _slew_explain, applies=_is_tia)


# -- noise ---------------------------------------------------------------------------------

NOISE_READS = ("en_v_per_rthz", "in_a_per_rthz", "gbw_hz", "aol_v_per_v", "cin_diff_f",
               "cin_cm_f")


def output_noise(s: Spec, en: Array, cur: Array, gbw: Array, a0: Array, ct: Array) -> Array:
    """Output RMS noise per part, V (module docstring); arrays one element per part."""
    st, req = _st(s), s.requirement
    four_kt = 4 * BOLTZMANN * req.temp_max_k
    white_i2 = four_kt / st.rf + (0.0 if math.isinf(st.rsh) else four_kt / st.rsh)
    gsh = 0.0 if math.isinf(st.rsh) else 1.0 / st.rsh
    # an unknown GBW or A0 gives NaN (the unknown rule decides); the grid runs on a
    # stand-in so that no NaN frequency reaches the complex arithmetic
    known = np.isfinite(gbw) & (gbw > 0) & np.isfinite(a0) & (a0 > 0)
    gbw = np.where(known, gbw, st.band_hz)
    a0 = np.where(known, a0, 1e6)
    out = [np.empty(0)]
    for i in range(0, len(gbw), CHUNK):
        sl = slice(i, i + CHUNK)
        g, a, c = gbw[sl, None], a0[sl, None], ct[sl, None]
        f_lo = st.band_hz * 1e-4
        f_hi = 100 * np.maximum(g, st.band_hz)
        n_pts = int(NOISE_PER_DECADE * math.log10(1e6 * 1e4)) + 1
        t = np.linspace(0.0, 1.0, n_pts)[None, :]
        f = f_lo * (f_hi / f_lo) ** t
        w = 2 * np.pi * f
        zf = st.rf / (1 + 1j * w * st.rf * st.cf)
        ng = 1 + zf * (gsh + 1j * w * c)
        amp = a / (1 + 1j * f * a / g)
        h = amp / (ng + amp)  # T/(1 + T), T = A/NG
        h2 = np.abs(h) ** 2
        dens = h2 * (en[sl, None] ** 2 * np.abs(ng) ** 2
                     + (cur[sl, None] ** 2 + white_i2) * np.abs(zf) ** 2)
        total = np.trapezoid(dens, f, axis=1) + dens[:, 0] * f_lo  # DC to f_lo: flat
        out.append(np.sqrt(total))
    return np.where(known, np.concatenate(out), np.nan)  # type: ignore[no-any-return]


def part_noise(p: Parts, s: Spec) -> Array:
    """Per part the output RMS noise, V; NaN where en, GBW or A0 is unknown (an unknown
    current noise or input capacitance counts as 0, and the unknown rule decides)."""
    ct = _st(s).cd + np.nan_to_num(input_cap(p), nan=0.0)
    return output_noise(s, p["en_v_per_rthz"], np.nan_to_num(p["in_a_per_rthz"], nan=0.0),
                        p["gbw_hz"], p["aol_v_per_v"], ct)


def _noise(p: Parts, s: Spec) -> CheckResult:
    assert s.requirement.noise_max_v is not None
    return result("tia_noise", "voltage", "<=", s.requirement.noise_max_v / s.margin,
                  part_noise(p, s))


def _noise_explain(s: Spec) -> list[Explained]:
    req, st = s.requirement, _st(s)
    assert req.noise_max_v is not None
    kt = BOLTZMANN * req.temp_max_k
    return [Explained("tia_noise", "allowed output noise (RMS)", req.noise_max_v / s.margin,
                      "voltage", TIA_NOISE.formula,
                      f"{fmt(req.noise_max_v, 'voltage', 4)} / {s.margin:g} = "
                      f"{fmt(req.noise_max_v / s.margin, 'voltage', 4)}; rf alone with "
                      f"unlimited GBW gives √(kT/cf) = {fmt(math.sqrt(kt / st.cf), 'voltage', 4)}"
                      if st.cf > 0 else
                      f"{fmt(req.noise_max_v, 'voltage', 4)} / {s.margin:g} = "
                      f"{fmt(req.noise_max_v / s.margin, 'voltage', 4)}")]


def _noise_detail(s: Spec, p: Parts, i: int) -> str:
    one = p.take([i])
    return (f"en {fmt(float(one['en_v_per_rthz'][0]), 'vnoise', 3)}, in "
            f"{fmt(float(one['in_a_per_rthz'][0]), 'inoise', 3)}: output "
            f"{fmt(float(part_noise(one, s)[0]), 'voltage', 4)} RMS")


TIA_NOISE = Check(
    name="tia_noise", kind="voltage", reads=NOISE_READS, run=_noise,
    needs=lambda s: NOISE_READS,
    formula="√∫|H|²·(en²·|1 + Zf·Yd|² + (in² + 4kT/rf + 4kT/Rsh)·|Zf|²) df <= noise max/m, "
            "Zf = rf‖cf, Yd = 1/Rsh + jω·Ct, H = T/(1 + T), T = A/(1 + Zf·Yd), A single "
            "pole; from B/10⁴ to 100·GBW",
    explain=_noise_explain, detail=_noise_detail,
    applies=lambda s: _is_tia(s) and s.requirement.noise_max_v is not None,
    amplitude="independent")


CHECKS: tuple[Check, ...] = (TIA_GBW, TIA_BANDWIDTH, TIA_BIAS, TIA_SLEW, TIA_NOISE)

__all__ = ["BIAS_SHARE", "CHECKS", "TIA_BANDWIDTH", "TIA_BIAS", "TIA_GBW", "TIA_NOISE",
           "TIA_SLEW", "bias_limit", "gbw_needs", "input_cap", "output_noise",
           "part_bandwidth", "part_noise"]
