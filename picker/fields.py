"""The fields of an op-amp parameter set: names, kinds, units and meaning.

This is the one contract shared by the store, import/export, the tables and the
checks. Column names carry their SI unit where it helps (``gbw_hz``). A technical
field left empty is unknown (NULL); checks report it as "unknown", never as a pass.
Light module: no numpy, pandas or SQLAlchemy import here (it is on the --help path).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

from picker.quantities import Kind

Group = Literal["identity", "supply", "dynamics", "input", "output", "noise", "thermal", "stock"]


@dataclass(frozen=True)
class Field:
    name: str
    kind: Kind | Literal["text"]
    header: str  # short table header, unit included
    help: str
    group: Group
    signed: bool = False  # may be negative (headroom beyond a rail)
    positive: bool = False  # must be > 0 when given


FIELDS: tuple[Field, ...] = (
    Field("label", "text", "label", "the team's own name for this parameter set (unique key)", "identity"),
    Field("description", "text", "description", "free text", "identity"),
    Field("tech", "text", "input", "input technology: bipolar, JFET, CMOS, ...", "identity"),
    Field("channels", "count", "ch", "op-amps per package", "identity", positive=True),
    Field("package", "text", "package", "package outline, free text", "identity"),
    Field("supply_min_v", "voltage", "Vs min [V]", "lowest total supply span (V+ - V-)", "supply", positive=True),
    Field("supply_max_v", "voltage", "Vs max [V]", "highest total supply span (V+ - V-)", "supply", positive=True),
    Field("iq_a", "current", "Iq [A]", "supply current per channel", "supply"),
    Field("gbw_hz", "frequency", "GBW [Hz]", "gain-bandwidth product", "dynamics", positive=True),
    Field("slew_v_per_s", "slew", "SR [V/µs]", "slew rate", "dynamics", positive=True),
    Field("aol_v_per_v", "gain", "Aol [dB]", "open-loop DC gain", "dynamics", positive=True),
    Field("pm_unity_deg", "angle", "PM [°]", "phase margin as a follower without load (0-90°); the second open-loop pole follows from it and GBW (picker.circuit.loopgain)", "dynamics", positive=True),
    Field("min_noise_gain", "gain", "NG min [dB]", "lowest noise gain the part is stable at (decompensated parts); empty: unity-gain stable when PM is given", "dynamics", positive=True),
    Field("rin_ohm", "resistance", "Rin [Ω]", "differential input resistance", "input", positive=True),
    Field("cin_diff_f", "capacitance", "Cdiff [F]", "differential input capacitance (between the inputs)", "input"),
    Field("cin_cm_f", "capacitance", "Ccm [F]", "common-mode input capacitance (each input to ground)", "input"),
    Field("vdiff_max_v", "voltage", "Vdiff max [V]", "absolute maximum differential input voltage", "input", positive=True),
    Field("cmrr_db", "decibel", "CMRR [dB]", "common-mode rejection ratio at DC, minimum", "input", positive=True),
    Field("psrr_db", "decibel", "PSRR [dB]", "power-supply rejection ratio at DC, minimum (input-referred)", "supply", positive=True),
    Field("ib_a", "current", "Ib [A]", "input bias current (magnitude) at 25 °C", "input"),
    Field("ios_a", "current", "Ios [A]", "input offset current (magnitude) at 25 °C", "input"),
    Field("ib_double_c", "temperature", "Ib x2 [°C]", "warming over which Ib and Ios double (negative: they halve); empty: the input technology's default", "input", signed=True, positive=True),
    Field("vos_v", "voltage", "Vos [V]", "input offset voltage, maximum", "input"),
    Field("drift_v_per_c", "drift", "drift [V/°C]", "input offset voltage drift", "input"),
    Field("cm_head_pos_v", "voltage", "CM head+ [V]", "input common-mode headroom below V+ (negative: beyond the rail)", "input", signed=True),
    Field("cm_head_neg_v", "voltage", "CM head- [V]", "input common-mode headroom above V- (negative: beyond the rail)", "input", signed=True),
    Field("rout_ohm", "resistance", "Ro [Ω]", "open-loop output resistance", "output"),
    Field("iout_a", "current", "Iout [A]", "output current limit", "output", positive=True),
    Field("out_head_pos_v", "voltage", "out head+ [V]", "output headroom below V+ at light load", "output", signed=True),
    Field("out_head_neg_v", "voltage", "out head- [V]", "output headroom above V- at light load", "output", signed=True),
    Field("out_rsat_pos_ohm", "resistance", "Rsat+ [Ω]", "output saturation resistance toward V+: headroom+ grows by Rsat+ x the sourced current", "output"),
    Field("out_rsat_neg_ohm", "resistance", "Rsat- [Ω]", "output saturation resistance toward V-: headroom- grows by Rsat- x the sunk current", "output"),
    Field("en_v_per_rthz", "vnoise", "en [V/√Hz]", "input voltage noise density (white)", "noise"),
    Field("in_a_per_rthz", "inoise", "in [A/√Hz]", "input current noise density (white)", "noise"),
    Field("theta_ja_c_per_w", "thermal", "θJA [°C/W]", "thermal resistance junction to ambient, in the package on a typical board", "thermal", positive=True),
    Field("tj_max_c", "temperature", "Tj max [°C]", "maximum junction temperature", "thermal", signed=True),
    Field("price", "price", "price", "unit price, in the team's currency", "stock"),
    Field("qty", "count", "qty", "packages on hand", "stock"),
    Field("reorder_level", "count", "reorder at", "reorder when packages on hand fall to this or fewer", "stock"),
    Field("location", "text", "location", "drawer or bin", "stock"),
    Field("notes", "text", "notes", "free text", "stock"),
)

# Numbers the store computes from stored columns: read-only, never imported or edited.
DERIVED: tuple[Field, ...] = (
    Field("available", "count", "available", "packages on hand not reserved for a project (qty - reserved)", "stock"),
    Field("ib_tech_double_c", "temperature", "Ib x2 (tech) [°C]", "the input technology's default for ib_double_c (see TECH_IB_DOUBLE_C)", "input", signed=True),
)

#: The default Ib doubling interval by input technology (°C of warming; negative: the
#: currents halve), used where ``ib_double_c`` is empty and printed as assumed. The first
#: word the ``tech`` text contains (case-insensitive) decides. JFET and CMOS inputs: the
#: bias current is gate leakage, a reverse-biased junction's current, which roughly doubles
#: every 10 °C; bipolar inputs: the base current falls slowly as the transistors' current
#: gain rises with temperature, about halving over 80 °C of warming (common practice,
#: e.g. Franco, Design with Operational Amplifiers and Analog Integrated Circuits, 4th ed.,
#: ch. 5, from memory).
TECH_IB_DOUBLE_C: tuple[tuple[str, float], ...] = (
    ("jfet", 10.0), ("cmos", 10.0), ("mos", 10.0), ("fet", 10.0), ("bipolar", -80.0),
    ("bjt", -80.0),
)


def tech_ib_double_c(tech: object) -> float:
    """The default Ib doubling interval for a ``tech`` text (NaN: no rule for it)."""
    text = tech.lower() if isinstance(tech, str) else ""
    for word, interval in TECH_IB_DOUBLE_C:
        if word in text:
            return interval
    return float("nan")

BY_NAME: dict[str, Field] = {f.name: f for f in (*FIELDS, *DERIVED)}
# Numeric fields as the checks read them (Store.parts_columns): stored and derived.
NUMERIC: tuple[str, ...] = tuple(f.name for f in (*FIELDS, *DERIVED) if f.kind != "text")
TEXT: tuple[str, ...] = tuple(f.name for f in FIELDS if f.kind == "text")
# Fields every row must have; everything else may be unknown.
REQUIRED: tuple[str, ...] = ("label",)
# Columns of the parts table that are not user fields.
EXTRA_COLUMNS: tuple[str, ...] = ("updated_at",)
