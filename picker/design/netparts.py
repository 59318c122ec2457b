"""A network designed for each part at once (``picker pick --network-per-part``).

The shared network (picker.design.network, designed without a part) suits most parts;
a part's own values can ask for another one: a part with little output current wants
higher resistances (the network draws less), a part with large bias or noise currents
wants lower ones. Here every candidate pair of standard values inside the window
(the designer's grid, plus the shared network itself) is judged against every part at
once: candidates x parts as numpy arrays, no Python loop over parts.

For each part the limits of picker.design.netlimits are evaluated with its own values
(an unknown value leaves its limit out, as for ``picker net --part``):

- load: Vo,pk·(1/RL + G_net)·m <= Iout, and the common-practice share of the load's
  current (max(10% of the load's, 1 mA));
- offset (with --offset-max and the part's Ib): the better of no compensation and an
  ideal compensation resistor, NG·(Ib·|R+ - R-| + Ios/2·(R+ + R-)) or NG·Ios·R-,
  within 50% of the budget over the margin;
- noise (with --noise-max): sqrt((4kT·R_noise + (in·R_in)²)·π/2·GBW/NG) within 50%;
- input resistance (the part's Rin and A0): rf/(Rin·A0) within 10% of the gain budget;
- input impedance and window: as for the shared network (they do not depend on a part).

The choice among the admissible candidates is the designer's (picker.design.netchoice:
gain error down to what the tolerance swamps, then the lowest score). Legs made of two
resistors and the compensation resistor are left to ``picker net --part``: a part's
network here is one standard value per position, or the shared network when that one
is best. A part no candidate fits keeps the shared network (``own`` False), and its
checks say what fails.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from picker.checks import Parts
from picker.design import netchoice as nc
from picker.design import netmodel as nm
from picker.design import series as es
from picker.design.netlimits import Context
from picker.design.requirement import Requirement
from picker.quantities import fmt
from picker.stages import kind

Array = npt.NDArray[np.float64]

#: The part fields the per-part limits and score read.
PART_FIELDS: tuple[str, ...] = ("iout_a", "ib_a", "ios_a", "vos_v", "in_a_per_rthz",
                                "rin_ohm", "aol_v_per_v", "gbw_hz")
#: Parts judged together: candidates x CHUNK floats per array (about 5 000 x 256 for
#: E24, some 10 MB a temporary), so a catalogue never holds the whole product at once.
CHUNK = 256
_SLACK = 1 + 1e-12  # as picker.design.netlimits: limits are inclusive of rounding
TIE = 1e-9  # as picker.design.network


@dataclass(frozen=True)
class PartNetworks:
    """Each part's network: ``networks[group[i]]`` is part i's; ``networks[0]`` is the
    shared one. ``own[i]`` says whether part i's network was designed for it (False: the
    stage has no pair to design, or no candidate keeps the part's limits)."""

    networks: tuple[Mapping[str, float], ...]
    group: npt.NDArray[np.intp]
    own: npt.NDArray[np.bool_]
    designed: bool  # False when the stage's network is given or has no pair to design

    def network(self, row: int) -> Mapping[str, float]:
        return self.networks[int(self.group[row])]

    def describe(self, row: int) -> str:
        """Part ``row``'s network in one phrase: 'Rf 20 kΩ, Rg 2.2 kΩ'."""
        net = self.network(row)
        text = ", ".join(f"{k.capitalize()} {fmt(v, 'resistance', 4)}" for k, v in net.items()
                         if 0 < v < math.inf)
        return text or "no resistors"

    def origin(self, row: int) -> str:
        """``part`` (designed for this part) or ``shared`` (the shared network)."""
        return "part" if bool(self.own[row]) else "shared"

    def record(self, row: int) -> dict[str, object]:
        """The JSON of part ``row``'s network: resistors (Ω) and where they come from."""
        net = self.network(row)
        return {"resistors": {k: float(v) for k, v in net.items() if 0 < v < math.inf},
                "designed_for": self.origin(row)}


def shared_only(shared: Mapping[str, float], n: int) -> PartNetworks:
    """Every one of ``n`` parts on the shared network (nothing to design per part)."""
    return PartNetworks((dict(shared),), np.zeros(n, np.intp), np.zeros(n, bool), False)


def designable(req: Requirement) -> bool:
    """Whether the stage has a pair the designer fills (not given, not a follower)."""
    if req.is_filter or req.network is not None or kind(req.topology).pair_names is None:
        return False
    if req.rf_pinned and req.rg_ohm is not None:
        return False
    return not (req.topology == "non-inverting" and req.gain == 1)


def _column(parts: Parts, name: str, rows: slice) -> Array:
    return np.asarray(parts[name][rows], float)[None, :]


def per_part(req: Requirement, parts: Parts, shared: Mapping[str, float],
             series: es.SeriesName = "E24") -> PartNetworks:
    """Design the network for every part (see the module docstring).

    Parameters
    ----------
    req : Requirement
        The stage as asked (its network not given; ``rf``/``rg`` given are kept).
    parts : Parts
        The parts, one array element each (NaN = unknown).
    shared : mapping
        The shared network (picker.design.network.design_network without a part), Ω.
    series : str
        IEC 60063 series of the candidate values.

    Returns
    -------
    PartNetworks
    """
    n = len(parts)
    if not designable(req):
        return shared_only(shared, n)
    t = req.topology
    fa, fb = kind(t).pair_names or ("rf", "rg")
    v = es.values(series, *nm.WINDOW_OHM)
    fv = np.array([req.rf_ohm]) if req.rf_pinned else v
    lv = np.array([req.rg_ohm]) if req.rg_ohm is not None else v
    a = np.append(np.repeat(fv, len(lv)), float(shared[fa]))[:, None]  # candidates x 1
    b = np.append(np.tile(lv, len(fv)), float(shared[fb]))[:, None]
    nice = _nice_pairs(a, b)
    m = nm.pair_model(t, req.source_ohm, a, b)
    ctx = Context(req, nm.PartData())
    err = np.abs(m.gain / req.gain - 1)
    allowed = req.gain_error / req.margin
    common = err <= allowed * _SLACK
    zf = ctx.zin_floor
    if zf is not None:
        common &= b >= zf / _SLACK
    floor = nc.error_floor(req)
    base = np.log10(a) + nc.NICE_STEP * nice
    if t in ("inverting", "difference") and req.source_ohm > 0:
        base = base + nc.SOURCE_WEIGHT * req.source_ohm / (req.source_ohm + b)
    pick = np.empty(n, np.intp)
    found = np.empty(n, bool)
    for start in range(0, n, CHUNK):  # chunks of parts, each judged against every candidate
        rows = slice(start, min(start + CHUNK, n))
        ok, score = _judge(req, parts, rows, m, a, common, base)
        errq = np.where(ok, np.maximum(err, floor), np.inf)
        least = errq.min(axis=0)
        sc = np.where(errq <= least + TIE, score, np.inf)
        pick[rows] = np.argmin(sc, axis=0)
        found[rows] = np.isfinite(least)
    last = len(a) - 1  # the shared network's own column
    pick = np.where(found, pick, last)
    nets: list[Mapping[str, float]] = [dict(shared)]  # group 0: the shared network
    seen = {tuple(sorted(shared.items())): 0}
    chosen, inverse = np.unique(pick, return_inverse=True)
    to_group = np.empty(len(chosen), np.intp)
    for k, c in enumerate(chosen.tolist()):  # the few distinct networks, not the parts
        net = dict(shared) if c == last else {
            name: float(x) for name, x in kind(t).pair_network(float(a[c, 0]),
                                                               float(b[c, 0])).items()}
        key = tuple(sorted(net.items()))
        if key not in seen:
            seen[key] = len(nets)
            nets.append(net)
        to_group[k] = seen[key]
    group = to_group[inverse]
    return PartNetworks(tuple(nets), group.astype(np.intp), found, True)


def _nice_pairs(a: Array, b: Array) -> Array:
    """netchoice.niceness of each candidate's two values (looked up once per value)."""
    values, inverse = np.unique(np.concatenate([a.ravel(), b.ravel()]), return_inverse=True)
    score = nc.niceness(values)[inverse]
    return (score[:a.size] + score[a.size:]).reshape(a.shape)  # type: ignore[no-any-return]


def _judge(req: Requirement, parts: Parts, rows: slice, m: nm.PairModel, a: Array,
           common: npt.NDArray[np.bool_], base: Array
           ) -> tuple[npt.NDArray[np.bool_], Array]:
    """(admissible, score) of every candidate (axis 0) for the parts ``rows`` (axis 1)."""
    col = {f: _column(parts, f, rows) for f in PART_FIELDS}
    margin, vout = req.margin, req.vout
    g_load = 0.0 if req.load_ohm is None else 1.0 / req.load_ohm
    g_share = max(nm.NET_LOAD_SHARE * g_load, nm.NET_CURRENT_A / vout)
    with np.errstate(invalid="ignore", divide="ignore"):
        g_part = col["iout_a"] / (margin * vout) - g_load
        g_max = np.where(np.isfinite(g_part) & (g_part > 0), np.minimum(g_share, g_part),
                         g_share)
        ok = common & (m.out_siemens <= g_max * _SLACK)
        score = base + 0 * g_max
        ib = col["ib_a"]
        ios = np.where(np.isnan(col["ios_a"]), ib, col["ios_a"])
        unc = m.noise_gain * (ib * np.abs(m.r_plus - m.r_minus)
                              + 0.5 * ios * (m.r_plus + m.r_minus))
        comp = np.where(m.r_minus >= m.r_plus, m.noise_gain * ios * m.r_minus, unc)
        offset = np.minimum(unc, comp)
        known_ib = np.isfinite(ib)
        if req.offset_max_v is not None:
            bound = nm.OFFSET_SHARE * req.offset_max_v / margin
            ok &= ~known_ib | (offset <= bound * _SLACK)
            score = score + np.where(known_ib, offset / bound, 0.0)
        else:
            vos = col["vos_v"]
            uses = known_ib & np.isfinite(vos) & (vos != 0)
            score = score + np.where(uses, offset / (vos * m.noise_gain), 0.0)
        if req.noise_max_v is not None:
            bound = nm.NOISE_SHARE * req.noise_max_v / margin
            e = req.gain_error / margin
            fc = req.freq_hz / math.sqrt((1 - e) ** -2 - 1)
            bw = np.where(np.isfinite(col["gbw_hz"]), np.pi / 2 * col["gbw_hz"] / m.noise_gain,
                          np.pi / 2 * fc)
            i_n = np.nan_to_num(col["in_a_per_rthz"], nan=0.0)
            noise = np.sqrt((4 * nm.K_B * req.temp_max_k * m.noise_ohm
                             + (i_n * m.inoise_ohm) ** 2) * bw)
            ok &= noise <= bound * _SLACK
            score = score + noise / bound
        rin_a0 = col["rin_ohm"] * col["aol_v_per_v"]
        known = np.isfinite(rin_a0)
        rin_bound = nm.RIN_SHARE * req.gain_error / margin
        ok &= ~known | (m.rin_ohm / rin_a0 <= rin_bound * _SLACK)
    return ok, np.where(ok, score, np.inf)


__all__ = ["CHUNK", "PART_FIELDS", "PartNetworks", "designable", "per_part", "shared_only"]
