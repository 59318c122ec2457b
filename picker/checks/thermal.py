"""The dissipation check: the power a part dissipates in this stage and the junction
temperature it reaches at the hottest ambient, against its maximum junction temperature.

Power of one package, W (SI units; signal measured from the reference level ``ref``):

- quiescent: ``Iq·(V+ - V-)`` for every channel of the package. ``iq_a`` is the
  datasheet's supply current per channel, taken as rated on the actual rails and at
  every temperature (the model leaves out its change with supply and temperature).
  A package's channels not used by this stage are counted idle: powered, drawing Iq,
  driving nothing (if a board uses them for other loads, their output dissipation
  adds). With the channel count unknown the package counts as one channel (a lower
  bound, so the check needs ``channels``).
- output stage, for each of the ``min(qty, channels)`` channels of the stage in the
  package: the stage's sine ``vo = ref + Vp·sin ωt`` into its effective load
  ``R_eff`` (load plus feedback network, ``Stage.amps_per_volt_out``), the output
  current ``i = (vo - ref)/R_eff`` drawn from V+ while it flows out and from V- while
  it flows in (a class-B-like output stage). Averaged over a period:

      P+ = Vp/R_eff·((V+ - ref)/π - Vp/4),  P- = Vp/R_eff·((ref - V-)/π - Vp/4)
      P_out = P+ + P- = (V+ - V-)·Vp/(π·R_eff) - Vp²/(2·R_eff)

  the reference drops out of the sum. On ±V rails this is the class B stage's
  ``P_D = 2·V·Vp/(π·RL) - Vp²/(2·RL)``, largest at ``Vp = 2·V/π`` (Sedra and Smith,
  Microelectronic Circuits, 7th ed., ch. 12, output stages, the class B stage's power
  dissipation, from memory); here at ``Vp = (V+ - V-)/π``.

Junction temperature ``Tj = Ta + θJA·P`` with Ta the top of ``--temp`` (a thermal
resistance times the power, common practice, no source). The check passes when
``Tj <= Tj,max``: the stage needs the part to work at ambient Ta (``need``), the part
works up to ``Tj,max - θJA·P`` (``has``); the margin is the headroom ratio
``(Tj,max - Ta)/(Tj - Ta)`` (>= 1 exactly when passing). Records also carry
``power_w`` (P, W) and ``tj_c`` (Tj, °C). The design margin does not scale the power:
the amplitude is the stated largest signal, as for the swing (picker.design.spec).
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np

from picker.checks import Check
from picker.checks.core import Array, CheckResult, Coded, Parts
from picker.design.spec import Explained
from picker.quantities import fmt

if TYPE_CHECKING:
    from picker.design.spec import Spec


def output_stage_power(span_v: float, vp: float, amps_per_volt: float) -> float:
    """Average output-stage dissipation of one channel, W, for a sine around ``ref``.

    Parameters
    ----------
    span_v : float
        V+ - V-, V.
    vp : float
        Peak output amplitude around the reference, V.
    amps_per_volt : float
        1/R_eff, the output current per volt of output (load plus network), A/V.

    Returns
    -------
    float
        ``(V+ - V-)·Vp/(π·R_eff) - Vp²/(2·R_eff)`` (module docstring; Sedra and Smith,
        Microelectronic Circuits, 7th ed., ch. 12, class B dissipation, from memory),
        not below 0.
    """
    return max(0.0, amps_per_volt * (span_v * vp / math.pi - vp * vp / 2))


def worst_amplitude(span_v: float) -> float:
    """The sine amplitude of the largest output-stage dissipation, V: (V+ - V-)/π
    (2·V/π on ±V rails; d P_out/d Vp = 0)."""
    return span_v / math.pi


def _p_out(s: Spec) -> float:
    req = s.requirement
    return output_stage_power(req.span, req.vout, s.stage.amps_per_volt_out)


def package_power(p: Parts, s: Spec) -> tuple[Array, Array]:
    """Per part (quiescent, output-stage) power of one package, W, unknowns as 0 (the sum
    is then a lower bound): channels·Iq·(V+ - V-) and min(qty, channels)·P_out."""
    ch = p["channels"]
    ch = np.where(np.isnan(ch), 1.0, ch)
    quiescent = np.nan_to_num(p["iq_a"], nan=0.0) * s.requirement.span * ch
    driving = np.minimum(ch, float(s.requirement.qty))
    return quiescent, driving * _p_out(s)


def _dissipation(p: Parts, s: Spec) -> CheckResult:
    """Ambient the part can work at, Tj,max - θJA·P, against the top of --temp."""
    ta = s.requirement.temp_max_c
    q, o = package_power(p, s)
    power = q + o
    rise = np.nan_to_num(p["theta_ja_c_per_w"], nan=0.0) * power  # unknown θ: lower bound
    allowed = p["tj_max_c"] - ta
    with np.errstate(divide="ignore", invalid="ignore"):
        margin = np.where(rise > 0, allowed / rise, np.where(allowed >= 0, np.inf, -np.inf))
    margin = np.where(np.isnan(allowed), np.nan, margin)
    n = len(p)
    return CheckResult("dissipation", "temperature", Coded.same(">=", n),
                       np.broadcast_to(np.float64(ta), (n,)), p["tj_max_c"] - rise, margin,
                       Coded.same("", n), {"power_w": power, "tj_c": ta + rise})


def _explain(s: Spec) -> list[Explained]:
    req, g = s.requirement, s.stage.amps_per_volt_out
    ta, vp, span = req.temp_max_c, req.vout, req.span
    r_eff = math.inf if g == 0 else 1 / g
    worst = worst_amplitude(span)
    return [
        Explained("dissipation", "ambient the part must work at (top of --temp)", ta,
                  "temperature", DISSIPATION.formula,
                  f"{ta:g} = {fmt(ta, 'temperature', 4)} (Tj = {ta:g} °C + θJA·P must stay "
                  "<= Tj,max)"),
        Explained("dissipation_output", "output-stage dissipation per channel (sine into "
                  "R_eff, class-B-like output)", _p_out(s), "power",
                  "P_out = (V+ - V-)·Vp/(π·R_eff) - Vp²/(2·R_eff)",
                  f"{fmt(span, 'voltage', 4)} × {fmt(vp, 'voltage', 4)} / (π × "
                  f"{fmt(r_eff, 'resistance', 4)}) - ({fmt(vp, 'voltage', 4)})² / (2 × "
                  f"{fmt(r_eff, 'resistance', 4)}) = {fmt(_p_out(s), 'power', 4)}"),
        Explained("dissipation_quiescent", "quiescent power per channel", None, "power",
                  "P_q = Iq·(V+ - V-), every channel of the package (idle ones too)",
                  f"Iq × {fmt(span, 'voltage', 4)}; P = channels·P_q + min(qty, channels)"
                  f"·P_out, Tj = {ta:g} °C + θJA·P"),
        Explained("dissipation_worst", "amplitude of the largest output-stage dissipation "
                  "(information)", worst, "voltage", "Vp = (V+ - V-)/π (2·V/π on ±V rails)",
                  f"{fmt(span, 'voltage', 4)} / π = {fmt(worst, 'voltage', 4)}: P_out there "
                  f"{fmt(output_stage_power(span, worst, g), 'power', 4)}, here "
                  f"{fmt(_p_out(s), 'power', 4)} at {fmt(vp, 'voltage', 4)}"),
    ]


def _detail(s: Spec, p: Parts, i: int) -> str:
    req = s.requirement
    one = p.take([i])
    q, o = (float(x[0]) for x in package_power(one, s))
    iq, ch = float(one["iq_a"][0]), float(one["channels"][0])
    theta, tjmax = float(one["theta_ja_c_per_w"][0]), float(one["tj_max_c"][0])
    n_ch = 1 if math.isnan(ch) else int(ch)
    driving = min(n_ch, req.qty)
    text = (f"P = {n_ch} ch × {fmt(iq, 'current', 4)} × {fmt(req.span, 'voltage', 4)} = "
            f"{fmt(q, 'power', 4)} quiescent + {driving} × {fmt(_p_out(s), 'power', 4)} "
            f"output = {fmt(q + o, 'power', 4)}")
    if math.isnan(ch):
        text += " (channels unknown: one counted)"
    if math.isnan(iq):
        text += " (Iq unknown: output only)"
    if math.isnan(theta):
        return text + f"; θJA unknown, Tj,max {fmt(tjmax, 'temperature', 4)}"
    tj = req.temp_max_c + theta * (q + o)
    return (text + f"; Tj = {req.temp_max_c:g} °C + {fmt(theta, 'thermal', 4)} × "
            f"{fmt(q + o, 'power', 4)} = {fmt(tj, 'temperature', 4)} against Tj,max "
            f"{fmt(tjmax, 'temperature', 4)} (works up to "
            f"{fmt(tjmax - theta * (q + o), 'temperature', 4)} ambient)")


DISSIPATION = Check(
    name="dissipation", kind="temperature",
    reads=("iq_a", "channels", "theta_ja_c_per_w", "tj_max_c"),
    run=_dissipation,
    formula="Tj = Ta + θJA·P <= Tj,max, P = channels·Iq·(V+ - V-) + min(qty, channels)·"
            "((V+ - V-)·Vp/(π·R_eff) - Vp²/(2·R_eff)), Ta the top of --temp; margin "
            "(Tj,max - Ta)/(Tj - Ta)",
    explain=_explain, detail=_detail, amplitude="other")


__all__ = ["DISSIPATION", "output_stage_power", "package_power", "worst_amplitude"]
