"""The design note: one page a design review or a lab notebook can keep.

``Note`` holds the results (assembled by picker.api.note); ``note_html`` renders a
self-contained HTML page (plots embedded as PNG data, no network access, plain print
layout that fits A4 and Letter), ``note_markdown`` the same sections in Markdown with
the plots as PNG files beside it. Every number in a table carries its SI value in a
``data-si`` attribute, so a script (or a test) reads exactly what picker computed.
"""

from __future__ import annotations

import base64
import html
import io
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from picker.quantities import Kind, fmt

if TYPE_CHECKING:
    from matplotlib.figure import Figure

    from picker.api import PartReport
    from picker.design.envelope import Envelope
    from picker.design.network import Network
    from picker.design.rank import Selection
    from picker.design.response import Response
    from picker.design.waveform import Waves


#: The sections of a note, in order: (id, heading).
SECTIONS: tuple[tuple[str, str], ...] = (
    ("requirement", "Requirement"),
    ("cautions", "Cautions"),
    ("minimums", "Minimum specifications"),
    ("chosen", "Chosen part and its margins"),
    ("candidates", "Other candidates"),
    ("network", "Resistor network"),
    ("waveform", "Predicted waveform"),
    ("response", "Frequency response"),
    ("envelope", "Operating envelope"),
    ("stock", "Stock"),
)


@dataclass(frozen=True)
class Note:
    """Everything a note shows (SI units)."""

    title: str
    made: str  # date and time, ISO 8601
    database: str  # where the parts came from, password removed
    version: str
    requirement: list[tuple[str, str]]  # (key, value as given or defaulted)
    cautions: list[str]
    selection: Selection
    chosen: PartReport | None
    chosen_status: str  # accepted / unverified / rejected (closest miss) / chosen by --part
    network: Network | None
    waves: Waves | None
    response: Response | None
    envelope: Envelope | None
    stock: dict[str, Any] | None
    missing: dict[str, str] = field(default_factory=dict)  # section -> why it is empty


# -- shared pieces ------------------------------------------------------------------------


def _num(value: float | None, kind: Kind, prec: int = 4) -> tuple[str, str]:
    """(text, SI value as text) of one number ('' when unknown)."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "-", ""
    return fmt(value, kind, prec), repr(float(value))


def _png(fig: Figure) -> bytes:
    from picker.report.plots import DPI

    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=DPI)
    return buf.getvalue()


def figures(note: Note) -> dict[str, bytes]:
    """The plots of the note as PNG bytes, by section."""
    from picker.report.envelope import envelope_figure
    from picker.report.plots import bode_figure, wave_figure

    out: dict[str, bytes] = {}
    if note.waves is not None:
        out["waveform"] = _png(wave_figure(note.waves, 0, (900, 480)))
    if note.response is not None:
        out["response"] = _png(bode_figure(note.response, 0, (900, 620)))
    if note.envelope is not None:
        out["envelope"] = _png(envelope_figure(note.envelope, (900, 520)))
    return out


Row = list[tuple[str, str]]  # cells: (text, SI value or '')


def _tables(note: Note) -> dict[str, tuple[list[str], list[Row]]]:
    """Each section's table: headers and rows of (text, SI) cells."""

    sel = note.selection
    out: dict[str, tuple[list[str], list[Row]]] = {}
    out["requirement"] = (["key", "value"], [[(k, ""), (v, "")] for k, v in note.requirement])
    rows: list[Row] = []
    for x in sel.spec.explain:
        rows.append([(x.name, ""), (x.title, ""), _num(x.value, x.kind),
                     (x.formula, ""), (x.numbers, "")])
    out["minimums"] = (["name", "what", "value", "formula", "numbers"], rows)
    if note.chosen is not None:
        rep = note.chosen
        rows = []
        for check in rep.table.results.values():
            kind = check.kind
            detail = _detail(rep, check.name)
            rows.append([(check.name, ""), (check.status(0), ""),
                         _num(float(check.need[0]) if check.need.ndim else float(check.need),
                              kind),
                         _num(float(check.has[0]), kind),
                         (_margin(float(check.margin[0])), _si(float(check.margin[0]))),
                         (detail, "")])
        out["chosen"] = (["check", "status", "needs", "has", "margin", "the part's side"], rows)
    rows = []
    for status, entries in (("accepted", sel.accepted), ("unverified", sel.unverified),
                            ("rejected", sel.rejected)):
        for entry in entries[:12]:
            if note.chosen is not None and entry.part == note.chosen.part:
                continue
            why = ", ".join(entry.fails) if status == "rejected" else (
                "unknown: " + ", ".join(entry.unknown) if status == "unverified" else "")
            rows.append([(entry.part, ""), (status, ""),
                         (_margin(entry.margin) if status == "accepted" else "", ""),
                         (why or "passes every check", "")])
    out["candidates"] = (["part", "verdict", "margin", "why"], rows)
    if note.network is not None:
        net = note.network
        rows = [[(k, ""), _num(v, "resistance")] for k, v in net.resistors.items()]
        lo, hi = net.worst_case
        rows += [[("gain (ideal op-amp)", ""), (f"{net.gain:.6g} V/V", repr(net.gain))],
                 [("error", ""), (f"{net.gain_error:+.4%}", repr(net.gain_error))],
                 [(f"worst case at ±{fmt(net.tolerance, 'ratio')}", ""),
                  (f"{lo:.6g} .. {hi:.6g} V/V", "")],
                 [("Monte Carlo 99%", ""), (f"{net.mc_p99_error:.3%}", repr(net.mc_p99_error))]]
        out["network"] = (["item", "value"], rows)
    if note.waves is not None:
        w = note.waves
        rows = [[("peak +", ""), _num(float(w.peak_pos[0]), "voltage")],
                [("peak -", ""), _num(float(w.peak_neg[0]), "voltage")],
                [("peak-to-peak", ""), _num(float(w.vpp[0]), "voltage")],
                [("THD", ""), (f"{100 * float(w.thd[0]):.3g} %", _si(float(w.thd[0])))],
                [("limits", ""), (", ".join(w.limits(0)) or "none", "")]]
        out["waveform"] = (["item", "value"], rows)
    if note.response is not None:
        r = note.response
        rows = [[("DC gain", ""), (f"{float(r.dc_gain_db[0]):.3f} dB", _si(float(r.dc_gain_db[0])))],
                [("-3 dB frequency", ""), _num(float(r.f3db[0]), "frequency")],
                [(f"gain at {fmt(r.freq_hz, 'frequency')}", ""),
                 (f"{float(r.gain_at_f[0]):.3f} dB", _si(float(r.gain_at_f[0])))],
                [(f"phase at {fmt(r.freq_hz, 'frequency')}", ""),
                 (f"{float(r.phase_at_f[0]):.2f}°", _si(float(r.phase_at_f[0])))]]
        out["response"] = (["item", "value"], rows)
    if note.envelope is not None:
        env = note.envelope
        rows = []
        for j, label in enumerate(env.labels):
            i = min(range(len(env.freqs_hz)),
                    key=lambda k: abs(math.log(env.freqs_hz[k] / env.requirement.freq_hz)))
            amp = float(env.amplitude[i, j])
            rows.append([(label, ""), _num(amp, "voltage"), (env.limit(i, j), "")])
        out["envelope"] = (["part", f"largest amplitude at "
                            f"{fmt(env.requirement.freq_hz, 'frequency')}", "set by"], rows)
    if note.stock is not None:
        s = note.stock
        rows = [[(k, ""), ("-" if s.get(k) is None else str(s[k]), "")]
                for k in ("label", "qty", "reserved", "available", "location", "price")]
        out["stock"] = (["item", "value"], rows)
    return out


def _detail(rep: PartReport, name: str) -> str:
    from picker.checks import by_name

    try:
        return by_name(name).detail(rep.spec, rep.parts, 0)
    except (ValueError, KeyError, IndexError, TypeError):  # a blank value the text needs
        return ""


def _margin(m: float) -> str:
    if math.isnan(m):
        return "unknown"
    return "∞" if math.isinf(m) else f"{m:.3g}"


def _si(x: float) -> str:
    return repr(x) if math.isfinite(x) else ""


def _intro(note: Note) -> str:
    chosen = note.chosen.part if note.chosen is not None else "none"
    return (f"Chosen part: {chosen} ({note.chosen_status}). Made {note.made} by picker "
            f"{note.version} from {note.database}.")


# -- HTML ---------------------------------------------------------------------------------


_CSS = """
body { font-family: sans-serif; font-size: 10.5pt; color: #000; background: #fff;
       max-width: 180mm; margin: 10mm auto; line-height: 1.35; }
h1 { font-size: 16pt; margin: 0 0 2mm; }
h2 { font-size: 12.5pt; border-bottom: 1px solid #000; margin: 6mm 0 2mm;
     break-after: avoid; }
table { border-collapse: collapse; width: 100%; margin: 1mm 0 2mm; }
th, td { border: 1px solid #999; padding: 1mm 1.5mm; text-align: left; vertical-align: top;
         font-size: 9.5pt; }
th { background: #eee; }
td.num { text-align: right; white-space: nowrap; }
img { max-width: 100%; height: auto; display: block; margin: 2mm 0; }
p.caution { border: 2px solid #000; padding: 2mm; font-weight: bold; }
p.missing { font-style: italic; }
footer { margin-top: 6mm; font-size: 8.5pt; color: #333; }
section { break-inside: auto; }
@page { margin: 12mm; }
@media print { body { margin: 0 auto; } img { break-inside: avoid; } tr { break-inside: avoid; } }
"""


def note_html(note: Note, images: dict[str, bytes] | None = None) -> str:
    """The note as one self-contained HTML page (module docstring)."""
    imgs = figures(note) if images is None else images
    tables = _tables(note)
    e = html.escape
    out = ["<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
           f"<title>{e(note.title)}</title>", f"<style>{_CSS}</style>", "</head>", "<body>",
           f"<h1>{e(note.title)}</h1>", f"<p id=\"intro\">{e(_intro(note))}</p>"]
    for sid, heading in SECTIONS:
        out.append(f'<section id="{sid}">')
        out.append(f"<h2>{e(heading)}</h2>")
        if sid == "cautions":
            items = note.cautions or ["None for this stage."]
            out += [f'<p class="caution">{e(c)}</p>' if note.cautions else f"<p>{e(c)}</p>"
                    for c in items]
        if sid in note.missing:
            out.append(f'<p class="missing">{e(note.missing[sid])}</p>')
        if sid in imgs:
            data = base64.b64encode(imgs[sid]).decode("ascii")
            out.append(f'<img alt="{e(heading)}" src="data:image/png;base64,{data}">')
        if sid in tables:
            out.append(_html_table(*tables[sid]))
        out.append("</section>")
    out += [f"<footer>{e(_intro(note))} Numbers in SI units are in each cell's data-si "
            "attribute.</footer>", "</body>", "</html>"]
    return "\n".join(out) + "\n"


def _html_table(headers: Sequence[str], rows: Sequence[Row]) -> str:
    e = html.escape
    head = "".join(f"<th>{e(h)}</th>" for h in headers)
    body = []
    for row in rows:
        cells = []
        for text, si in row:
            if si:
                cells.append(f'<td class="num" data-si="{e(si)}">{e(text)}</td>')
            else:
                cells.append(f"<td>{e(text)}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


# -- Markdown -----------------------------------------------------------------------------


def note_markdown(note: Note, image_name: Callable[[str], str],
                  images: dict[str, bytes] | None = None) -> tuple[str, dict[str, bytes]]:
    """The note in Markdown and its plots: (text, {file name: PNG bytes}).

    ``image_name(section)`` names the PNG file of a section (written beside the note).
    """
    imgs = figures(note) if images is None else images
    tables = _tables(note)
    out = [f"# {note.title}", "", _intro(note), ""]
    files: dict[str, bytes] = {}
    for sid, heading in SECTIONS:
        out += [f"## {heading}", ""]
        if sid == "cautions":
            out += [f"**{c}**" for c in note.cautions] or ["None for this stage."]
            out.append("")
        if sid in note.missing:
            out += [f"*{note.missing[sid]}*", ""]
        if sid in imgs:
            name = image_name(sid)
            files[name] = imgs[sid]
            out += [f"![{heading}]({name})", ""]
        if sid in tables:
            out += [_md_table(*tables[sid]), ""]
    return "\n".join(out), files


def _md_table(headers: Sequence[str], rows: Sequence[Row]) -> str:
    def cell(text: str) -> str:
        return text.replace("|", "\\|").replace("\n", " ")

    lines = ["| " + " | ".join(cell(h) for h in headers) + " |",
             "|" + "|".join("---" for _ in headers) + "|"]
    lines += ["| " + " | ".join(cell(t) for t, _ in row) + " |" for row in rows]
    return "\n".join(lines)


__all__ = ["SECTIONS", "Note", "figures", "note_html", "note_markdown"]
