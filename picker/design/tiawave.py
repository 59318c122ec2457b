"""Time-domain prediction of a transimpedance stage with a part: the sine and the step.

The sine (``current_sine``, ``picker wave PART``): the sensor current swings over
``--iin`` (a peak ``p``: -p..p; a DC range lo..hi: around its middle) at ``--freq``; the
settled output is the linear steady state of the same circuit (its phasor at jω).

The sensor current steps from the low end of ``--iin`` to its high end at t = 0 (a
peak ``p`` steps from -p to +p), the stage at rest before it: the output moves from
ref - I_low·Zt toward ref - I_high·Zt. The circuit is the stage's own netlist (the sensor
as its Norton source behind its resistance, Cd, rf and cf) with the part's linear
macromodel and its input capacitances, integrated as picker.design.filterwave does
(trapezoidal rule on the descriptor system). The ideal curve is the same network with an
op-amp a million times faster than the feedback pole: rf·cf's single pole.

What the prediction leaves out (said with every result): the op-amp's second pole (the
stability check counts it: a part with a low follower phase margin rings more than
shown), slew and swing limits (flagged where the linear output exceeds them), the sensor's
own speed and noise.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import numpy.typing as npt

from picker.circuit.nullor import transfer
from picker.design.filterwave import (
    PERIOD_STEPS,
    STEPS,
    Step,
    column_value,
    limit_flags,
    part_model,
    phasor,
    settled_waves,
    step_figures,
    step_run,
    system,
    unknown_waves,
)
from picker.design.waveform import Drive, Waves
from picker.quantities import fmt
from picker.stages import stage
from picker.stages.transimpedance import TiaStage, fn_of, q_of

Array = npt.NDArray[np.float64]

#: part columns the prediction reads
COLUMNS: tuple[str, ...] = ("gbw_hz", "slew_v_per_s", "aol_v_per_v", "rin_ohm", "rout_ohm",
                            "iout_a", "out_head_pos_v", "out_head_neg_v", "cin_diff_f",
                            "cin_cm_f")
#: the time window in time constants of the slowest decay
WINDOW_TAUS = 12
LEFT_OUT = ("the op-amp's second pole (the stability check counts it), slew and swing "
            "limits (flagged, not modelled), the sensor's own speed")


def _slowest_tau(st: TiaStage, gbw: float, ct: float) -> float:
    """The slowest time constant of the step, s: the feedback pole rf·cf, or the loop's
    pair (fn, Q) decaying at Q/(π·fn) (a second-order section's envelope; any circuits
    text, e.g. Sedra and Smith, Microelectronic Circuits, 7th ed., ch. 13, from memory)."""
    fn = float(fn_of(gbw, st.rf, st.cf, ct))
    q = float(q_of(gbw, st.rf, st.cf, ct))
    loop = (q / (math.pi * fn) if q > 0.5 else
            1 / (2 * math.pi * fn * (1 / (2 * q) - math.sqrt(1 / (4 * q * q) - 1))))
    return max(st.rf * st.cf, loop)


def current_step(req: Any, parts: Any) -> Step:
    """The response of the stage (as built) with one part to a step of the sensor current.

    Parameters
    ----------
    req : Requirement
        A transimpedance stage with its network (picker.api.built).
    parts : DataFrame
        One row: the part (COLUMNS).

    Returns
    -------
    Step
        The wave (absolute output, V, over time, s) and its figures: final value (the
        ideal step of the output, V), overshoot (ratio), 10-90% rise and 1% settling, s.
    """
    st = stage(req)
    assert isinstance(st, TiaStage)
    lo_i, hi_i = req.iin_a
    rest = req.ref - lo_i * st.rf
    drive = Drive((hi_i - lo_i) * st.rn, 0.0, rest, req.rail_pos, req.rail_neg,
                  -st.rf / st.rn, req.gain_error)
    what = (f"sensor current {fmt(lo_i, 'current')} -> {fmt(hi_i, 'current')} at t = 0, "
            "from rest")
    label, a0, gbw, rin, ro = part_model(parts)
    if not (gbw > 0):
        w = unknown_waves(label, drive)
        return Step(w, step_figures(w, math.nan), what, LEFT_OUT)
    cin = float(np.nan_to_num(column_value(parts, "cin_diff_f"), nan=0.0))
    ccm = float(np.nan_to_num(column_value(parts, "cin_cm_f"), nan=0.0))
    t_end = WINDOW_TAUS * _slowest_tau(st, gbw, st.cd + cin + ccm)
    h = t_end / STEPS
    t: Array = np.arange(STEPS + 1, dtype=float) * h
    u = np.full(len(t), drive.vin_pk)  # the Norton source's volts: current x rn
    u[0] = 0.0
    sy = system(st, a0, gbw, rin, ro, cin, ccm)
    z = step_run(sy, u, h)
    ideal = step_run(system(st, math.inf, 1e6 * st.feedback_pole_hz, math.inf, 0.0), u,
                     h)[:, sy.out]
    vo, io = z[:, sy.out], z[:, sy.i_out]
    flags = limit_flags(st, vo, io, t, parts, rest,
                   (req.rail_pos, req.rail_neg))
    w = settled_waves(label, drive, t, ideal, vo, flags, parts)
    final = -(hi_i - lo_i) * st.rf  # rf‖Rsh seen as rf: Rsh holds no signal at a virtual ground
    return Step(w, step_figures(w, final), what, LEFT_OUT)


def current_sine(req: Any, parts: Any, freq_hz: float | None = None) -> Waves:
    """The settled output for a sine of the sensor current over ``--iin`` at ``freq_hz``
    (default --freq), one part (module docstring). Absolute output levels, V."""
    st = stage(req)
    assert isinstance(st, TiaStage)
    lo_i, hi_i = req.iin_a
    mid, amp = (lo_i + hi_i) / 2, (hi_i - lo_i) / 2
    f = freq_hz or req.freq_hz
    drive = Drive(amp * st.rn, f, req.ref - mid * st.rf, req.rail_pos, req.rail_neg,
                  -st.rf / st.rn, req.gain_error)
    label, a0, gbw, rin, ro = part_model(parts)
    if not (gbw > 0):
        return unknown_waves(label, drive)
    cin = float(np.nan_to_num(column_value(parts, "cin_diff_f"), nan=0.0))
    ccm = float(np.nan_to_num(column_value(parts, "cin_cm_f"), nan=0.0))
    t: Array = np.arange(2 * PERIOD_STEPS, dtype=float) / (PERIOD_STEPS * f)
    u = np.exp(2j * math.pi * f * t)
    sy = system(st, a0, gbw, rin, ro, cin, ccm)
    z = phasor(sy, f)
    vo = drive.vin_pk * np.imag(z[sy.out] * u)
    io = drive.vin_pk * np.imag(z[sy.i_out] * u)
    ideal = drive.vin_pk * np.imag(complex(transfer(st.circuit, [f])[0]) * u)
    flags = limit_flags(st, vo, io, t, parts, drive.ref_v, (req.rail_pos, req.rail_neg))
    return settled_waves(label, drive, t, ideal, vo, flags, parts)


__all__ = ["COLUMNS", "LEFT_OUT", "current_sine", "current_step"]
