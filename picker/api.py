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
    values unless it names its own (``rf``, when given, is kept).

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

    return with_designed_network(req, series=series,
                                 feedback_ohm=req.rf_ohm if req.rf_pinned else None)


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
         strict: bool = False, misses: int | None = None) -> Selection:
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

    Returns
    -------
    Selection
        Accepted, rejected and unverified parts with every check's record;
        ``to_json()`` is ``picker pick --json --list all``.
    """
    b = built(req)
    if hasattr(parts, "parts_columns"):
        parts = parts_for(minimum_specs(b), parts)
    return select(parts, b, by=by, top=top, strict=strict, misses=misses)


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
        from picker.checks.gain import phase_deg
        from picker.checks.stability import fixes, stage_margins

        phase = float(phase_deg(self.parts, self.spec)[0])
        mg = stage_margins(self.parts, self.spec.stage)
        fix = fixes(self.parts, self.spec)[0]

        def num(x: float) -> float | None:
            return float(x) if math.isfinite(x) else None

        return {"part": self.part, "spec": self.spec.to_json(), "verdict": self.verdict,
                "phase_at_f_deg": num(phase),
                "phase_margin_deg": num(mg.pm_deg[0]), "crossover_hz": num(mg.fc_hz[0]),
                "peaking_db": num(mg.peaking_db[0]),
                "stability_fix": None if fix is None else fix.sentence(),
                "assumed": self.assumed, "checks": self.table.records(0)}


def why(req: Requirement, part: str, store: Any) -> PartReport:
    """Every check of one part (by label) in the stage as built.

    Raises NotFound (with the fix) when the label is not in the stockroom.
    """
    from picker.store import Condition

    store.get(part)  # NotFound, with a hint, when the label is not in the stockroom
    parts, masks = Parts(store.parts_frame(conditions=[Condition("label", "=", part)])
                         ).assuming(req.assume)
    s = spec(req)
    assumed = {f: float(parts[f][0]) for f, m in masks.items() if m[0]}
    return PartReport(part, s, run_checks(parts, s), parts, assumed)


def design_network(req: Requirement, part: Mapping[str, Any] | None = None, *,
                   series: SeriesName = DEFAULT_SERIES, zin_ohm: float | None = None) -> Any:
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
        Smallest input impedance the source may see, Ω.

    Returns
    -------
    picker.design.network.Network
        ``as_json()`` is ``picker net --json``.
    """
    from picker.design.network import design_network as design

    return design(req, part, series=series, tolerance=req.tolerance, zin_ohm=zin_ohm,
                  feedback_ohm=req.rf_ohm if req.rf_pinned else None)


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

    waves = waveforms(built(req), part_frame(store, part, COLUMNS), freq_hz)
    _need_known(bool(waves.known[0]), part, "gain-bandwidth product or slew rate")
    return waves


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
    picker.design.response.Response
        One row; ``summary(0)`` is ``picker bode PART --json`` (Hz, dB, degrees).
    """
    from picker.design.response import COLUMNS
    from picker.design.response import response as resp

    out = resp(built(req), part_frame(store, part, COLUMNS), freq_hz)
    _need_known(bool(out.known[0]), part, "gain-bandwidth product")
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


__all__ = ["PartReport", "built", "candidates", "design_network", "envelope", "part_frame",
           "parts_for", "sweep",
           "pick",
           "requirement", "response", "spec", "waveform", "why"]
