"""The transimpedance stage's feedback pair from standard values (``picker net``).

- rf: the member of the resistor series nearest the transimpedance asked for (``--zt``,
  or ``--vout``/peak current), or ``--rf`` exactly;
- cf: the largest member of the capacitor series (``--cap-series``, default E12) not
  above 1/(2π·rf·B·FP_HEADROOM), B the bandwidth asked for: the feedback pole alone then
  lies above B, and any part with at least the GBW of picker.stages.transimpedance
  ``gbw_needed`` keeps the response's Q or less and reaches B (module docstring there).

The closed forms of the loop (fn, Q, the bandwidth without cf, the 45° and Butterworth cf
of the textbooks) are in picker.stages.transimpedance.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from picker.design import series as es
from picker.design.requirement import Requirement
from picker.errors import BadRequirement
from picker.quantities import fmt
from picker.stages.transimpedance import FP_HEADROOM, RESPONSE_Q, f3db_of, gbw_needed, q_of

#: cf is looked for between these, F (a capacitor below 0.1 pF is the board's own).
CF_RANGE = (1e-13, 1e-5)


def feedback_cap(rf: float, band_hz: float, cap_series: str = "E12") -> float:
    """The largest series value not above 1/(2π·rf·B·FP_HEADROOM), F (module docstring)."""
    exact = 1 / (2 * math.pi * rf * band_hz * FP_HEADROOM)
    cand = es.values(cap_series, CF_RANGE[0], min(exact, CF_RANGE[1]))  # type: ignore[arg-type]
    if len(cand) == 0:
        raise BadRequirement(
            f"--f3db: {fmt(band_hz, 'frequency')} with rf {fmt(rf, 'resistance')} needs a "
            f"feedback capacitor of {fmt(exact, 'capacitance')}, below the "
            f"{fmt(CF_RANGE[0], 'capacitance')} the board itself adds; lower --zt or --f3db")
    return float(cand[-1])


def design_values(req: Requirement, series: es.SeriesName = "E24") -> dict[str, float]:
    """rf and cf of ``req`` (module docstring), Ω and F."""
    assert req.zt_ohm is not None and req.band_hz is not None
    rf = req.rf_ohm if req.rf_pinned else es.nearest(req.zt_ohm, series)
    return {"rf": rf, "cf": feedback_cap(rf, req.band_hz, req.cap_series)}


@dataclass(frozen=True)
class TiaNetwork:
    """The designed feedback pair and what it gives with an op-amp at the least GBW."""

    series: str
    cap_series: str
    zt_ohm: float
    band_hz: float
    response: str
    cd_f: float
    network: dict[str, float] = field(hash=False)
    notes: tuple[str, ...] = ()

    @property
    def rf(self) -> float:
        return self.network["rf"]

    @property
    def cf(self) -> float:
        return self.network["cf"]

    @property
    def gbw_min_hz(self) -> float:
        """GBW for the response's Q with the sensor's capacitance alone (a part adds its
        own input capacitance), Hz."""
        return float(gbw_needed(RESPONSE_Q[self.response], self.band_hz, self.rf, self.cf,
                                self.cd_f))

    def as_json(self) -> dict[str, Any]:
        """``picker net --json`` for a transimpedance stage (SI units)."""
        g = self.gbw_min_hz
        return {
            "topology": "transimpedance", "series": self.series, "cap_series": self.cap_series,
            "zt_ohm": self.zt_ohm, "values": dict(self.network),
            "zt_error": self.rf / self.zt_ohm - 1, "band_hz": self.band_hz,
            "feedback_pole_hz": 1 / (2 * math.pi * self.rf * self.cf),
            "response": self.response, "q_target": RESPONSE_Q[self.response],
            "gbw_min_hz": g,
            "f3db_at_gbw_min_hz": float(f3db_of(g, self.rf, self.cf, self.cd_f)),
            "q_at_gbw_min": float(q_of(g, self.rf, self.cf, self.cd_f)),
            "cf_butterworth_at_gbw_min_f": cf_for_q(RESPONSE_Q["butterworth"], g, self.rf,
                                                    self.cd_f),
            "notes": list(self.notes),
        }

    def text(self, cautions: list[str]) -> str:
        """The plain-text report of ``picker net``."""
        j = self.as_json()
        lines = [
            f"transimpedance stage: rf {fmt(self.rf, 'resistance', 4)} ({self.series}; "
            f"{j['zt_error']:+.2%} from {fmt(self.zt_ohm, 'resistance', 4)}), "
            f"cf {fmt(self.cf, 'capacitance', 4)} ({self.cap_series})",
            f"feedback pole 1/(2π·rf·cf) = {fmt(j['feedback_pole_hz'], 'frequency', 4)} "
            f"(bandwidth asked {fmt(self.band_hz, 'frequency', 4)})",
            f"{self.response} response (Q {j['q_target']:.4g}) needs GBW >= "
            f"{fmt(j['gbw_min_hz'], 'frequency', 4)} with Cd {fmt(self.cd_f, 'capacitance', 4)} "
            "plus the part's input capacitance",
            f"at that GBW (single pole): -3 dB at {fmt(j['f3db_at_gbw_min_hz'], 'frequency', 4)}, "
            f"Q {j['q_at_gbw_min']:.4g}; more GBW damps the loop toward the feedback pole",
            *self.notes, *cautions]
        return "\n".join(lines)


def cf_for_q(q: float, gbw_hz: float, rf: float, ct: float) -> float:
    """The cf that gives the single-pole loop the Q ``q`` at ``gbw_hz``, F: the larger
    root x of q²·(1 + x)² = x + k, x = ωa·rf·cf, k = ωa·rf·Ct (Butterworth, q² = 1/2:
    x = √(2k - 1); module docstring of picker.stages.transimpedance)."""
    wa = 2 * math.pi * gbw_hz
    k = wa * rf * ct
    b = 2 * q * q - 1
    disc = b * b - 4 * q * q * (q * q - k)
    if disc < 0:
        return 0.0
    x = (-b + math.sqrt(disc)) / (2 * q * q)
    return max(x, 0.0) / (wa * rf)


def design_tia(req: Requirement, series: es.SeriesName = "E24") -> TiaNetwork:
    """The transimpedance stage's rf and cf (``picker net``; module docstring)."""
    assert req.zt_ohm is not None and req.band_hz is not None
    values = dict(req.network) if req.network is not None else design_values(req, series)
    notes = []
    if req.rf_pinned:
        notes.append("rf as given (--rf), kept exactly")
    if req.network is not None:
        notes.append("network as given")
    cd = req.cdet_f
    if not np.isfinite(cd):
        cd = 0.0
    return TiaNetwork(series, req.cap_series, req.zt_ohm, req.band_hz, req.tia_response, cd,
                      values, tuple(notes))


def with_tia_network(req: Requirement, series: es.SeriesName = "E24") -> Requirement:
    """``req`` with its rf and cf designed (a given network kept)."""
    if req.network is not None:
        return req
    return req.with_changes(network=design_values(req, series))


__all__ = ["CF_RANGE", "TiaNetwork", "cf_for_q", "design_tia", "design_values",
           "feedback_cap", "with_tia_network"]
