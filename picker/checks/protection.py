"""The input-protection check: the differential voltage the op-amp's inputs can see in
this stage against the part's absolute maximum ``vdiff_max_v``.

Model (a step with the output held): the input signal jumps by its full peak-to-peak,
``2·Vp,in`` (a square wave, a switched or overloaded source), faster than the output
can follow, so the output still sits at its start level while the inputs take the
step. The op-amp's inputs draw no current (until a clamp conducts); in the reduced
circuit (picker.stages.base) the non-inverting input moves by ``kp`` per volt and the
inverting input, a divider between the source ``kg`` (through rg) and the held output
(through rf), by ``kg·rf/(rg + rf)``:

    Vdiff = 2·Vp,in·|kp - kg·rf/(rg + rf)|

follower and non-inverting: the full step (kp = 1, no source at rg); inverting: the
step times rf/(rg + rf) (nodal analysis of the divider, any circuits text, e.g.
Horowitz and Hill, The Art of Electronics, 3rd ed., ch. 4, from memory). Margin
``vdiff_max/Vdiff``; not scaled by the design margin (the amplitude is the stated
largest signal, an absolute maximum the limit).

What the part tolerates: an absolute maximum above ``CLAMP_MAX_V`` is a voltage the
inputs may never see. One of ``CLAMP_MAX_V`` or less (about a diode drop or two) is the
voltage of clamp diodes between the inputs: a larger step only drives a current through
them, which the resistance already between the pins limits, so the part tolerates
``vdiff_max + CLAMP_CURRENT_A·(zp + rg‖rf)`` (common practice, no source: datasheets of
parts with input clamps give the clamp voltage as the absolute maximum and ask for the
current to be limited).

When a part fails, ``detail`` names the series resistance that keeps the current of the
inputs' clamp at ``CLAMP_CURRENT_A`` (10 mA, a usual absolute-maximum input current:
common practice, no source), the clamp taken to hold about ``vdiff_max``, counting the
resistance already in the path between the pins (``zp + rg‖rf``, the Thévenin
resistance with the output held), and its thermal noise ``√(4kT·R)`` at the hottest
ambient (CODATA k), at the input and times the noise gain at the output.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np
import numpy.typing as npt

from picker.checks import Check
from picker.checks.accuracy import BOLTZMANN
from picker.checks.core import CheckResult, Parts, result
from picker.design.spec import Explained
from picker.quantities import fmt
from picker.stages.base import Stage, parallel

if TYPE_CHECKING:
    from picker.design.spec import Spec

#: The clamp current a suggested series resistor limits to, A (common practice, no source).
CLAMP_CURRENT_A = 10e-3
#: An absolute maximum differential input voltage up to this is taken as input clamp
#: diodes (common practice, no source), V.
CLAMP_MAX_V = 2.0


def step_factor(st: Stage) -> float:
    """Differential input voltage per volt of input step with the output held,
    ``|kp - kg·rf/(rg + rf)|`` (module docstring)."""
    to_n = 0.0 if math.isinf(st.rg) or st.rg + st.rf == 0 else st.kg * st.rf / (st.rg + st.rf)
    return abs(st.kp - to_n)


def differential_step(s: Spec) -> float:
    """The largest differential voltage at the op-amp's inputs, V: 2·Vp,in times
    ``step_factor``."""
    return 2 * s.requirement.vin * step_factor(s.stage)


def path_resistance(st: Stage) -> float:
    """Resistance between the op-amp's input pins with the output held and the sources
    at rest, Ω: ``zp + rg‖rf`` (rf alone with rg open)."""
    return st.zp + parallel(st.rg, st.rf)


def series_for_clamp(s: Spec, vdiff_max: float) -> float:
    """Extra series resistance that limits the clamp current to CLAMP_CURRENT_A, Ω
    (0 when the path already does): (Vdiff - vdiff_max)/I - (zp + rg‖rf)."""
    need = (differential_step(s) - vdiff_max) / CLAMP_CURRENT_A
    return max(0.0, need - path_resistance(s.stage))


def tolerated(s: Spec, vdiff_max: npt.ArrayLike) -> npt.NDArray[np.float64]:
    """The largest differential step each part tolerates in this stage, V: its absolute
    maximum, or for clamped inputs (<= CLAMP_MAX_V) the clamp voltage plus what the
    path resistance drops at CLAMP_CURRENT_A (module docstring)."""
    v = np.asarray(vdiff_max, dtype=float)
    with np.errstate(invalid="ignore"):
        return np.where(v <= CLAMP_MAX_V, v + CLAMP_CURRENT_A * path_resistance(s.stage), v)


def _run(p: Parts, s: Spec) -> CheckResult:
    return result("input_protection", "voltage", ">=", differential_step(s),
                  tolerated(s, p["vdiff_max_v"]))


def _explain(s: Spec) -> list[Explained]:
    req, k = s.requirement, step_factor(s.stage)
    v = differential_step(s)
    return [Explained(
        "input_protection", "differential input voltage (input step, output held)", v,
        "voltage", INPUT_PROTECTION.formula,
        f"2 × {fmt(req.vin, 'voltage', 4)} × {k:.4g} = {fmt(v, 'voltage', 4)} (a "
        f"{fmt(2 * req.vin, 'voltage', 4)} step before the output moves)")]


def _detail(s: Spec, p: Parts, i: int) -> str:
    vmax = float(p["vdiff_max_v"][i])
    text = f"absolute maximum differential input {fmt(vmax, 'voltage', 4)}"
    v = differential_step(s)
    if math.isnan(vmax) or vmax >= v:
        return text
    if vmax > CLAMP_MAX_V:
        return text + " (no input clamps: the step itself is too large; limit the input)"
    r = series_for_clamp(s, vmax)
    path = path_resistance(s.stage)
    limit = fmt(CLAMP_CURRENT_A, "current")
    if r == 0:
        return (text + f"; the {fmt(path, 'resistance', 4)} between the inputs already "
                f"limits the clamp current to {fmt((v - vmax) / path, 'current', 4)} "
                f"(<= {limit}, common practice, no source)")
    four_kt = 4 * BOLTZMANN * s.requirement.temp_max_k
    en = math.sqrt(four_kt * r)
    return (text + f"; to limit the clamp current to {limit} (common practice, no source) "
            f"the path between the inputs needs ({fmt(v, 'voltage', 4)} - "
            f"{fmt(vmax, 'voltage', 4)}) / {limit} = "
            f"{fmt((v - vmax) / CLAMP_CURRENT_A, 'resistance', 4)}: add "
            f"{fmt(r, 'resistance', 4)} in series with an input (it has "
            f"{fmt(path, 'resistance', 4)}), costing √(4kT·R) = {fmt(en, 'vnoise', 3)} at "
            f"the input, {fmt(en * s.noise_gain, 'vnoise', 3)} at the output")

INPUT_PROTECTION = Check(
    name="input_protection", kind="voltage", reads=("vdiff_max_v",), run=_run,
    formula="tolerated >= 2·Vp,in·|kp - kg·rf/(rg + rf)| (model: the input's full "
            "peak-to-peak step arrives before the output moves; output held); tolerated = "
            "Vdiff max, or for input clamps (Vdiff max <= 2 V) Vdiff max + 10 mA·(zp + rg‖rf)",
    explain=_explain, detail=_detail, amplitude="proportional")


__all__ = ["CLAMP_CURRENT_A", "INPUT_PROTECTION", "differential_step", "path_resistance",
           "series_for_clamp", "step_factor"]
