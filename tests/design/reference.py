"""Outside references for the solver tests: ngspice runs and sympy nodal analysis.

A stage is written out element by element (source, source resistance, every network
resistor, load, and the op-amp macromodel) as the unreduced circuit, independently of
picker's own reduction (picker.stages); the same description becomes an
ngspice netlist and a sympy modified-nodal-analysis system.

Macromodel in ngspice: a transconductance A0/Rx into Rx ‖ Cx (the single pole,
fp = 1/(2π·Rx·Cx) = GBW/A0), a unity voltage buffer, then Ro; Rin between the inputs.
Values are written with full precision and `meg` never appears as `M` (SPICE reads M
as milli).
"""

from __future__ import annotations

import math
import os
import shutil
import subprocess
from dataclasses import dataclass
from pathlib import Path

import pytest
import sympy as sp

NGSPICE = shutil.which("ngspice")


def need_ngspice() -> str:
    if NGSPICE:
        return NGSPICE
    if os.environ.get("CI"):
        pytest.fail("ngspice is not installed; scripts/test installs it")
    pytest.skip("ngspice is not installed (scripts/test installs it)")


@dataclass(frozen=True)
class OpAmp:
    a0: float
    gbw: float
    rin: float | None  # None: no resistor (infinite)
    ro: float | None  # None: no resistor (0)
    cin: float | None = None  # None: no input capacitance


@dataclass(frozen=True)
class Circuit:
    """Elements: ('R', a, b, ohms), ('C', a, b, farads), ('V', plus, minus, volts),
    ('OPA', p, n, out, OpAmp)."""

    name: str
    elements: tuple[tuple, ...]  # type: ignore[type-arg]
    out: str = "o"


def stage_circuit(name: str, topology: str, net: dict[str, float], rs: float,
                  load: float | None, amp: OpAmp) -> Circuit:
    """The unreduced circuit of a stage, input 1 V (difference: +0.5 V and -0.5 V)."""
    e: list[tuple] = []  # type: ignore[type-arg]
    if topology == "difference":
        e += [("V", "s1", "0", 0.5), ("V", "s2", "0", -0.5),
              ("R", "s1", "a1", rs), ("R", "a1", "p", net["r3"]), ("R", "p", "0", net["r4"]),
              ("R", "s2", "a2", rs), ("R", "a2", "n", net["r1"]), ("R", "n", "o", net["r2"])]
    else:
        e.append(("V", "s", "0", 1.0))
        if topology == "inverting":
            e += [("R", "s", "a", rs), ("R", "a", "n", net["rg"]), ("R", "n", "o", net["rf"])]
            e.append(("R", "p", "0", net["rp"]) if net.get("rp") else ("R", "p", "0", 0.0))
        else:
            e.append(("R", "s", "a", rs))
            e.append(("R", "a", "p", net.get("rp", 0.0)))
            if topology == "non-inverting":
                e += [("R", "n", "0", net["rg"]), ("R", "n", "o", net["rf"])]
            else:
                e.append(("R", "n", "o", net.get("rf", 0.0)))
    if load is not None:
        e.append(("R", "o", "0", load))
    e.append(("OPA", "p", "n", "o", amp))
    return Circuit(name, tuple(e))


# -- ngspice ---------------------------------------------------------------------------

def _v(x: float) -> str:
    return repr(float(x))  # plain exponent form: 1e-06, 2000000.0 (never an M suffix)


def _netlist_lines(c: Circuit, k: int) -> list[str]:
    lines: list[str] = []
    name = {"0": "0"}

    def node(n: str) -> str:
        return name.setdefault(n, f"c{k}_{n}")

    # a 0 Ω resistor is a wire: join its nodes by a 0 V source (ngspice rejects R = 0)
    for i, el in enumerate(c.elements):
        if el[0] == "R":
            _, a, b, r = el
            if r == 0:
                lines.append(f"VW{k}_{i} {node(a)} {node(b)} DC 0")
            else:
                lines.append(f"R{k}_{i} {node(a)} {node(b)} {_v(r)}")
        elif el[0] == "C":
            _, a, b, c_f = el
            lines.append(f"C{k}_{i} {node(a)} {node(b)} {_v(c_f)}")
        elif el[0] == "V":
            _, a, b, v = el
            phase = " 180" if v < 0 else ""
            lines.append(f"V{k}_{i} {node(a)} {node(b)} DC {_v(v)} AC {_v(abs(v))}{phase}")
        else:
            _, p, n, o, amp = el
            rx = 1e-3
            cx = amp.a0 / (2 * math.pi * amp.gbw * rx)  # fp = GBW/A0 = 1/(2π·Rx·Cx)
            x, y = f"c{k}_x", f"c{k}_y"
            if amp.rin is not None:
                lines.append(f"RIN{k} {node(p)} {node(n)} {_v(amp.rin)}")
            if amp.cin is not None:
                lines.append(f"CIN{k} {node(p)} {node(n)} {_v(amp.cin)}")
            lines.append(f"G{k} 0 {x} {node(p)} {node(n)} {_v(amp.a0 / rx)}")
            lines.append(f"RX{k} {x} 0 {_v(rx)} noisy=0")
            lines.append(f"CX{k} {x} 0 {_v(cx)}")
            if amp.ro:
                lines.append(f"E{k} {y} 0 {x} 0 1")
                lines.append(f"RO{k} {y} {node(o)} {_v(amp.ro)}")
            else:
                lines.append(f"E{k} {node(o)} 0 {x} 0 1")
    return lines


def _read_table(path: Path) -> list[list[float]]:
    rows = path.read_text().split("\n")[1:]
    return [[float(v) for v in r.split()] for r in rows if r.strip()]


def ngspice_gains(circuits: list[Circuit], freqs: list[float], tmp: Path) -> dict[str, list[complex]]:
    """Closed-loop gain of each circuit: [DC (.op), then .ac at each frequency]."""
    exe = need_ngspice()
    lines = ["* picker solver reference"]
    for k, c in enumerate(circuits):
        lines += _netlist_lines(c, k)
    outs = " ".join(f"v(c{k}_{c.out})" for k, c in enumerate(circuits))
    lines += [".control", "set wr_singlescale", "set wr_vecnames", "op", f"wrdata op.txt {outs}"]
    for i, f in enumerate(freqs):
        lines += [f"ac lin 1 {_v(f)} {_v(f)}", f"wrdata ac{i}.txt {outs}"]
    lines += [".endc", ".end", ""]
    (tmp / "stages.cir").write_text("\n".join(lines))
    run = subprocess.run([exe, "-b", "stages.cir"], cwd=tmp, capture_output=True, text=True,
                         timeout=120)
    if not (tmp / "op.txt").exists():
        raise AssertionError(f"ngspice failed:\n{run.stdout}\n{run.stderr}")
    op = _read_table(tmp / "op.txt")[0][1:]
    out = {c.name: [complex(op[k])] for k, c in enumerate(circuits)}
    for i in range(len(freqs)):
        row = _read_table(tmp / f"ac{i}.txt")[0][1:]
        for k, c in enumerate(circuits):
            out[c.name].append(complex(row[2 * k], row[2 * k + 1]))
    return out


def ngspice_noise(c: Circuit, tmp: Path, temp_c: float, fstop: float = 1e11) -> float:
    """Integrated output noise (V RMS) of ngspice's .noise over 1 Hz .. fstop."""
    exe = need_ngspice()
    lines = ["* picker noise reference", f".options temp={_v(temp_c)} tnom={_v(temp_c)}"]
    lines += _netlist_lines(c, 0)
    src = next(f"V0_{i}" for i, el in enumerate(c.elements) if el[0] == "V")
    lines += [".control", f"noise v(c0_{c.out}) {src} dec 200 1 {_v(fstop)}", "setplot noise2",
              "wrdata noise.txt onoise_total", ".endc", ".end", ""]
    (tmp / "noise.cir").write_text("\n".join(lines))
    run = subprocess.run([exe, "-b", "noise.cir"], cwd=tmp, capture_output=True, text=True,
                         timeout=120)
    if not (tmp / "noise.txt").exists():
        raise AssertionError(f"ngspice failed:\n{run.stdout}\n{run.stderr}")
    return float((tmp / "noise.txt").read_text().split()[0])


def ngspice_dc(cases: list[tuple[Circuit, list[str]]], tmp: Path) -> list[tuple[float, float]]:
    """.op of several circuits in one run: (output voltage, op-amp output current) each.

    Extra element lines are templates: ``{k}`` becomes the circuit's number, so node
    ``p`` of circuit k is ``c{k}_p``. The current is that of the macromodel's output
    source (into the output node, through Ro when there is one).
    """
    exe = need_ngspice()
    lines = ["* picker dc reference"]
    vecs = []
    for k, (c, extra) in enumerate(cases):
        lines += _netlist_lines(c, k) + [x.format(k=k) for x in extra]
        vecs += [f"v(c{k}_{c.out})", f"e{k}#branch"]
    lines += [".control", "set wr_singlescale", "op", f"wrdata op.txt {' '.join(vecs)}",
              ".endc", ".end", ""]
    (tmp / "dc.cir").write_text("\n".join(lines))
    run = subprocess.run([exe, "-b", "dc.cir"], cwd=tmp, capture_output=True, text=True,
                         timeout=120)
    if not (tmp / "op.txt").exists():
        raise AssertionError(f"ngspice failed:\n{run.stdout}\n{run.stderr}")
    row = [float(v) for v in (tmp / "op.txt").read_text().split()][1:]
    return [(row[2 * k], row[2 * k + 1]) for k in range(len(cases))]


# -- sympy nodal analysis ----------------------------------------------------------------

def sympy_gain(c: Circuit, freq: float | None = None, a: sp.Expr | None = None) -> sp.Expr:
    """vo per volt of input by modified nodal analysis in exact arithmetic.

    ``freq`` None: DC; otherwise s = j·2π·f. ``a`` overrides the op-amp's A(s) (a symbol
    for return-ratio checks). A resistor of 0 Ω is a wire (a 0 V branch); a capacitor
    is the admittance s·C (open at DC).
    """
    def q(x: float) -> sp.Expr:
        return sp.Rational(repr(float(x)))

    # expand the op-amp: Rin between the inputs, ideal source _y = A·(vp - vn), Ro to out
    flat: list[tuple] = []  # type: ignore[type-arg]
    for el in c.elements:
        if el[0] != "OPA":
            flat.append(el)
            continue
        _, p, n, o, amp = el
        if amp.rin is not None:
            flat.append(("R", p, n, amp.rin))
        if amp.cin is not None:
            flat.append(("C", p, n, amp.cin))
        if a is None:
            a0, wp = q(amp.a0), 2 * sp.pi * q(amp.gbw) / q(amp.a0)
            s = 0 if freq is None else sp.I * 2 * sp.pi * q(freq)
            a_s = a0 / (1 + s / wp)
        else:
            a_s = a
        flat += [("E", "_y", p, n, a_s), ("R", "_y", o, amp.ro or 0.0)]
    s_var = 0 if freq is None else sp.I * 2 * sp.pi * q(freq)
    nodes = sorted({nd for el in flat for nd in el[1:3 if el[0] != "E" else 4]} - {"0"})
    idx = {nd: i for i, nd in enumerate(nodes)}
    branches = [el for el in flat if el[0] in ("V", "E") or (el[0] == "R" and el[3] == 0)]
    size = len(nodes) + len(branches)
    m = sp.zeros(size, size)
    rhs = sp.zeros(size, 1)

    def at(nd: str) -> int | None:
        return None if nd == "0" else idx[nd]

    row = len(nodes)
    for el in flat:
        kind, plus = el[0], at(el[1])
        minus = None if kind == "E" else at(el[2])
        if kind == "C" or (kind == "R" and el[3] != 0):
            g = s_var * q(el[3]) if kind == "C" else 1 / q(el[3])
            for u, w, sgn in ((plus, plus, 1), (minus, minus, 1), (plus, minus, -1),
                              (minus, plus, -1)):
                if u is not None and w is not None:
                    m[u, w] += sgn * g
            continue
        # a branch: current unknown in column `row`, its voltage law in row `row`
        for nd, sgn in ((plus, 1), (minus, -1)):
            if nd is not None:
                m[nd, row] += sgn
                m[row, nd] += sgn
        if kind == "V":
            rhs[row] = q(el[3])
        elif kind == "E":
            for nd, sgn in ((at(el[2]), -1), (at(el[3]), 1)):  # v_y - A·(vp - vn) = 0
                if nd is not None:
                    m[row, nd] += sgn * el[4]
        row += 1
    sol = m.LUsolve(rhs)
    return sol[idx[c.out]]


def to_complex(x: sp.Expr) -> complex:
    return complex(sp.N(x, 30))
