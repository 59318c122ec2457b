"""Common-mode rejection of the difference stage: resistor mismatch and the part's CMRR.

The stage's figure, worst case. For each corner c of the four resistors at R·(1 ± t)
(16 corners, ``--tolerance``; picker.stages.difference ``transfers``, ideal op-amp
around the network, Thévenin reduction of the dividers; e.g. Horowitz and Hill, The
Art of Electronics, 3rd ed., ch. 4, from memory):

    Ad_c  = the differential gain,
    Acm_c = (r4·(Rs + r1) - r2·(Rs + r3)) / ((Rs + r1)·(Rs + r3 + r4)),
    P_c   = kcm·NG = r4/(Rs + r3 + r4) · (1 + r2/(Rs + r1)).

The part's own rejection is an input-referred error kcm·Vcm/CMRR_op (its inputs sit at
kcm·Vcm), amplified by the noise gain: P_c·x per volt of common mode, x = 10^(-CMRR_op/20).
The worst case adds magnitudes:

    1/CMRR = max_c (|Acm_c| + P_c·x) / Ad_c.

``--tolerance-rule rss``: |Acm| + t·√(Σ (∂Acm/∂ln ri)²) at the nominal values (first
order; common practice, no source), nominal Ad and P. The textbook approximation for
matched ratios, Rs = 0, worst case is CMRR ≈ (1 + G)/(4t) (e.g. Franco, Design with
Operational Amplifiers and Analog Integrated Circuits, 4th ed., ch. 2, from memory);
``--explain`` prints it beside the exact figure.

The need (dB), the stricter of:

- ``--cmrr``;
- with ``--vcm``: the output error the common-mode range causes must fit a budget:
  ``--offset-max``/m when given (the same allowance the offset check gives the part's
  own offset; each error is held to it on its own), else half the gain-error allowance
  at the output amplitude, ½·(e/m)·Vp,out (the error is then no more than half the
  largest gain error at full scale). The error is at most Ad_max·ΔVcm/CMRR (ΔVcm the
  largest distance of --vcm from the reference, Ad_max the largest differential gain
  over the corners; an upper bound of max_c |Acm_c|·ΔVcm), so
  need = 20·log10(Ad_max·ΔVcm/budget).

Without either the check reports the figure as information: it passes (margin ∞, so it
never limits the ranking), and a blank CMRR does not make a part unknown; ``has`` is
then the network's figure alone (an upper bound). With a need, a blank CMRR makes the
part unknown unless the network alone already fails (the central unknown rule).

The margin is linear, 10^((has - need)/20): the common-mode error allowed over the
error caused, as for offset (2% either side of the limit is ±0.17 dB).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from typing import TYPE_CHECKING

import numpy as np

from picker.checks import Check
from picker.checks.core import CheckResult, Coded, Parts
from picker.design.spec import Explained
from picker.quantities import fmt
from picker.stages.difference import NAMES, corners, transfers

if TYPE_CHECKING:
    from picker.checks.core import Array
    from picker.design.spec import Spec

#: Share of the gain-error allowance at full output the common-mode error may take
#: when no --offset-max is given (module docstring).
GAIN_BUDGET_SHARE = 0.5
#: A part's CMRR the explanation combines with the network when no need is given, dB.
EXAMPLE_PART_DB = 90.0


@dataclass(frozen=True)
class Rejection:
    """The stage's common-mode transfers at the corners that can be the worst.

    Arrays over corners (a corner no worse than another on both terms is dropped):
    ``a`` = |Acm|/Ad, ``b`` = kcm·NG/Ad (per unit of 1/CMRR_op); ``ad_max`` the largest
    differential gain over all corners; ``worst`` names the network's worst corner.
    """

    a: Array
    b: Array
    ad_max: float
    worst: str

    def inverse(self, x: Array) -> Array:
        """1/CMRR of the stage per part, x = 10^(-CMRR_op/20) (0: the network alone)."""
        out = self.a[0] + self.b[0] * x
        for a, b in zip(self.a[1:].tolist(), self.b[1:].tolist(), strict=True):
            np.maximum(out, a + b * x, out=out)
        return out

    @property
    def network_db(self) -> float:
        """The network's own worst-case CMRR, dB (inf: matched exactly)."""
        return _db(float(np.max(self.a)))

    def combined_db(self, part_db: float) -> float:
        """The stage's CMRR with a part of ``part_db``, dB."""
        return _db(float(self.inverse(np.array([10 ** (-part_db / 20)]))[0]))

    def part_min_db(self, need_db: float) -> float | None:
        """The least part CMRR that lets the stage reach ``need_db`` (None: the network
        alone misses it): x <= min_c (10^(-need/20) - a_c)/b_c."""
        room = np.min((10 ** (-need_db / 20) - self.a) / self.b)
        return None if room <= 0 else -20 * math.log10(float(room))


def _db(inverse: float) -> float:
    return math.inf if inverse <= 0 else -20 * math.log10(inverse)


def _rss(rs: float, nominal: dict[str, float], t: float) -> Rejection:
    """|Acm| + t·√(Σ (∂Acm/∂ln ri)²) at the nominal values (relative steps of 1e-6)."""
    ad, acm, kcm, ng = (float(v) for v in transfers(rs, nominal))
    step, total = 1e-6, 0.0
    for n in NAMES:
        moved = float(transfers(rs, {**nominal, n: nominal[n] * (1 + step)})[1])
        total += ((moved - acm) / step) ** 2
    spread = abs(acm) + t * math.sqrt(total)
    return Rejection(np.array([spread / ad]), np.array([kcm * ng / ad]), ad, "")


@lru_cache(maxsize=64)
def _rejection(rs: float, res: tuple[float, ...], t: float, rule: str) -> Rejection:
    nominal = dict(zip(NAMES, res, strict=True))
    if rule == "rss" and t > 0:
        return _rss(rs, nominal, t)
    net = corners(nominal, t) if t > 0 else {k: np.array([v]) for k, v in nominal.items()}
    ad, acm, kcm, ng = transfers(rs, net)
    a, b = np.abs(acm) / ad, kcm * ng / ad
    keep = [i for i in range(len(a))
            if not any((a[j] >= a[i]) & (b[j] >= b[i]) & ((a[j] > a[i]) | (b[j] > b[i]))
                       for j in range(len(a)))]
    i = int(np.argmax(a))
    worst = (", ".join(f"{k} {100 * (net[k][i] / nominal[k] - 1):+.3g}%" for k in NAMES)
             if t > 0 else "")
    order = np.argsort(-a[keep])
    kept = np.asarray(keep)[order]
    return Rejection(a[kept], b[kept], float(np.max(ad)), worst)


def rejection(s: Spec) -> Rejection:
    """The stage's rejection terms (module docstring), computed once per network."""
    req, st = s.requirement, s.stage
    return _rejection(req.source_ohm, tuple(float(st.resistors[k]) for k in NAMES),
                      req.tolerance, req.tolerance_rule)


def vcm_budget(s: Spec) -> tuple[float, str]:
    """The output error the common-mode range may cause, V, and where it comes from."""
    req, m = s.requirement, s.margin
    if req.offset_max_v is not None:
        return req.offset_max_v / m, f"--offset-max {fmt(req.offset_max_v, 'voltage')}/{m:g}"
    b = GAIN_BUDGET_SHARE * req.gain_error / m * req.vout
    return b, (f"{GAIN_BUDGET_SHARE:g} × gain error {fmt(req.gain_error, 'ratio')}/{m:g} × "
               f"{fmt(req.vout, 'voltage')} out")


def vcm_span(s: Spec) -> float:
    """Largest distance of --vcm from the reference, V (0 without --vcm)."""
    req = s.requirement
    if req.vcm is None:
        return 0.0
    return max(abs(req.vcm[0] - req.ref), abs(req.vcm[1] - req.ref))


def need_db(s: Spec) -> tuple[float | None, str]:
    """The CMRR the stage needs, dB (None: none asked), and its numbers
    (``expression = need (where from)``)."""
    req = s.requirement
    needs: list[tuple[float, str]] = []
    if req.cmrr_min_db is not None:
        db = req.cmrr_min_db
        needs.append((db, f"{fmt(db, 'decibel', 4)} = {fmt(db, 'decibel', 4)} (--cmrr"))
    dv = vcm_span(s)
    if dv > 0:
        budget, where = vcm_budget(s)
        ad = rejection(s).ad_max
        db = 20 * math.log10(ad * dv / budget)
        needs.append((db, f"20 × log10({ad:.5g} × {fmt(dv, 'voltage', 4)} / "
                          f"{fmt(budget, 'voltage', 4)}) = {fmt(db, 'decibel', 4)} (Ad_max × "
                          f"ΔVcm / budget, budget {where}"))
    if not needs:
        why = ("--vcm at the reference: no error to budget" if req.vcm is not None
               else "no --cmrr or --vcm given")
        return None, (f"0 dB = 0 dB (none asked, {why}: the stage's figure is shown, not "
                      "judged)")
    needs.sort(key=lambda n: -n[0])
    others = "".join(f"; stricter than {fmt(n[0], 'decibel', 4)}" for n in needs[1:])
    return needs[0][0], needs[0][1] + others + ")"


def _x(p: Parts) -> Array:
    """10^(-CMRR_op/20) per part, 0 where unknown (the network alone: an upper bound)."""
    x: Array = np.power(10.0, -p["cmrr_db"] / 20)
    return np.nan_to_num(x, nan=0.0)


def stage_db(p: Parts, s: Spec) -> list[float | None]:
    """The stage's worst-case CMRR with each part, dB (None where the part's CMRR is
    unknown, or for a stage that is not a difference stage)."""
    if not CMRR_CHECK.applies(s):
        return [None] * len(p)
    op = p["cmrr_db"]
    with np.errstate(divide="ignore"):
        db = -20 * np.log10(rejection(s).inverse(_x(p)))
    return [None if math.isnan(o) or not math.isfinite(d) else d
            for o, d in zip(op.tolist(), db.tolist(), strict=True)]


def _run(p: Parts, s: Spec) -> CheckResult:
    """The stage's worst-case CMRR per part against the need (module docstring)."""
    n = len(p)
    with np.errstate(divide="ignore"):
        has = -20 * np.log10(rejection(s).inverse(_x(p)))
    need, _ = need_db(s)
    ge = Coded.same(">=", n)
    if need is None:
        return CheckResult("common_mode_rejection", "decibel", ge,
                           np.broadcast_to(np.float64(0.0), (n,)), has, np.full(n, math.inf),
                           Coded.same("information: no need given", n))
    with np.errstate(over="ignore", invalid="ignore"):
        margin = np.power(10.0, (has - need) / 20)
    return CheckResult("common_mode_rejection", "decibel", ge,
                       np.broadcast_to(np.float64(need), (n,)), has, margin, Coded.same("", n))


def _needs(s: Spec) -> tuple[str, ...]:
    """The part's CMRR matters whenever a need is given (its term is never zero)."""
    return ("cmrr_db",) if need_db(s)[0] is not None else ()


def _explain(s: Spec) -> list[Explained]:
    req, st = s.requirement, s.stage
    rj = rejection(s)
    need, numbers = need_db(s)
    t, rule = req.tolerance, req.tolerance_rule
    r = st.resistors
    g = r["r2"] / (req.source_ohm + r["r1"])
    rows = [Explained("common_mode_rejection", "common-mode rejection needed",
                      0.0 if need is None else need, "decibel", CMRR_CHECK.formula, numbers)]
    textbook = (f"; textbook (1 + G)/(4t) = {1 + g:.4g}/{4 * t:.4g} = "
                f"{fmt(20 * math.log10((1 + g) / (4 * t)), 'decibel', 4)}"
                if t > 0 and rule == "worst" else "")
    corner = (f" at r1..r4 {rj.worst}" if rj.worst else
              " at the nominal values plus the root-sum-square spread" if t > 0 else "")
    rows.append(Explained(
        "cmrr_network", "the network's own CMRR (resistor mismatch)", rj.network_db, "decibel",
        "max over corners Ad/|Acm|, Acm = (r4·(Rs + r1) - r2·(Rs + r3))/((Rs + r1)·(Rs + r3 "
        "+ r4)) (ideal op-amp)",
        f"{fmt(t, 'ratio')} resistors ({rule}){corner}: |Acm|/Ad = {float(np.max(rj.a)):.5g} "
        f"-> {fmt(rj.network_db, 'decibel', 4)}{textbook}"))
    i = int(np.argmax(rj.a))
    part_db = EXAMPLE_PART_DB if need is None else rj.part_min_db(need)
    if part_db is None:
        combined = (f"the network alone misses {fmt(need, 'decibel', 4)}: no part can; "
                    "tighter resistors (--tolerance) raise it")
    else:
        what = "a part of" if need is None else "the least part CMRR,"
        combined = (f"{what} {fmt(part_db, 'decibel', 4)}: 1/CMRR = {float(rj.a[i]):.4g} + "
                    f"{float(rj.b[i]):.4g} × 10^(-{part_db:.4g}/20) -> "
                    f"{fmt(rj.combined_db(part_db), 'decibel', 4)}")
    rows.append(Explained(
        "cmrr_db", "least part CMRR" if need is not None else "stage CMRR with a part",
        part_db if need is not None else rj.combined_db(EXAMPLE_PART_DB), "decibel",
        "1/CMRR = max over corners (|Acm| + kcm·NG·10^(-CMRR_op/20))/Ad (the part's "
        "input-referred kcm·Vcm/CMRR_op times the noise gain; magnitudes added)", combined))
    return rows


def _detail(s: Spec, p: Parts, i: int) -> str:
    one = p.take([i])
    rj = rejection(s)
    op = float(one["cmrr_db"][0])
    net = fmt(rj.network_db, "decibel", 4)
    if math.isnan(op):
        return f"part's CMRR unknown: the network alone gives {net} (an upper bound)"
    k = int(np.argmax(rj.a + rj.b * 10 ** (-op / 20)))
    stage_db = rj.combined_db(op)
    return (f"part CMRR {fmt(op, 'decibel', 4)}: kcm·NG/Ad × 10^(-{op:.4g}/20) = "
            f"{float(rj.b[k]) * 10 ** (-op / 20):.4g} beside the network's |Acm|/Ad "
            f"{float(rj.a[k]):.4g} -> stage {fmt(stage_db, 'decibel', 4)} (network alone {net})")


CMRR_CHECK = Check(
    name="common_mode_rejection", kind="decibel", reads=("cmrr_db",), run=_run,
    needs=_needs,
    formula="CMRR = min over tolerance corners Ad/(|Acm| + kcm·NG·10^(-CMRR_op/20)) >= need "
            "= --cmrr, or 20·log10(Ad_max·ΔVcm/budget) for --vcm (budget --offset-max/m, "
            "else ½·(e/m)·Vp,out); margin 10^((CMRR - need)/20)",
    explain=_explain, detail=_detail,
    applies=lambda s: s.requirement.topology == "difference",
    # the --vcm budget without --offset-max scales with the output amplitude
    amplitude=lambda s: ("other" if s.requirement.vcm is not None
                         and s.requirement.offset_max_v is None else "independent"))


__all__ = ["CMRR_CHECK", "Rejection", "need_db", "rejection", "stage_db", "vcm_budget",
           "vcm_span"]
