"""Time-domain prediction of a filter stage with a part: the sine and the step response.

The filter's circuit (picker.stages netlist, capacitors included) with the part's linear
macromodel is written as a descriptor system ``C·z' + G·z = B·u(t)`` by modified nodal
analysis (unknowns: node voltages, source and output branch currents, and the op-amp's
internal state x with ``x' = -ωp·x + ωu·(vp - vn)``, ωu = 2π·GBW, ωp = ωu/A0; the output
is x behind Ro; Rin between the inputs), and integrated with the trapezoidal rule,
``(C + h/2·G)·z1 = (C - h/2·G)·z0 + h/2·B·(u0 + u1)`` (A-stable; e.g. Chua and Lin,
Computer-Aided Analysis of Electronic Circuits, 1975, ch. 13, from memory), the input
linear within each step. An unknown A0 counts as infinite, Rin as open and Ro as 0, as
in the resistive stages' prediction; a part without GBW cannot be predicted.

It is a linear prediction: slew rate, swing and current limits are not modelled but
flagged where the linear output exceeds them (``clip``: beyond the light-load swing,
rails minus headroom; ``slew``: a slope above the rated slew rate; ``current``: an
output current above the part's limit). For the sine the settled output is the linear
steady state (its phasor, from the same equations at jω); the step starts from rest,
``--vin`` applied at t = 0, and runs 12 time constants of the section's slowest decay.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

from picker.circuit.mna import GROUND, Capacitor, OpAmp, Resistor, Source
from picker.circuit.nullor import transfer
from picker.design.waveform import LIMITS, Drive, Waves
from picker.stages import stage
from picker.stages.base import Stage
from picker.stages.filterbase import FilterStage

Array = npt.NDArray[np.float64]

#: part columns the prediction reads
COLUMNS: tuple[str, ...] = ("gbw_hz", "slew_v_per_s", "aol_v_per_v", "rin_ohm", "rout_ohm",
                            "iout_a", "out_head_pos_v", "out_head_neg_v")
STEPS = 4000  # samples of the step response
PERIOD_STEPS = 512  # samples per period of the sine


@dataclass(frozen=True)
class System:
    """C·z' + G·z = B·u, with the indices of the output voltage and output current."""

    c: Array
    g: Array
    b: Array
    out: int
    i_out: int


def system(st: Stage, a0: float, gbw: float, rin: float, ro: float, cin: float = 0.0,
           ccm: float = 0.0) -> System:
    """The descriptor system of ``st`` with one part (module docstring); ``cin`` between
    the op-amp's inputs and ``ccm`` from each input to the reference, F (0: left out)."""
    net = st.circuit
    nodes: dict[str, int] = {}
    for e in net.elements:
        ends = ((e.a, e.b) if isinstance(e, Resistor | Capacitor) else
                (e.plus, e.minus) if isinstance(e, Source) else (e.p, e.n, e.out))
        if isinstance(e, Resistor) and math.isinf(e.ohm):
            continue
        for nd in ends:
            if nd != GROUND:
                nodes.setdefault(nd, len(nodes))
    branches = [e for e in net.elements if isinstance(e, Source)
                or (isinstance(e, Resistor) and e.ohm == 0)]
    n = len(nodes) + len(branches) + 2  # + the op-amp's output current and its state x
    c, g, b = np.zeros((n, n)), np.zeros((n, n)), np.zeros(n)

    def stamp(m: Array, a: str, d: str, y: float) -> None:
        for p, q, sign in ((a, a, 1), (d, d, 1), (a, d, -1), (d, a, -1)):
            if p != GROUND and q != GROUND:
                m[nodes[p], nodes[q]] += sign * y

    row = len(nodes)
    amp: OpAmp | None = None
    for e in net.elements:
        if isinstance(e, Resistor) and e.ohm != 0:
            if math.isfinite(e.ohm):
                stamp(g, e.a, e.b, 1.0 / e.ohm)
        elif isinstance(e, Capacitor):
            stamp(c, e.a, e.b, e.farad)
        elif isinstance(e, OpAmp):
            amp = e
        else:
            plus, minus, volt = (e.plus, e.minus, e.volt) if isinstance(e, Source) else (
                e.a, e.b, 0.0)  # type: ignore[union-attr]
            for nd, sign in ((plus, 1.0), (minus, -1.0)):
                if nd != GROUND:
                    g[nodes[nd], row] += sign
                    g[row, nodes[nd]] += sign
            b[row] = volt
            row += 1
    assert amp is not None
    k_i, k_x = row, row + 1
    o = nodes[amp.out]
    if math.isfinite(rin) and rin > 0:
        stamp(g, amp.p, amp.n, 1.0 / rin)
    if cin > 0:
        stamp(c, amp.p, amp.n, cin)
    if ccm > 0:
        stamp(c, amp.p, GROUND, ccm)
        stamp(c, amp.n, GROUND, ccm)
    g[o, k_i] -= 1.0  # i_out flows from the op-amp into the output node
    g[k_i, o] += 1.0  # v_o - x + Ro·i_out = 0
    g[k_i, k_x] -= 1.0
    g[k_i, k_i] += ro if math.isfinite(ro) else 0.0
    wu = 2 * math.pi * gbw
    wp = wu / a0 if math.isfinite(a0) and a0 > 0 else 0.0
    c[k_x, k_x] = 1.0 / wu  # x'/ωu + (ωp/ωu)·x - (vp - vn) = 0
    g[k_x, k_x] = wp / wu
    for nd, sign in ((amp.p, -1.0), (amp.n, 1.0)):
        if nd != GROUND:
            g[k_x, nodes[nd]] += sign
    return System(c, g, b, o, k_i)


def step_run(sy: System, u: Array, h: float) -> Array:
    """Trapezoidal integration from rest: z at every sample (u per sample)."""
    left = sy.c + h / 2 * sy.g
    right = sy.c - h / 2 * sy.g
    lu = np.linalg.solve(left, np.eye(len(left)))  # one inverse, reused every step
    z = np.zeros(len(left))
    out = np.empty((len(u), len(z)))
    out[0] = z
    for k in range(1, len(u)):  # a recurrence: each sample needs the previous one
        z = lu @ (right @ z + h / 2 * sy.b * (u[k - 1] + u[k]))
        out[k] = z
    return out


def phasor(sy: System, freq_hz: float) -> npt.NDArray[np.complex128]:
    """The steady-state solution at jω per unit input."""
    return np.linalg.solve(sy.g + 2j * math.pi * freq_hz * sy.c, sy.b.astype(complex))  # type: ignore[no-any-return]


def column_value(parts: Any, name: str) -> float:
    if name not in parts:
        return math.nan
    return float(np.asarray(parts[name], dtype=float).reshape(-1)[0])


def limit_flags(st: Stage, vo: Array, io: Array, t: Array, parts: Any, ref: float,
           rails: tuple[float, float]) -> npt.NDArray[np.bool_]:
    head_p = np.nan_to_num(column_value(parts, "out_head_pos_v"), nan=0.0)
    head_n = np.nan_to_num(column_value(parts, "out_head_neg_v"), nan=0.0)
    clip = vo.max() + ref > rails[0] - head_p or vo.min() + ref < rails[1] + head_n
    sr, iout = column_value(parts, "slew_v_per_s"), column_value(parts, "iout_a")
    slope = np.abs(np.diff(vo) / np.diff(t)).max() if len(t) > 1 else 0.0
    slew = bool(math.isfinite(sr) and slope > sr)
    current = bool(math.isfinite(iout) and np.abs(io).max() > iout)
    return np.array([[clip, slew, current, False]])


def settled_waves(label: str, drive: Drive, t: Array, ideal: Array, vo: Array, flags: Any,
           parts: Any) -> Waves:
    out = vo + drive.ref_v
    hi = drive.rail_pos - np.nan_to_num(column_value(parts, "out_head_pos_v"), nan=0.0)
    lo = drive.rail_neg + np.nan_to_num(column_value(parts, "out_head_neg_v"), nan=0.0)
    spec = np.abs(np.fft.rfft(out - out.mean()))
    thd = float(np.sqrt(np.sum(spec[2 * 2:len(spec) // 2:2] ** 2)) / spec[2]) if len(spec) > 4 \
        else math.nan
    return Waves(labels=(label,), drive=drive, t=t, ideal=ideal + drive.ref_v,
                 vout=out[None, :], swing_hi=np.array([hi]), swing_lo=np.array([lo]),
                 peak_pos=np.array([out.max()]), peak_neg=np.array([out.min()]),
                 vpp=np.array([out.max() - out.min()]), thd=np.array([thd]),
                 active=flags, known=np.array([True]))


def part_model(parts: Any) -> tuple[str, float, float, float, float]:
    label = str(parts.index[0]) if hasattr(parts, "index") else "part"
    return (label, column_value(parts, "aol_v_per_v"), column_value(parts, "gbw_hz"), column_value(parts, "rin_ohm"),
            column_value(parts, "rout_ohm"))


def sine(req: Any, parts: Any, freq_hz: float | None = None) -> Waves:
    """The settled output for a sine of --vin at ``freq_hz`` (default --freq), one part."""
    st = stage(req)
    assert isinstance(st, FilterStage) and st.ideal is not None
    label, a0, gbw, rin, ro = part_model(parts)
    f = freq_hz or req.freq_hz
    drive = Drive(req.vin, f, req.ref, req.rail_pos, req.rail_neg, st.ideal.gain,
                  req.response_error)
    if not (gbw > 0):
        return unknown_waves(label, drive)
    t: Array = np.arange(2 * PERIOD_STEPS, dtype=float) / (PERIOD_STEPS * f)
    u = np.exp(2j * math.pi * f * t)
    sy = system(st, a0, gbw, rin, ro)
    z = phasor(sy, f)
    vo = req.vin * np.imag(z[sy.out] * u)
    io = req.vin * np.imag(z[sy.i_out] * u)
    ideal = req.vin * np.imag(complex(transfer(st.circuit, [f])[0]) * u)  # ideal op-amp
    flags = limit_flags(st, vo, io, t, parts, req.ref, (req.rail_pos, req.rail_neg))
    return settled_waves(label, drive, t, ideal, vo, flags, parts)


def step(req: Any, parts: Any) -> Waves:
    """The response to a step of --vin at t = 0 from rest, one part (module docstring)."""
    st = stage(req)
    assert isinstance(st, FilterStage) and st.ideal is not None
    label, a0, gbw, rin, ro = part_model(parts)
    drive = Drive(req.vin, 0.0, req.ref, req.rail_pos, req.rail_neg, st.ideal.gain,
                  req.response_error)
    if not (gbw > 0):
        return unknown_waves(label, drive)
    sec = st.ideal
    tau = 2 * sec.q / (2 * math.pi * sec.f0_hz) if sec.q > 0.5 else (
        1 / (2 * math.pi * sec.f0_hz * (1 / (2 * sec.q) - math.sqrt(1 / (4 * sec.q**2) - 1))))
    t_end = 12 * tau
    h = t_end / STEPS
    t: Array = np.arange(STEPS + 1, dtype=float) * h
    u = np.full(len(t), req.vin)
    u[0] = 0.0
    sy = system(st, a0, gbw, rin, ro)
    z = step_run(sy, u, h)
    # the ideal curve: the same network with an op-amp a million times faster than fn
    ideal = step_run(system(st, math.inf, 1e6 * sec.f0_hz, math.inf, 0.0), u, h)[:, sy.out]
    vo, io = z[:, sy.out], z[:, sy.i_out]
    flags = limit_flags(st, vo, io, t, parts, req.ref, (req.rail_pos, req.rail_neg))
    return settled_waves(label, drive, t, ideal, vo, flags, parts)


def unknown_waves(label: str, drive: Drive) -> Waves:
    nan = np.array([math.nan])
    return Waves(labels=(label,), drive=drive, t=np.zeros(1), ideal=np.zeros(1),
                 vout=np.full((1, 1), math.nan), swing_hi=nan, swing_lo=nan, peak_pos=nan,
                 peak_neg=nan, vpp=nan, thd=nan,
                 active=np.zeros((1, len(LIMITS)), dtype=bool), known=np.array([False]))


@dataclass(frozen=True)
class Step:
    """A step response and its figures (``picker wave PART --step``)."""

    waves: Waves
    figures: dict[str, float | None]
    what: str = ""  # the input step in words (empty: the step of --vin)
    left_out: str = ""  # what the prediction leaves out (empty: the module docstring's)

    def summary(self, i: int = 0) -> dict[str, Any]:
        """``picker wave PART --step --json``: the wave's record and the step's figures
        (V, s; overshoot as a ratio of the final value)."""
        extra = {k: v for k, v in (("step", self.what), ("left_out", self.left_out)) if v}
        return {**self.waves.summary(i), **self.figures, **extra}


def step_response(req: Any, parts: Any) -> Step:
    """The step and its figures; the final value is --vin times the network's DC gain."""
    st = stage(req)
    w = step(req, parts)
    final = req.vin * float(transfer(st.circuit, [0.0])[0].real)
    return Step(w, step_figures(w, final))


def step_figures(w: Waves, final: float) -> dict[str, float | None]:
    """Overshoot (ratio of the final value), 10-90% rise time and 1% settling time, s;
    None where they do not apply (a high- or band-pass settles to 0)."""
    vo = w.vout[0] - w.drive.ref_v
    t = w.t
    if not np.all(np.isfinite(vo)) or abs(final) < 1e-12:
        return {"final": final if np.all(np.isfinite(vo)) else None, "overshoot": None,
                "rise_time": None, "settling_time": None}
    y = vo / final
    over = max(0.0, float(y.max()) - 1.0)
    rise = None
    if (y >= 0.9).any() and (y >= 0.1).any():
        rise = float(t[np.argmax(y >= 0.9)] - t[np.argmax(y >= 0.1)])
    outside = np.flatnonzero(np.abs(y - 1) > 0.01)
    settle = float(t[outside[-1] + 1]) if len(outside) and outside[-1] + 1 < len(t) else None
    return {"final": final, "overshoot": over, "rise_time": rise, "settling_time": settle}


__all__ = ["COLUMNS", "System", "Step", "phasor", "sine", "step", "step_figures", "step_response", "step_run", "system"]
