"""The library's front door: what every command does, for any front end.

The command line parses options, calls one function here and renders its result; a
notebook calls the same functions and gets the same results (``to_json()`` of each
result is exactly what the command's ``--json`` prints). Defaults live here, not in the
command line: unless the stage names its own resistors, every function works on the
stage as it would be built, with its network designed from E24 values
(picker.design.network; a pinned ``rf`` is kept).

>>> from picker import api
>>> req = api.requirement(topology="inverting", gain=10, vin="0.5V", freq="20kHz",
...                       rails="±12")
>>> api.spec(req).minimum.slew_v_per_s  # doctest: +SKIP
785398.16...
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from picker.checks import CheckTable, Parts, needed_columns, run_checks
from picker.design.rank import By, Selection, select
from picker.design.requirement import Requirement, requirement_from
from picker.design.series import SeriesName
from picker.design.spec import Spec, minimum_specs
from picker.stages import kind

DEFAULT_SERIES: SeriesName = "E24"


def requirement(design: str | Path | None = None, **options: Any) -> Requirement:
    """A stage requirement from option values (and a TOML design file; options win).

    Parameters
    ----------
    design : str or Path, optional
        A TOML design file with the same keys.
    **options
        Requirement keys (``topology``, ``gain``, ``vin``, ``freq``, ``rails``, ...) as
        text with units (``"20kHz"``) or numbers in SI units.

    Returns
    -------
    Requirement
    """
    return requirement_from({k: v for k, v in options.items() if v is not None}, design)


def built(req: Requirement, series: SeriesName = DEFAULT_SERIES) -> Requirement:
    """The stage as it would be built: ``req`` with its network designed from standard
    values unless it names its own (``rf`` and ``rg``, when given, are kept exactly).

    Parameters
    ----------
    req : Requirement
    series : str
        IEC 60063 series of the designed resistors (default E24).

    Returns
    -------
    Requirement
        With ``network`` set (resistances in Ω).
    """
    from picker.design.network import with_designed_network

    own = kind(req.topology).designed(req, series)  # a stage type's own designer
    if own is not None:
        return own
    return with_designed_network(req, series=series)


def spec(req: Requirement) -> Spec:
    """The minimum specifications of the stage as built.

    Returns
    -------
    Spec
        Signal and noise gain (V/V), the gain-error budget split and ``minimum``
        (a ``Minimums``: slew in V/s, GBW in Hz, A0 in V/V, Rin in Ω, levels in V,
        output current in A); ``to_json()`` is ``picker spec --json``.
    """
    return minimum_specs(built(req))


def parts_for(spec_: Spec, store: Any) -> Parts:
    """The columns of every part that checking ``spec_`` reads, from a Store."""
    return Parts.from_columns(*store.parts_columns(needed_columns(spec_)))


def pick(req: Requirement, parts: Parts | Any, *, by: By = "margin", top: int | None = None,
         strict: bool = False, misses: int | None = None,
         network_per_part: bool = False) -> Selection:
    """Check every part against the stage as built; rank the accepted ones.

    Parameters
    ----------
    req : Requirement
    parts : Parts, DataFrame or Store
        The parts to check; a Store is read for just the columns the checks need.
    by : {"margin", "price", "stock"}
        Order of the accepted parts.
    top : int, optional
        Keep only the best ``top`` accepted parts.
    strict : bool
        Reject parts with unknown values instead of listing them as unverified.
    misses : int, optional
        How many of the closest rejected parts get their nearest misses (how far the
        stage would have to move for each to pass); default 3 when nothing is accepted,
        none otherwise.
    network_per_part : bool
        Design the network for each part (its output, bias and noise currents, Rin and
        A0 become limits: picker.design.netparts) and check each part with its own;
        default: one network, designed without a part, for every part. A stage whose
        network is given (or that has none to design) keeps it for every part.

    Returns
    -------
    Selection
        Accepted, rejected and unverified parts with every check's record (with
        ``network_per_part``, each part's network); ``to_json()`` is
        ``picker pick --json --list all``.
    """
    b = built(req)
    if hasattr(parts, "parts_columns"):
        columns = needed_columns(minimum_specs(b))
        if network_per_part:
            from picker.design.netparts import PART_FIELDS

            columns = tuple(dict.fromkeys([*columns, *PART_FIELDS]))
        parts = Parts.from_columns(*parts.parts_columns(columns))
    if not network_per_part:
        return select(parts, b, by=by, top=top, strict=strict, misses=misses)
    from picker.design.netparts import per_part

    every = parts if isinstance(parts, Parts) else Parts(parts)
    assert b.network is not None
    nets = per_part(req, every.assuming(req.assume)[0], b.network)
    return select(every, b, by=by, top=top, strict=strict, misses=misses, networks=nets)


@dataclass(frozen=True)
class PartReport:
    """One part's check sheet for a stage (``picker why``)."""

    part: str
    spec: Spec
    table: CheckTable
    parts: Parts
    assumed: dict[str, float]  # values taken by --assume where the part is blank (SI)

    @property
    def verdict(self) -> str:
        """``pass``, ``fail`` or ``unknown`` (fail wins over unknown)."""
        return self.table.verdict(0)

    def to_json(self) -> dict[str, Any]:
        """``picker why --json``: part, spec, verdict and each check's record (SI)."""
        from picker.checks.filters import phase_deg as filter_phase
        from picker.checks.gain import phase_deg
        from picker.checks.rejection import stage_db
        from picker.checks.stability import fixes, stage_margins

        def num(x: float) -> float | None:
            return float(x) if math.isfinite(x) else None

        phase = float((filter_phase if self.spec.requirement.is_filter else phase_deg)(
            self.parts, self.spec)[0])
        out = {"part": self.part, "spec": self.spec.to_json(), "verdict": self.verdict,
               "phase_at_f_deg": num(phase)}
        if "stability" in self.table.results:
            mg = stage_margins(self.parts, self.spec.stage)
            fix = fixes(self.parts, self.spec)[0]
            out |= {"phase_margin_deg": num(mg.pm_deg[0]), "crossover_hz": num(mg.fc_hz[0]),
                    "peaking_db": num(mg.peaking_db[0]),
                    "stability_fix": None if fix is None else fix.sentence()}
        if "common_mode_rejection" in self.table.results:
            out["cmrr_db"] = stage_db(self.parts, self.spec)[0]
        return out | {"assumed": self.assumed, "checks": self.table.records(0)}


def why(req: Requirement, part: str, store: Any) -> PartReport:
    """Every check of one part (by label) in the stage as built.

    Raises NotFound (with the fix) when the label is not in the stockroom.
    """
    return _report(req, spec(req), part, store)


def _report(req: Requirement, s: Spec, part: str, store: Any) -> PartReport:
    from picker.store import Condition

    store.get(part)  # NotFound, with a hint, when the label is not in the stockroom
    parts, masks = Parts(store.parts_frame(conditions=[Condition("label", "=", part)])
                         ).assuming(req.assume)
    assumed = {f: float(parts[f][0]) for f, m in masks.items() if m[0]}
    return PartReport(part, s, run_checks(parts, s), parts, assumed)


#: How many parts ``picker why`` sets side by side.
MAX_SIDE_BY_SIDE = 3


@dataclass(frozen=True)
class SideBySide:
    """The check sheets of two or three parts for one stage (``picker why A B [C]``)."""

    reports: tuple[PartReport, ...]

    @property
    def spec(self) -> Spec:
        return self.reports[0].spec

    def to_json(self) -> list[dict[str, Any]]:
        """``picker why A B --json``: the list of each part's ``why`` record, in order."""
        return [r.to_json() for r in self.reports]


def why_side_by_side(req: Requirement, parts: list[str] | tuple[str, ...],
                     store: Any) -> SideBySide:
    """The check sheets of two or three parts (by label) in the stage as built.

    The stage is designed once; each part's sheet equals ``why(req, part, store)``.

    Parameters
    ----------
    req : Requirement
    parts : sequence of str
        Two or three distinct labels.
    store : Store

    Returns
    -------
    SideBySide
        ``to_json()`` is ``picker why A B [C] --json``. BadValue when fewer than two,
        more than three or repeated labels are given; NotFound for an unknown label.
    """
    from picker.errors import BadValue

    labels = tuple(parts)
    if not 2 <= len(labels) <= MAX_SIDE_BY_SIDE:
        raise BadValue("PART", " ".join(labels), f"names {len(labels)} parts; give two or "
                       f"three to set side by side (one for a single sheet)")
    repeated = sorted({p for p in labels if labels.count(p) > 1})
    if repeated:
        raise BadValue("PART", repeated[0], "is named twice; give each part once")
    s = spec(req)
    return SideBySide(tuple(_report(req, s, p, store) for p in labels))


def design_network(req: Requirement, part: Mapping[str, Any] | None = None, *,
                   series: SeriesName = DEFAULT_SERIES, zin_ohm: float | None = None,
                   check: bool = False) -> Any:
    """The stage's resistor network from standard values (``picker net``).

    Parameters
    ----------
    req : Requirement
    part : mapping, optional
        A part's row: its output current, bias and noise currents, Rin, A0 and GBW
        become limits of the search.
    series : str
        IEC 60063 series (E3 .. E192).
    zin_ohm : float, optional
        Smallest input impedance the source may see, Ω (default ``req.zin_ohm``).
    check : bool
        Analyse the network as built: BadRequirement unless it is given in full
        (``rf`` and ``rg``, or ``network``).

    Returns
    -------
    picker.design.network.Network
        ``as_json()`` is ``picker net --json``.
    """
    from picker.design.network import design_network as design
    from picker.errors import BadRequirement

    own = kind(req.topology).design(req, series)  # a stage type's own designer
    if own is not None:
        return own
    full = req.network is not None or (req.rf_pinned and req.rg_ohm is not None) or (
        req.topology == "follower" and req.rf_pinned)
    if check and not full and kind(req.topology).pair_names is not None:
        missing = " and ".join(o for o, given in (("--rf", req.rf_pinned),
                                                  ("--rg", req.rg_ohm is not None)) if not given)
        raise BadRequirement(f"--check: analyses a network given in full; give {missing} "
                             "(or a design file's network), or drop --check to design it")

    net = design(req, part, series=series, zin_ohm=zin_ohm)
    if req.coupling == "ac":  # the coupling network around the designed resistors
        from dataclasses import replace

        from picker.stages import stage

        net = replace(net, coupling=stage(req.with_changes(network=net.network)).coupling)
    return net


def part_frame(store: Any, part: str, columns: tuple[str, ...]) -> Any:
    """One part's row (a DataFrame indexed by label) from a Store, or NotFound with the fix."""
    from picker.errors import NotFound

    frame = store.parts_frame(["label", *columns])
    if part not in frame.index:
        raise NotFound(f"PART: {part!r} is not in the stockroom; see `picker parts list`")
    return frame.loc[[part]]


def _need_known(known: bool, part: str, what: str) -> None:
    from picker.errors import BadValue

    if not known:
        raise BadValue("PART", part, f"has no {what} recorded, so its output cannot be "
                       f"predicted; add it with `picker parts edit {part} ...`")


def waveform(req: Requirement, store: Any, part: str, freq_hz: float | None = None) -> Any:
    """The predicted output of one part (by label) in the stage as built.

    Parameters
    ----------
    req : Requirement
    store : Store
    part : str
        The part's label.
    freq_hz : float, optional
        The sine's frequency, Hz (default: the stage's top frequency).

    Returns
    -------
    picker.design.waveform.Waves
        One row; ``summary(0)`` is ``picker wave PART --json`` (volts, THD as a ratio).
        BadValue when the part lacks the GBW or slew rate the prediction needs.
    """
    from picker.design.waveform import COLUMNS, waveforms

    if req.is_tia:  # the sensor current as a sine, linear, limits flagged (design.tiawave)
        from picker.design.tiawave import COLUMNS as TIA_COLUMNS
        from picker.design.tiawave import current_sine

        tw = current_sine(built(req), part_frame(store, part, TIA_COLUMNS), freq_hz)
        _need_known(bool(tw.known[0]), part, "gain-bandwidth product")
        return tw
    if req.is_filter:  # the filter's circuit, linear, limits flagged (picker.design.filterwave)
        from picker.design.filterwave import COLUMNS as FILTER_COLUMNS
        from picker.design.filterwave import sine

        fw = sine(built(req), part_frame(store, part, FILTER_COLUMNS), freq_hz)
        _need_known(bool(fw.known[0]), part, "gain-bandwidth product")
        return fw
    waves = waveforms(built(req), part_frame(store, part, COLUMNS), freq_hz)
    _need_known(bool(waves.known[0]), part, "gain-bandwidth product or slew rate")
    return waves


def step(req: Requirement, store: Any, part: str) -> Any:
    """The response of a filter stage with one part (by label) to a step of ``--vin``, or
    of a transimpedance stage to a step of the sensor current (low end to high end of
    ``--iin``; picker.design.tiawave).

    Returns
    -------
    picker.design.filterwave.Step
        ``summary()`` is ``picker wave PART --step --json`` (V, s; overshoot as a ratio).
        BadRequirement for a resistive stage; BadValue when the part lacks its GBW.
    """
    from picker.errors import BadRequirement

    if req.is_tia:
        from picker.design.tiawave import COLUMNS as TIA_COLUMNS
        from picker.design.tiawave import current_step

        out = current_step(built(req), part_frame(store, part, TIA_COLUMNS))
    elif req.is_filter:
        from picker.design.filterwave import COLUMNS, step_response

        out = step_response(built(req), part_frame(store, part, COLUMNS))
    else:
        raise BadRequirement("--step: applies to the filter stages (vcvs-lowpass, "
                             "vcvs-highpass, mfb-lowpass, mfb-bandpass) and the "
                             "transimpedance stage; omit it")
    _need_known(bool(out.waves.known[0]), part, "gain-bandwidth product")
    return out


def candidates(req: Requirement, store: Any, n: int = 4) -> Any:
    """The predicted waveforms of the best ``n`` candidates in pick's order.

    Returns
    -------
    picker.design.waveform.Candidates
        NotFound when the stockroom holds no parts.
    """
    from picker.design.waveform import candidate_waveforms
    from picker.errors import NotFound

    frame = store.parts_frame()
    if frame.empty:
        raise NotFound("the stockroom has no parts; add some with `picker parts add` or "
                       "`picker init --demo`")
    return candidate_waveforms(built(req), frame, n)


def response(req: Requirement, store: Any, part: str, freq_hz: float | None = None) -> Any:
    """Closed-loop frequency response of one part (by label) in the stage as built.

    Returns
    -------
    picker.design.response.Response, or picker.design.filterresp.FilterResponse
        One row; ``summary(0)`` is ``picker bode PART --json`` (Hz, dB, degrees; a filter
        adds the section the part makes, f0, Q and pass-band gain, and its -3 dB edges;
        a transimpedance stage's gains are the transimpedance in dB re 1 Ω).
    """
    from picker.design.response import COLUMNS
    from picker.design.response import response as resp

    if req.is_filter:  # picker.design.filterresp.FilterResponse: the section and its edges
        from picker.design.filterresp import response as filter_resp

        fr = filter_resp(built(req), part_frame(store, part, COLUMNS), freq_hz)
        _need_known(bool(fr.known[0]), part, "gain-bandwidth product")
        return fr
    b = built(req)
    out = resp(b, part_frame(store, part, COLUMNS), freq_hz)
    _need_known(bool(out.known[0]), part, "gain-bandwidth product")
    if b.is_tia:  # per volt of the Norton source -> transimpedance, dB re 1 Ω
        import dataclasses

        shift = 20 * math.log10(b.norton_ohm)
        out = dataclasses.replace(out, gain_db=out.gain_db + shift,
                                  dc_gain_db=out.dc_gain_db + shift,
                                  gain_at_f=out.gain_at_f + shift)
    return out


def envelope(req: Requirement, store: Any, labels: list[str] | tuple[str, ...] = (), *,
             top: int = 4, low_hz: float | None = None, high_hz: float | None = None) -> Any:
    """The operating envelope of some parts in the stage as built (``picker envelope``).

    Parameters
    ----------
    req : Requirement
    store : Store
    labels : sequence of str
        The parts to draw; empty: the first ``top`` candidates in pick's order
        (accepted, then unverified, then the closest rejected).
    top : int
        How many candidates when no labels are given.
    low_hz, high_hz : float, optional
        The frequency span (default three decades below the top frequency to two above).

    Returns
    -------
    picker.design.envelope.Envelope
        ``to_json()`` is ``picker envelope --json``.
    """
    from picker.design.envelope import envelope as draw
    from picker.design.envelope import grid
    from picker.design.rank import select
    from picker.errors import NotFound

    b = built(req)
    every = parts_for(minimum_specs(b), store)
    if labels:
        for label in labels:
            store.get(label)  # NotFound with the fix
        where = {str(x): i for i, x in enumerate(every.labels)}
        rows = [where[x] for x in labels]
    else:
        sel = select(every, b, misses=0)
        rows = [e.row for e in [*sel.accepted[:top], *sel.unverified[:top],
                                *sel.rejected[:top]]][:top]
        if not rows:
            raise NotFound("the stockroom has no parts; add some with `picker parts add` or "
                           "`picker init --demo`")
    parts = every.take(rows)
    return draw(b, parts, grid(b, low_hz, high_hz))


def sweep(req: Requirement, store: Any, vary: str, low: float, high: float, *,
          points: int = 50, log: bool | None = None) -> Any:
    """Vary one value of the stage as built and check every part at each point
    (``picker sweep``).

    Parameters
    ----------
    req : Requirement
    store : Store or Parts
        The parts (a Store is read for the columns the checks need).
    vary : str
        ``freq``, ``vout``, ``gain``, ``load``, ``source``, ``temp`` or ``cload``.
    low, high : float
        The range, SI units (amplitudes as peak volts, temperatures in °C).
    points : int
        How many values, 2 .. 1000.
    log : bool, optional
        Log spacing (default: log except for temperature).

    Returns
    -------
    picker.design.sweep.Sweep
        ``to_json()`` is ``picker sweep --json``.
    """
    from picker.design.sweep import VARIABLES, values
    from picker.design.sweep import sweep as run
    from picker.errors import BadValue, PickerError

    if vary not in VARIABLES:
        raise BadValue("--vary", vary, "is not a value a sweep can vary; use one of "
                       + ", ".join(VARIABLES))
    if req.vin_range is not None and vary in ("gain", "vout"):  # a level-shift stage
        raise BadValue("--vary", vary, "is set by --vin-range and --vout-range in a "
                       "level-shift stage; vary freq, load, source, temp or cload")
    variable = VARIABLES[vary]
    spaced = variable.log if log is None else log
    if not 2 <= points <= 1000:
        raise BadValue("--points", points, "must lie between 2 and 1000")
    if not low < high or (spaced and low <= 0):
        raise BadValue("--vary", f"{vary}={low:g}..{high:g}", "needs low < high"
                       + (" and low above zero for log spacing (or --linear)" if spaced else ""))
    b = built(req)
    pts = values(low, high, points, spaced)
    if hasattr(store, "parts_columns"):
        cols: dict[str, None] = {}
        for v in (pts[0], pts[-1]):
            try:
                probe = variable.apply(b, float(v))
                cols.update(dict.fromkeys(needed_columns(minimum_specs(
                    probe if probe.network is not None else built(probe)))))
            except PickerError:  # an impossible end point: the other end decides
                continue
        cols.update(dict.fromkeys(needed_columns(minimum_specs(b))))
        parts = Parts.from_columns(*store.parts_columns(tuple(cols)))
    else:
        parts = store if isinstance(store, Parts) else Parts(store)
    return run(b, parts, variable, pts, built, log=spaced)


def requirement_rows(req: Requirement) -> list[tuple[str, str]]:
    """The requirement as (key, value) lines in engineering units, defaults included."""
    from picker.quantities import fmt

    def opt(v: float | None, kind: Any, none: str = "not limited") -> str:
        return none if v is None else fmt(v, kind, 4)

    rows = [("topology", req.topology), ("gain", f"{req.gain:.6g} V/V"),
            ("output amplitude", fmt(req.vout, "voltage", 4) + " peak"),
            ("input amplitude", fmt(req.vin, "voltage", 4) + " peak"),
            ("top frequency", fmt(req.freq_hz, "frequency", 4)),
            ("rails", f"{req.rail_pos:+g} V / {req.rail_neg:+g} V"),
            ("reference", fmt(req.ref, "voltage", 4)),
            ("load", opt(req.load_ohm, "resistance", "none")),
            ("source", fmt(req.source_ohm, "resistance", 4)),
            ("capacitive load", fmt(req.cload_f, "capacitance", 4)),
            ("gain error", fmt(req.gain_error, "ratio", 4)),
            ("resistor tolerance", f"{fmt(req.tolerance, 'ratio', 4)} ({req.tolerance_rule})"),
            ("phase error", opt(req.phase_error_deg, "angle")),
            ("phase margin", fmt(req.phase_margin_deg, "angle", 4)),
            ("offset max", opt(req.offset_max_v, "voltage")),
            ("noise max (RMS)", opt(req.noise_max_v, "voltage")),
            ("ambient", f"{req.temp_min_c:g} .. {req.temp_max_c:g} °C"),
            ("channels", str(req.qty)), ("design margin", f"{req.margin:g}")]
    if req.is_tia:  # the Norton form's gain and input volts mean nothing to a reader
        assert req.iin_a is not None
        rows = [r for r in rows if r[0] not in ("gain", "input amplitude", "source",
                                                 "gain error", "resistor tolerance")]
        rows[1:1] = [
            ("sensor current", f"{fmt(req.iin_a[0], 'current', 4)} .. "
                               f"{fmt(req.iin_a[1], 'current', 4)}"),
            ("smallest current", fmt(req.iin_smallest, "current", 4)),
            ("sensor capacitance", fmt(req.cdet_f, "capacitance", 4)),
            ("sensor shunt", opt(req.rshunt_ohm, "resistance", "open")),
            ("transimpedance", fmt(req.zt_ohm or 0.0, "resistance", 4)),
            ("bandwidth (-3 dB)", fmt(req.band_hz or 0.0, "frequency", 4)),
            ("response", req.tia_response)]
    if req.vcm is not None:
        rows.append(("input common mode", f"{req.vcm[0]:g} .. {req.vcm[1]:g} V"))
    if req.cmrr_min_db is not None:
        rows.append(("CMRR min", f"{req.cmrr_min_db:g} dB"))
    if req.vin_range is not None and req.vout_range is not None:  # a level-shift stage
        from picker.stages.levelshift import source_of

        rows = [(("output middle (reference)", v) if k == "reference" else (k, v))
                for k, v in rows]
        (a, b), (c, d) = req.vin_range, req.vout_range
        rows += [("input range", f"{a:g} .. {b:g} V from ground"),
                 ("output range", f"{c:g} .. {d:g} V (at the input's low .. high end)"),
                 ("divider source", fmt(source_of(req), "voltage", 4))]
    if req.ripple is not None:
        rows.append(("rail ripple", f"{fmt(req.ripple[0], 'voltage', 4)} peak at "
                                    f"{fmt(req.ripple[1], 'frequency', 4)}"))
    if req.network is not None:
        rows.append(("network", ", ".join(
            f"{k} {fmt(v, 'capacitance' if k.startswith('c') else 'resistance', 4)}"
            for k, v in req.network.items())))
    for f, v in req.assume.items():
        rows.append((f"assumed {f}", repr(v)))
    return rows


def note(req: Requirement, store: Any, part: str | None = None, *,
         database: str = "", title: str | None = None) -> Any:
    """Everything a design note shows (``picker note``), computed once.

    Parameters
    ----------
    req : Requirement
    store : Store
    part : str, optional
        The part to write up; default: the best accepted part (else the best
        unverified, else the closest miss, said so in the note).
    database : str
        Where the parts came from, as shown (no password).
    title : str, optional

    Returns
    -------
    picker.report.note.Note
    """
    import datetime

    from picker import __version__
    from picker.errors import PickerError
    from picker.quantities import fmt
    from picker.report.note import Note

    b = built(req)
    sel = pick(b, store, misses=0)
    missing: dict[str, str] = {}
    status = "chosen by --part"
    if part is None:
        found = [(words, entries[0].part) for words, entries in (
            ("accepted, best by margin", sel.accepted),
            ("unverified: some values unknown", sel.unverified),
            ("rejected: the closest miss, nothing passes", sel.rejected)) if entries]
        if found:
            status, part = found[0]
    chosen = why(b, part, store) if part is not None else None
    if part is None:
        missing["chosen"] = "The stockroom has no parts."
    network = waves = resp = env = stock = None
    if part is not None:
        row = store.get(part)
        stock = {**row, "reserved": store.reserved(part)}
        stock["available"] = None if row.get("qty") is None else int(row["qty"]) - stock[
            "reserved"]
        for sid, make in (("network", lambda: design_network(b, row)),
                          ("waveform", lambda: waveform(b, store, part)),
                          ("response", lambda: response(b, store, part))):
            if sid == "network" and b.is_tia:  # rf and cf, not a resistor network
                assert b.network is not None
                missing[sid] = (f"The feedback pair: rf {fmt(b.network['rf'], 'resistance')}, "
                                f"cf {fmt(b.network['cf'], 'capacitance')} (picker net shows "
                                "its design).")
            if sid == "network" and b.vin_range is not None:  # not a gain-pair network
                missing[sid] = ("A level-shift network: `picker net` with the same options "
                                "shows its divider, its levels at both ends and its errors.")
                continue
            try:
                value = make()
            except PickerError as exc:
                missing[sid] = f"Not available for {part}: {exc}"
                continue
            if sid == "network":
                network = value
            elif sid == "waveform":
                waves = value
            else:
                resp = value
        others = [e.part for e in [*sel.accepted[:3], *sel.unverified[:3]] if e.part != part]
        env = envelope(b, store, [part, *others[:2]])
    return Note(
        title=title or (f"transimpedance stage, {fmt(b.zt_ohm or 0.0, 'resistance', 4)}, "
                        f"-3 dB at {fmt(b.band_hz or 0.0, 'frequency', 4)}" if b.is_tia else
                        f"{b.topology} stage, gain {b.gain:.6g}, {fmt(b.vout, 'voltage', 4)} "
                        f"peak at {fmt(b.freq_hz, 'frequency', 4)}"),
        made=datetime.datetime.now().astimezone().isoformat(timespec="minutes"),
        database=database, version=__version__, requirement=requirement_rows(b),
        cautions=b.cautions, selection=sel, chosen=chosen, chosen_status=status,
        network=network, waves=waves, response=resp, envelope=env, stock=stock,
        missing=missing)


def netlist(req: Requirement, store: Any, part: str) -> str:
    """The stage as built, with one part (by label), as a plain SPICE deck for ngspice.

    The designed network, the source and its resistance, the load, and the part's
    linear macromodel with its output reach per rail (picker.report.spice), with
    ``.op``, ``.tf``, ``.ac`` and ``.tran`` analyses (``picker netlist``).

    Returns
    -------
    str
        The deck. BadValue naming the field (and ``--assume``) when the part leaves a
        value the macromodel needs blank: nothing ideal is put in its place. The
        saturation resistances may instead be taken as 0 (light-load reach) with the
        requirement's ``light_load_swing``, stated in the deck's header.
    """
    from picker.errors import BadValue
    from picker.fields import BY_NAME
    from picker.report.checks import stage_line
    from picker.report.spice import DECK_FIELDS, DeckInput, deck
    from picker.stages import stage

    b = built(req)
    if b.is_tia:
        raise BadValue("--topology", "transimpedance", "has no deck yet: its solver drives "
                       "the sensor as a Norton source per volt, not as a current; use "
                       "`picker bode` for its response")
    parts, masks = Parts(part_frame(store, part, DECK_FIELDS)).assuming(req.assume)
    values: dict[str, float] = {}
    notes = [f"{f} = {float(parts[f][0])!r} (--assume)" for f, m in masks.items()
             if m[0] and f in DECK_FIELDS]
    for f in DECK_FIELDS:
        v = float(parts[f][0])
        if math.isnan(v) and f.startswith("out_rsat") and req.light_load_swing:
            v = 0.0
            notes.append(f"{f} = 0: the light-load reach (--light-load-swing)")
        if math.isnan(v):
            raise BadValue("PART", part, f"has no {f} ({BY_NAME[f].help}) recorded, which the "
                           f"deck's macromodel needs; record it (picker parts edit {part} "
                           f"{f}=...) or give --assume {f}=VALUE")
        values[f] = v
    st = stage(b)
    ref_v, vin_dc, fixed = b.ref, 0.0, {}
    if b.vin_range is not None:  # a level-shift stage: the real levels, from ground
        from picker.stages.levelshift import SOURCE_NODE, source_of

        ref_v, vin_dc, fixed = 0.0, sum(b.vin_range) / 2, {SOURCE_NODE: source_of(b)}
        notes.append(f"level shift: ref is ground; the input rides on {vin_dc!r} V, the "
                     f"divider hangs from {SOURCE_NODE} = {source_of(b)!r} V")
    return deck(DeckInput(title=stage_line(b), part=part, values=values, circuit=st.circuit,
                          noise_gain=st.noise_gain, ref_v=ref_v, rail_pos=b.rail_pos,
                          rail_neg=b.rail_neg, vin_pk=b.vin, freq_hz=b.freq_hz,
                          notes=tuple(notes), vin_dc_v=vin_dc, fixed=fixed))


__all__ = ["MAX_SIDE_BY_SIDE", "PartReport", "SideBySide", "built", "candidates",
           "design_network", "envelope", "netlist", "note", "part_frame", "parts_for", "pick",
           "step",
           "requirement", "requirement_rows", "response", "spec", "sweep", "waveform", "why",
           "why_side_by_side"]
