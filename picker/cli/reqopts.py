"""The stage requirement options, shared by every command that takes a stage.

``@requirement_options`` adds --topology ... --design to a command and hands them to it
as one mapping, ``stage``; ``build_requirement(stage)`` turns that (plus the design
file, if any) into a picker.design.requirement.Requirement. Command-line values win
over the design file's.
"""

from __future__ import annotations

import functools
from collections.abc import Callable
from typing import Any, TypeVar

import click

from picker.cli.params import QuantityParam, RailsParam

F = TypeVar("F", bound=Callable[..., Any])

TOPOLOGY_CHOICE = click.Choice(["inverting", "non-inverting", "follower", "difference",
                                "vcvs-lowpass", "vcvs-highpass", "mfb-lowpass", "mfb-bandpass",
                                "level-shift"])

# (parameter name, option, click type, help); requirement keys are the option names
_OPTIONS: tuple[tuple[str, str, Any, str], ...] = (
    ("topology", "--topology", TOPOLOGY_CHOICE, "stage topology"),
    ("gain", "--gain", QuantityParam("gain", positive=True),
     "signal-gain magnitude, V/V or dB (e.g. 10, 20dB); a follower has 1"),
    ("vin", "--vin", QuantityParam("amplitude"),
     "input amplitude with its form: 0.5Vpk, 1Vpp, 0.35Vrms (bare = peak)"),
    ("vout", "--vout", QuantityParam("amplitude"), "output amplitude instead of --vin"),
    ("freq", "--freq", QuantityParam("frequency", positive=True),
     "top signal frequency (a sine), e.g. 20kHz (filters: default 10 x --f0)"),
    ("ref", "--ref", QuantityParam("voltage"),
     "DC level the signal rides on (default: mid-rail)"),
    ("load", "--load", QuantityParam("resistance", positive=True),
     "load resistance to the reference (default: none)"),
    ("source", "--source", QuantityParam("resistance"), "source resistance (default 0)"),
    ("rails", "--rails", RailsParam(), "supply rails: ±12, +12/-12, +5/0"),
    ("gain_error", "--gain-error", QuantityParam("ratio", positive=True),
     "largest closed-loop gain error at DC and at --freq (default 1%)"),
    ("tolerance", "--tolerance", QuantityParam("ratio"),
     "tolerance of the gain-setting resistors, inside the gain budget (default 1%)"),
    ("tolerance_rule", "--tolerance-rule", click.Choice(["worst", "rss"]),
     "how resistor tolerances add: worst case (default) or root-sum-square"),
    ("phase_error", "--phase-error", QuantityParam("angle", positive=True),
     "largest phase shift of the gain at --freq from the ideal, e.g. 5deg (default: shown, "
     "not limited)"),
    ("offset_max", "--offset-max", str, "largest DC output error, e.g. 20mV (default: not checked)"),
    ("noise_max", "--noise-max", str,
     "largest output RMS noise, e.g. 100uV (default: not checked)"),
    ("temp", "--temp", str, "ambient, 85C or a range -40..85C (default 25C; drift from 25C)"),
    ("qty", "--qty", click.IntRange(min=1, max=1_000_000_000), "channels needed (default 1)"),
    ("margin", "--margin", click.FloatRange(min=1.0),
     "design margin: needs x margin, allowed errors / margin (default 1.25; 1 = bare minimums)"),
    ("rf", "--rf", QuantityParam("resistance", positive=True),
     "the feedback resistor as built, kept exactly (default: designed, see picker net)"),
    ("rg", "--rg", QuantityParam("resistance", positive=True),
     "the gain leg as built, kept exactly: the inverting stage's input resistor, the "
     "non-inverting stage's ground leg, r1 = r3 of the difference stage (default: designed)"),
    ("rin", "--rin", QuantityParam("resistance", positive=True),
     "inverting stage: its input resistor as built (another name for --rg)"),
    ("zin", "--zin", QuantityParam("resistance", positive=True),
     "least input impedance the source may see, inverting or difference (default: "
     "max(10 kΩ, 10 x --source))"),
    ("cload", "--cload", QuantityParam("capacitance"),
     "capacitance at the output, e.g. 1nF (cable, ADC input; default 0)"),
    ("vcm", "--vcm", str,
     "difference stage: input common-mode level or range, e.g. 2.5V or -5..5V (default: ref)"),
    ("cmrr", "--cmrr", QuantityParam("decibel"),
     "difference stage: least common-mode rejection of the stage, e.g. 60dB"),
    ("phase_margin", "--phase-margin", QuantityParam("angle", positive=True),
     "least phase margin of the loop (default 45°)"),
    ("ripple", "--ripple", str,
     "supply ripple on each rail as amplitude@frequency, e.g. 50mVpp@100Hz (default: none)"),
    ("f0", "--f0", QuantityParam("frequency", positive=True),
     "filter: corner frequency (low-, high-pass) or centre (band-pass), e.g. 1kHz"),
    ("response", "--response", click.Choice(["butterworth", "bessel", "chebyshev"]),
     "filter: response shape of a low- or high-pass (default butterworth)"),
    ("passband_ripple", "--passband-ripple", QuantityParam("decibel"),
     "filter: pass-band ripple of a chebyshev response, e.g. 0.5dB"),
    ("bandwidth", "--bandwidth", QuantityParam("frequency", positive=True),
     "filter: -3 dB bandwidth of a band-pass (Q = f0/bandwidth)"),
    ("cap_tolerance", "--cap-tolerance", QuantityParam("ratio"),
     "filter: tolerance of the capacitors (default 5%)"),
    ("cap_series", "--cap-series", click.Choice(["E6", "E12", "E24"], case_sensitive=False),
     "filter: capacitor series (default E12)"),
    ("response_error", "--response-error", QuantityParam("ratio", positive=True),
     "filter: how far the op-amp may move f0, Q and gain from the network's (default 2%)"),
    ("vin_range", "--vin-range", str,
     "level-shift: the input range low..high, V from ground, e.g. 0..80mV (instead of "
     "--vin and --ref)"),
    ("vout_range", "--vout-range", str,
     "level-shift: the output at the input range's low end..at its high end, e.g. "
     "0.25..4.75V (falling: an inverting stage)"),
    ("shift_source", "--shift-source", QuantityParam("voltage"),
     "level-shift: the voltage the offset divider hangs from (default: the positive rail)"),
)

KEYS: tuple[str, ...] = tuple(name for name, *_ in _OPTIONS) + ("mains", "assume",
                                                             "light_load_swing")


def requirement_options(f: F) -> F:
    """Add the requirement options; the command receives them as ``stage`` (a dict)."""

    @functools.wraps(f)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        stage = {k: kwargs.pop(k) for k in (*KEYS, "design")}
        return f(*args, stage=stage, **kwargs)

    cmd: Any = wrapper
    cmd = click.option("--design", metavar="FILE", type=click.Path(dir_okay=False),
                       help="TOML design file with the same keys (options override it)")(cmd)
    cmd = click.option("--assume", metavar="FIELD=VALUE", multiple=True,
                       help="take this value where a part leaves the field blank, e.g. "
                       "rout=100 (marked assumed in every output; repeat for more)")(cmd)
    cmd = click.option("--mains/--no-mains", default=None,
                       help="the input comes from mains (shows a safety caution)")(cmd)
    cmd = click.option("--light-load-swing/--no-light-load-swing", default=None,
                       help="check a part without output saturation resistances with its "
                            "light-load headroom (printed as assumed)")(cmd)
    for name, opt, kind, text in reversed(_OPTIONS):
        cmd = click.option(opt, name, type=kind, default=None, help=text)(cmd)
    return cmd  # type: ignore[no-any-return]


def build_requirement(stage: dict[str, Any]) -> Any:
    """The Requirement named by the options (and the design file); PickerError if bad.

    The stage as asked: picker.api designs its network (the library's default).
    """
    from picker.design.requirement import requirement_from

    options = {k.replace("_", "-"): v for k, v in stage.items() if k != "design"}
    return requirement_from(options, stage.get("design"))


def save_option(f: F) -> F:
    """--save FILE: write the requirement as given to a design file (see save_requirement)."""
    return click.option(
        "--save", "save", metavar="FILE", type=click.Path(dir_okay=False),
        help="write the requirement as given (design file values, options over them) to "
        "this TOML design file; --design FILE then gives the same result")(f)


def save_requirement(stage: dict[str, Any], path: str | None, db: str | None) -> None:
    """Write ``stage`` as given to ``path`` (replacing it; never the stockroom's files)."""
    if path is None:
        return
    from picker.design.designfile import design_text, write_design
    from picker.design.requirement import given
    from picker.store.engine import resolve_url
    from picker.store.outfile import database_files

    options = {k.replace("_", "-"): v for k, v in stage.items() if k != "design"}
    text = design_text(given(options, stage.get("design")))
    write_design(path, text, database_files(resolve_url(db)), overwrite=True, what="--save")
    click.echo(f"design: {path}", err=True)


__all__ = ["KEYS", "build_requirement", "requirement_options", "save_option",
           "save_requirement"]
