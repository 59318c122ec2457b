"""ngspice reference for the waveform and response tests: a behavioural op-amp macromodel.

The netlist is written from the stage's actual resistors (the unreduced circuit: source
resistance, network, load, each to the reference node), not from picker's reduced
model. The op-amp is

- ``Rin`` between the inputs;
- a slew-clamped integrator: node x on a 1 F capacitor fed by the current
  min(max(ωu·(vp − vn) − ωp·(vx − vref), −SR), SR), so dx/dt is the single-pole
  dynamics capped at ±SR;
- an output limiter on x: a stiff conductance (1e12 S) past each swing limit;
- the output: x behind Ro, its current held within ±Iout by a behavioural source.
- with saturation resistances given (``out_rsat_*``): the output stage's own limit, the
  source ``V+ - head+`` behind Rsat+ (and ``V- + head-`` behind Rsat-): the output current
  is also at most ``(V+ - head+ - v(out))/Rsat+`` sourced (at most
  ``(v(out) - V- - head-)/Rsat-`` sunk), so the level reached falls linearly with the
  current; x's own limiter then sits Ro·Iout further out, so the stage limit decides.
  Without them the model is the one above, whose output reaches ``V+ - head+ - Ro·I``
  (x clamped behind Ro): for picker that is Rsat = Ro (``Part.frame``).

Small-signal (.ac) the clamps are inactive and the model is the single-pole VCVS with
Rin and Ro.

Optional, for the stability tests: the input capacitances (``cin_diff_f`` between the
inputs, ``cin_cm_f`` from each input to the reference), a second open-loop pole
``fp2_hz`` (an RC stage after the integrator: x2 follows x through 1 Ω and
1/(2π·fp2) F, and the output stage reads x2), a load capacitance ``cload`` (from the
requirement), an isolation resistor ``riso`` between the output pin and the load (the
feedback stays at the pin) and a feedback capacitor ``cf`` across rf. ``broken=True``
opens the loop for the .ac loop gain: a large inductor (1 MH: DC closed, AC open) between
the gain stage's node and the node the output stage reads, and a large capacitor (1 MF)
injecting the AC test source there. The output stage reads that node as a behavioural
voltage (no current drawn), so opening the loop there loses no loading:
T = -v(gain stage)/v(injected node), the stage's own source set to 0. SPICE reads ``M`` as milli, so numbers are written in plain exponent form.
"""

from __future__ import annotations

import math
import os
import shutil
import subprocess
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest

from picker.design.requirement import Requirement


@dataclass(frozen=True)
class Part:
    gbw_hz: float
    slew_v_per_s: float
    aol_v_per_v: float
    rin_ohm: float
    rout_ohm: float
    iout_a: float
    out_head_pos_v: float
    out_head_neg_v: float
    out_rsat_pos_ohm: float | None = None
    out_rsat_neg_ohm: float | None = None
    cin_diff_f: float | None = None
    cin_cm_f: float | None = None
    fp2_hz: float | None = None  # second open-loop pole (not a part field: derived)

    def frame(self, label: str = "ref-part"):  # type: ignore[no-untyped-def]
        import pandas as pd

        d = dict(self.__dict__)
        d.pop("fp2_hz")
        for k in ("out_rsat_pos_ohm", "out_rsat_neg_ohm"):
            if d[k] is None:  # x clamped behind Ro: the headroom grows by Ro·I
                d[k] = self.rout_ohm
        return pd.DataFrame([d], index=[label])


def _n(v: float) -> str:
    return f"{v:.12e}"


def _source_and_network(req: Requirement, ac: bool, freq_hz: float, *, riso: float = 0.0,
                        cf: float = 0.0, broken: bool = False) -> list[str]:
    net = dict(req.network or {})
    rs = req.source_ohm

    def src(name: str, node: str, scale: float) -> str:
        if ac:
            return f"{name} {node} ref DC 0 AC {abs(scale):.12g} {0 if scale > 0 else 180}"
        return f"{name} {node} ref SIN(0 {_n(scale * req.vin)} {_n(freq_hz)})"

    def series(a: str, b: str, name: str, r: float) -> str:
        return f"{name} {a} {b} {_n(r)}" if r > 0 else f"V{name} {a} {b} DC 0"

    t = req.topology
    lines: list[str] = []
    if t == "inverting":
        lines += [src("Vs", "s", 1.0), series("s", "a", "Rs", rs),
                  f"Rg a vn {_n(net['rg'])}", series("out", "vn", "Rf", net["rf"]),
                  series("vp", "ref", "Rp", net.get("rp", 0.0))]
    elif t in ("non-inverting", "follower"):
        lines += [src("Vs", "s", 1.0), series("s", "a", "Rs", rs),
                  series("a", "vp", "Rp", net.get("rp", 0.0)),
                  series("out", "vn", "Rf", net.get("rf", 0.0))]
        if t == "non-inverting" and math.isfinite(net["rg"]):
            lines.append(f"Rg vn ref {_n(net['rg'])}")
    else:  # difference, driven by +v/2 and -v/2, each behind Rs
        lines += [src("Vsp", "sp", 0.5), src("Vsn", "sn", -0.5),
                  series("sp", "a", "Rsp", rs), series("sn", "b", "Rsn", rs),
                  f"R3 a vp {_n(net['r3'])}", f"R4 vp ref {_n(net['r4'])}",
                  f"R1 b vn {_n(net['r1'])}", f"R2 out vn {_n(net['r2'])}"]
    if cf > 0:
        lines.append(f"Cf out vn {_n(cf)}")
    load = "out"
    if riso > 0:
        lines.append(f"Riso out ld {_n(riso)}")
        load = "ld"
    if req.load_ohm is not None:
        lines.append(f"RL {load} ref {_n(req.load_ohm)}")
    if req.cload_f > 0:
        lines.append(f"CL {load} ref {_n(req.cload_f)}")
    return lines


def netlist(req: Requirement, part: Part, control: list[str], *, ac: bool,
            freq_hz: float | None = None, riso: float = 0.0, cf: float = 0.0,
            broken: bool = False) -> str:
    f = freq_hz or req.freq_hz
    wu = 2 * math.pi * part.gbw_hz
    wp = wu / part.aol_v_per_v
    hi = req.rail_pos - part.out_head_pos_v
    lo = req.rail_neg + part.out_head_neg_v
    rp, rn = part.out_rsat_pos_ohm, part.out_rsat_neg_ohm
    xo = "x" if part.fp2_hz is None else "x2"
    xr = "xb" if broken else xo  # the node the output stage reads
    io = f"(v({xr})-v(out))/{_n(part.rout_ohm)}"
    if rp is not None and rn is not None:
        io = f"max(min({io}, ({_n(hi)}-v(out))/{_n(rp)}), ({_n(lo)}-v(out))/{_n(rn)})"
        x_hi, x_lo = hi + part.rout_ohm * part.iout_a, lo - part.rout_ohm * part.iout_a
    else:
        x_hi, x_lo = hi, lo
    net = _source_and_network(req, ac, f, riso=riso, cf=cf)
    extra = []
    if part.cin_diff_f:
        extra.append(f"Cind vp vn {_n(part.cin_diff_f)}")
    if part.cin_cm_f:
        extra += [f"Ccmp vp ref {_n(part.cin_cm_f)}", f"Ccmn vn ref {_n(part.cin_cm_f)}"]
    if part.fp2_hz is not None:
        extra += ["R2p x x2 1", f"C2p x2 ref {_n(1 / (2 * math.pi * part.fp2_hz))}"]
    if broken:
        extra += [f"Lbrk {xo} xb 1e6", "Cinj xb tst 1e6", "Vtst tst ref DC 0 AC 1"]
    body = [
        "* picker waveform reference: behavioural op-amp macromodel",
        f"Vref ref 0 DC {_n(req.ref)}",
        *net, *extra,
        f"Rin vp vn {_n(part.rin_ohm)}",
        "Cx x 0 1",
        f"Bint 0 x I = min(max({_n(wu)}*v(vp,vn) - {_n(wp)}*(v(x)-v(ref)), "
        f"-{_n(part.slew_v_per_s)}), {_n(part.slew_v_per_s)})",
        f"Bclamp x 0 I = 1e12*(uramp(v(x)-{_n(x_hi)}) - uramp({_n(x_lo)}-v(x)))",
        f"Bo 0 out I = min(max({io}, -{_n(part.iout_a)}), {_n(part.iout_a)})",
        ".options reltol=1e-6 abstol=1e-12 vntol=1e-9",
        ".control", *control, ".endc", ".end",
    ]
    return "\n".join(body) + "\n"


def _ngspice(text: str, tmp_path: Path, name: str, outputs: int = 1) -> list[np.ndarray]:
    """Run ngspice on ``text``; @OUT0@, @OUT1@, ... name the files its wrdata lines write."""
    if shutil.which("ngspice") is None:
        if os.environ.get("CI"):
            pytest.fail("ngspice is not installed; scripts/test installs it")
        pytest.skip("ngspice is not installed (scripts/test installs it)")
    files = [tmp_path / f"{name}.{k}.txt" for k in range(outputs)]
    for k, path in enumerate(files):
        text = text.replace(f"@OUT{k}@", str(path))
    cir = tmp_path / f"{name}.cir"
    cir.write_text(text)
    done = subprocess.run(["ngspice", "-b", str(cir)], capture_output=True, text=True,
                          timeout=120, cwd=tmp_path)
    for path in files:
        assert path.exists(), done.stdout[-2000:] + done.stderr[-2000:]
    return [np.loadtxt(path, ndmin=2) for path in files]


def tran(req: Requirement, part: Part, freq_hz: float, tmp_path: Path, *, periods: int = 12,
         points: int = 2000, name: str = "tran") -> tuple[np.ndarray, np.ndarray]:
    """ngspice .tran: (t, v(out)) over the last two periods of ``periods``, on a uniform
    grid of ``points`` per period (ngspice's own steps linearised onto it)."""
    period = 1.0 / freq_hz
    step = period / points
    start = (periods - 2) * period
    control = [f"tran {_n(step)} {_n(periods * period)} {_n(start)} {_n(step)}",
               "linearize v(out)", "wrdata @OUT0@ v(out)"]
    (data,) = _ngspice(netlist(req, part, control, ac=False, freq_hz=freq_hz), tmp_path, name)
    return data[:, 0], data[:, 1]


def ac(req: Requirement, part: Part, tmp_path: Path, *, fstart: float, fstop: float,
       at: float, per_decade: int = 2000,
       name: str = "ac") -> tuple[np.ndarray, np.ndarray, complex]:
    """ngspice .ac per volt of input: a log sweep (f, complex v(out)) and v(out) at ``at``."""
    control = [f"ac dec {per_decade} {_n(fstart)} {_n(fstop)}", "wrdata @OUT0@ v(out)",
               f"ac lin 1 {_n(at)} {_n(at)}", "wrdata @OUT1@ v(out)"]
    sweep, point = _ngspice(netlist(req, part, control, ac=True), tmp_path, name, outputs=2)
    return sweep[:, 0], sweep[:, 1] + 1j * sweep[:, 2], complex(point[0, 1], point[0, 2])


def ac_sweep(req: Requirement, part: Part, tmp_path: Path, *, fstart: float, fstop: float,
             per_decade: int = 200, riso: float = 0.0, cf: float = 0.0, broken: bool = False,
             probe: str = "v(out)", name: str = "acs") -> tuple[np.ndarray, np.ndarray]:
    """ngspice .ac log sweep: (f, complex probe) (with ``broken`` the loop is opened)."""
    if broken:
        probe = f"-v({'x' if part.fp2_hz is None else 'x2'})/v(xb)"
    control = [f"ac dec {per_decade} {_n(fstart)} {_n(fstop)}", f"wrdata @OUT0@ {probe}"]
    text = netlist(req, part, control, ac=True, riso=riso, cf=cf, broken=broken)
    if broken:  # the stage's own source off: only the test source drives the loop
        text = "\n".join(line.replace(" AC 1 0", " AC 0 0").replace(" AC 0.5 0", " AC 0 0")
                         .replace(" AC 0.5 180", " AC 0 0")
                         if line.startswith("Vs") else line for line in text.splitlines()) + "\n"
    (data,) = _ngspice(text, tmp_path, name)
    return data[:, 0], data[:, 1] + 1j * data[:, 2]


def f3db(f: np.ndarray, g: np.ndarray) -> float:
    """The first frequency of a sweep where |g| falls 10·log10(2) dB below its first
    point (log-frequency interpolation between the two bracketing points)."""
    db = 20 * np.log10(np.abs(g))
    thr = db[0] - 10 * np.log10(2)
    i = int(np.argmax(db < thr))
    assert i > 0, "the sweep never falls 3 dB"
    return float(10 ** np.interp(thr, [db[i], db[i - 1]], np.log10([f[i], f[i - 1]])))
