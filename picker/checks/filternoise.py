"""The output-noise check of a second-order filter stage.

Every noise source reaches the output through its own transfer function, which the
filter's capacitors shape and the part's loop limits; the resistive stage's white
densities times one noise gain over one noise bandwidth (picker.checks.accuracy) do not
hold. Sources (white densities, uncorrelated, added in power):

- the op-amp's input voltage noise en, a source in series with its non-inverting input;
- its input current noise in, one source into each input;
- every resistor's thermal noise, a source √(4kTR) in series with it (the source
  resistance, the network and the load), k = 1.380649e-23 J/K (exact, SI 2019; CODATA
  2018), T the hottest ambient (``--temp-max``).

Each transfer function is solved exactly with the circuit solver (picker.circuit.mna)
over the filter's own netlist with its capacitors and the part's two-pole macromodel (the
loop of picker.circuit.loopgain: A0, GBW, the second pole from the follower phase margin,
Rin, Ro, input capacitances), the stage's own input shorted:

- a voltage source: the netlist with a 1 V source in series (the resistor split, or the
  op-amp's non-inverting pin moved behind the source), v(out) per volt;
- a current i into node x: the netlist with a 1 V source behind a resistor Rx to x
  (Rx the geometric mean of the network's resistors) gives h_o = v(out) and h_x = v(x);
  adding Rx changes the circuit by one conductance, so (Sherman-Morrison; e.g. Vlach and
  Singhal, Computer Methods for Circuit Analysis and Design, 2nd ed., ch. 4 (sensitivity
  by rank-one updates), from memory) the transimpedance is exactly
  Z_ox = Rx·h_o/(1 - h_x).

The output's mean-square noise is the integral over frequency of Σ density²·|H(j2πf)|²,
taken by the trapezoid rule in ln f (spectrally accurate for a smooth integrand) on a
per-part grid from f0/10⁴ to ``TOP`` = 10 times the part's GBW, ``PER_DECADE`` points a
decade (more for Q above 5: the section's peak keeps about ten points across its
half-power width), closed with the flat response below the grid (y·f at its first
point) and an f⁻² tail above it (y·f at its last point: the single-pole loop's own
roll-off, exact for it). The integral stops at 10·GBW on purpose: far above GBW the
macromodel's capacitors and Ro alone carry a flat feedthrough (the input capacitances
from the non-inverting input to the output, a filter capacitor from a resistor to Ro),
a floor that would make an integral to infinity grow without bound; it is the model's
limit, not the part's noise, and below 10·GBW it adds a negligible share. The check
fails where √(that) > ``--noise-max``/m. An unknown en or in adds nothing (a lower
bound: a part that fails on it fails for sure); an unknown loop value leaves the part
unknown.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal

import numpy as np

from picker.checks import Check
from picker.checks.accuracy import BOLTZMANN
from picker.checks.core import Array, CheckResult, Parts, result
from picker.checks.stability import model
from picker.circuit.loopgain import Model, closed_loop
from picker.circuit.mna import Element, Netlist, OpAmp, Resistor, Source
from picker.design.spec import Explained
from picker.quantities import fmt
from picker.stages.filterbase import FilterStage

if TYPE_CHECKING:
    from picker.design.spec import Spec

#: grid density of the noise integral, points per decade (raised for Q above 5)
PER_DECADE = 100
#: the grid spans f0·10^-DECADES .. TOP·GBW (per part; TOP·f0 if GBW is below f0)
DECADES = 4
TOP = 10.0
#: parts × grid points evaluated at once (bounds memory: 16 bytes each per netlist)
CELLS = 2_000_000
#: the node the injected sources use (no netlist of a stage type uses it)
NODE = "noise_x"

Group = Literal["en", "in", "resistors"]


@dataclass(frozen=True)
class NoiseSource:
    """One noise source's way to the output: ``out`` gives v(out) per volt of it (or, for a
    current, per volt behind ``rx``); ``at`` the injection node's voltage (currents)."""

    group: Group
    out: Netlist
    at: Netlist | None = None
    rx: float = 0.0
    ohm: float = 0.0  # the resistor's value (thermal noise 4kTR)


def _quiet(net: Netlist) -> list[Element]:
    """The netlist's elements with its own sources set to 0 V."""
    return [Source(e.plus, e.minus, 0.0) if isinstance(e, Source) else e for e in net.elements]


def sources(net: Netlist) -> list[NoiseSource]:
    """Every noise source of ``net`` with the netlist that carries it (module docstring)."""
    base = _quiet(net)
    amp = net.opamp
    assert amp is not None
    out: list[NoiseSource] = []
    finite = [e.ohm for e in base if isinstance(e, Resistor) and 0 < e.ohm < math.inf]
    rx = math.exp(sum(map(math.log, finite)) / len(finite)) if finite else 1e4
    for k, e in enumerate(base):
        if isinstance(e, Resistor) and 0 < e.ohm < math.inf:
            split = [*base[:k], Resistor(e.a, NODE, e.ohm), Source(NODE, e.b, 1.0), *base[k + 1:]]
            out.append(NoiseSource("resistors", Netlist(tuple(split), net.out), ohm=e.ohm))
    moved = [OpAmp(NODE, e.n, e.out) if isinstance(e, OpAmp) else e for e in base]
    out.append(NoiseSource("en", Netlist((*moved, Source(NODE, amp.p, 1.0)), net.out)))
    for node in (amp.p, amp.n):
        fed = (*base, Resistor(NODE, node, rx), Source(NODE, "0", 1.0))
        out.append(NoiseSource("in", Netlist(fed, net.out), Netlist(fed, node), rx))
    return out


def _grid(st: FilterStage, m: Model) -> Array:
    """Per part (rows) the log grid from f0/10^DECADES to TOP·max(GBW, f0), Hz; one
    number of points for all rows (the widest span at the grid density)."""
    assert st.ideal is not None
    f0 = st.ideal.f0_hz
    gbw = np.where(np.isfinite(m.gbw) & (m.gbw > 0), m.gbw, f0)
    lo = math.log10(f0) - DECADES
    hi = np.log10(TOP * np.maximum(gbw, f0))
    per = PER_DECADE * max(1.0, st.ideal.q / 5)
    n = int((float(hi.max(initial=lo + 1)) - lo) * per) + 2
    u = np.linspace(0.0, 1.0, n)
    return 10.0 ** (lo + (hi - lo)[:, None] * u[None, :])  # type: ignore[no-any-return]


def _integral(y: Array, f: Array) -> Array:
    """∫0^∞ y df per row: trapezoid in ln f, flat below the grid, f⁻² above it."""
    g = y * f
    x = np.log(f)
    inner = np.sum(0.5 * (g[:, 1:] + g[:, :-1]) * np.diff(x, axis=1), axis=1)
    return inner + g[:, 0] + g[:, -1]  # type: ignore[no-any-return]


def _chunk(srcs: list[NoiseSource], m: Model, f: Array) -> dict[Group, Array]:
    col = m.column()
    fr = f
    y: dict[Group, Array] = {g: np.zeros(f.shape) for g in ("en", "in", "resistors")}
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        for src in srcs:
            h = closed_loop(src.out, col, fr)
            if src.at is not None:  # a current: the transimpedance (module docstring)
                h = src.rx * h / (1 - closed_loop(src.at, col, fr))
            mag2 = np.abs(h) ** 2
            y[src.group] += mag2 * src.ohm if src.group == "resistors" else mag2
    return {g: _integral(v, f) for g, v in y.items()}


def integrals(p: Parts, s: Spec) -> dict[Group, Array]:
    """Per part ∫|H|² df of the three groups (en: V² per V²/Hz of en; in: V² per A²/Hz of
    in, both inputs; resistors: Σ R·∫|H|² df, V² per (4kT) J), memoised; NaN where a loop
    value is unknown (GBW, follower phase margin)."""
    st = s.stage
    assert isinstance(st, FilterStage)

    def make() -> dict[Group, Array]:
        m = model(p)
        srcs = sources(st.circuit)
        f = _grid(st, m)
        step = max(1, CELLS // max(f.shape[1], 1))
        parts = [_chunk(srcs, m.take(np.arange(i, min(i + step, len(m)))), f[i:i + step])
                 for i in range(0, len(m), step)]
        known = np.isfinite(m.gbw) & (m.gbw > 0) & ~np.isnan(m.wp2)
        out: dict[Group, Array] = {}
        for g in ("en", "in", "resistors"):
            v = np.concatenate([x[g] for x in parts]) if parts else np.zeros(0)
            out[g] = np.where(known, v, np.nan)
        return out

    return p.memo(("filter_noise", st.circuit), make)  # type: ignore[no-any-return]


def contributions(p: Parts, s: Spec) -> dict[Group, Array]:
    """Per part the mean-square output noise of each group, V² (unknown en or in: 0)."""
    k = integrals(p, s)
    four_kt = 4 * BOLTZMANN * s.requirement.temp_max_k
    en2 = np.nan_to_num(p["en_v_per_rthz"] ** 2, nan=0.0)
    in2 = np.nan_to_num(p["in_a_per_rthz"] ** 2, nan=0.0)
    return {"en": en2 * k["en"], "in": in2 * k["in"], "resistors": four_kt * k["resistors"]}


def output_noise(p: Parts, s: Spec) -> Array:
    """Per part the output RMS noise, V (module docstring)."""
    c = contributions(p, s)
    return np.sqrt(c["en"] + c["in"] + c["resistors"])  # type: ignore[no-any-return]


def _run(p: Parts, s: Spec) -> CheckResult:
    assert s.requirement.noise_max_v is not None
    return result("filter_noise", "voltage", "<=", s.requirement.noise_max_v / s.margin,
                  output_noise(p, s))


def _needs(s: Spec) -> tuple[str, ...]:
    return ("en_v_per_rthz", "in_a_per_rthz", "gbw_hz", "pm_unity_deg", "aol_v_per_v",
            "rin_ohm", "cin_diff_f", "cin_cm_f") + (("rout_ohm",) if s.stage.cload > 0 else ())


def _explain(s: Spec) -> list[Explained]:
    req = s.requirement
    assert req.noise_max_v is not None
    need = req.noise_max_v / s.margin
    return [Explained(
        "filter_noise", "allowed output noise (RMS, DC to beyond the loop's bandwidth)", need,
        "voltage", FILTER_NOISE.formula,
        f"{fmt(req.noise_max_v, 'voltage', 4)} / {s.margin:g} = {fmt(need, 'voltage', 4)} "
        f"(resistors at {req.temp_max_c:g} °C)")]


def _detail(s: Spec, p: Parts, i: int) -> str:
    c = contributions(p.take([i]), s)
    words = {"en": "en", "in": "in", "resistors": "resistors"}
    return ", ".join(f"{words[g]} {fmt(math.sqrt(float(c[g][0])), 'voltage', 3)}"
                     for g in ("en", "in", "resistors")) + " RMS at the output"


def _is_noise_filter(s: Spec) -> bool:
    return isinstance(s.stage, FilterStage) and s.requirement.noise_max_v is not None


FILTER_NOISE = Check(
    name="filter_noise", kind="voltage",
    reads=("en_v_per_rthz", "in_a_per_rthz", "aol_v_per_v", "gbw_hz", "pm_unity_deg",
           "rin_ohm", "rout_ohm", "cin_diff_f", "cin_cm_f"),
    run=_run, needs=_needs,
    formula="√(∫ (en²·|H_en|² + in²·(|Z_p|² + |Z_n|²) + Σ 4kT·R·|H_R|²) df) <= noise max/m, "
            "from DC to 10·GBW (closed by the loop's f⁻² tail), each H the exact transfer "
            "from that source to the output (filter with its capacitors, two-pole part model)",
    explain=_explain, detail=_detail, applies=_is_noise_filter, amplitude="independent")


__all__ = ["FILTER_NOISE", "NoiseSource", "contributions", "integrals", "output_noise",
           "sources"]
