"""Design files: `picker design new` and `--save FILE` on spec, pick and net.

The round trip is checked by equality of reproduced results: a run from options (and a
design file under them) with ``--save FILE``, and a run from ``--design FILE`` alone,
print the same JSON and build equal requirements, over many requirements (hypothesis).
"""

from __future__ import annotations

import tempfile
import tomllib
from pathlib import Path
from typing import Any

import pytest
from click.testing import CliRunner
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from picker.cli import cli
from picker.design.designfile import template
from picker.design.requirement import KEYS, load_design, requirement_from
from tests.cli.clirun import fails, run

# values as engineers type them; floats as text (repr) test that numbers read back exactly
_FLOAT_HZ = st.floats(10.0, 2e5, allow_nan=False).map(repr)
_FLOAT_OHM = st.floats(100.0, 1e6, allow_nan=False).map(repr)
OPTIONAL: dict[str, st.SearchStrategy[str]] = {
    "load": st.one_of(st.sampled_from(["2k", "4k7", "600", "10kΩ"]), _FLOAT_OHM),
    "source": st.sampled_from(["0", "50", "100R"]),
    "gain-error": st.sampled_from(["1%", "0.5%", "0.02", "2%"]),
    "tolerance": st.sampled_from(["0.1%", "1%", "0.005", "50ppm"]),
    "tolerance-rule": st.sampled_from(["worst", "rss"]),
    "phase-error": st.sampled_from(["5deg", "2.5°", "10"]),
    "offset-max": st.sampled_from(["20mV", "1V", "0.3"]),
    "noise-max": st.sampled_from(["100uV", "1mVrms"]),
    "temp": st.sampled_from(["85C", "-40..85C", "0..70C"]),
    "qty": st.sampled_from(["1", "4"]),
    "margin": st.sampled_from(["1", "1.25", "1.5"]),
    "cload": st.sampled_from(["100pF", "0", "1.5nF"]),
    "phase-margin": st.sampled_from(["50deg", "60", "45°"]),
    "ripple": st.sampled_from(["50mVpp@100Hz", "10mV@120Hz"]),
    "assume": st.sampled_from(["rout=100", "rin=1meg"]),
    "ref": st.sampled_from(["0", "0.5V"]),
}
DIFFERENCE_ONLY: dict[str, st.SearchStrategy[str]] = {
    "vcm": st.sampled_from(["-1..1V", "0.5V"]),
    "cmrr": st.sampled_from(["60dB", "80"]),
}


@st.composite
def stages(draw: st.DrawFn) -> tuple[dict[str, Any], list[str]]:
    """(design-file values, command-line options) of one valid stage; some keys in the
    file, some as options, some in both (the option then differs and wins)."""
    topology = draw(st.sampled_from(["inverting", "non-inverting", "follower", "difference"]))
    values: dict[str, Any] = {
        "topology": topology,
        "rails": draw(st.sampled_from(["±12", "+15/-15", "±5"])),
        "freq": draw(st.one_of(st.sampled_from(["1kHz", "20k", "100Hz"]), _FLOAT_HZ)),
    }
    if topology != "follower":
        values["gain"] = draw(st.sampled_from(["2", "4.7", "10", "20dB", "33"]))
    if draw(st.booleans()):
        values["vin"] = draw(st.sampled_from(["10mVpk", "20mVpp", "5mVrms", "0.05"]))
    else:
        values["vout"] = draw(st.sampled_from(["0.5Vpk", "1Vpp", "0.3Vrms"]))
    pool = dict(OPTIONAL, **(DIFFERENCE_ONLY if topology == "difference" else {}))
    if topology != "follower":
        pool["rf"] = st.sampled_from(["22k", "47k", "12000"])
    for key in draw(st.lists(st.sampled_from(sorted(pool)), unique=True, max_size=8)):
        values[key] = draw(pool[key])
    if draw(st.booleans()):
        values["mains"] = draw(st.booleans())
    in_file, options = {}, []
    for key, value in values.items():
        where = draw(st.sampled_from(["file", "option", "both"]))
        if key == "mains":
            if where != "option":
                in_file[key] = value
            if where != "file":
                options.append("--mains" if value else "--no-mains")
            continue
        if where != "option":
            in_file[key] = value
        if where == "both":  # the file says something else; the option wins
            in_file[key] = draw(pool[key]) if key in pool else value
        if where != "file":
            options += [f"--{key}", value]
    return in_file, options


def _toml(values: dict[str, Any]) -> str:
    def one(v: Any) -> str:
        if isinstance(v, bool):
            return "true" if v else "false"
        return '"' + str(v).replace("\\", "\\\\").replace('"', '\\"') + '"'
    return "".join(f"{k} = {one(v)}\n" for k, v in values.items())


def _invoke(args: list[str]) -> Any:
    return CliRunner().invoke(cli, args, catch_exceptions=False)


def _round_trip(command: list[str], stage: tuple[dict[str, Any], list[str]]) -> None:
    in_file, options = stage
    with tempfile.TemporaryDirectory() as tmp:
        first = Path(tmp) / "given.toml"
        first.write_text(_toml(in_file), encoding="utf-8")
        saved = Path(tmp) / "saved.toml"
        original = _invoke([*command, "--design", str(first), *options, "--json",
                            "--save", str(saved)])
        assume(original.exit_code == 0)  # a drawn stage no circuit can meet: not a case
        again = _invoke([*command, "--design", str(saved), "--json"])
        assert again.exit_code == 0, again.stderr
        assert again.stdout == original.stdout
        # the same requirement, field by field
        flags = [o for o in options if o in ("--mains", "--no-mains")]
        opts = _pairs(options)
        if flags:
            opts["mains"] = flags[-1] == "--mains"
        assert load_design(saved) == requirement_from(opts, first)


def _pairs(options: list[str]) -> dict[str, Any]:
    out: dict[str, Any] = {}
    i = 0
    while i < len(options):
        if options[i] in ("--mains", "--no-mains"):
            i += 1
            continue
        out[options[i].lstrip("-")] = options[i + 1]
        i += 2
    return out


ROUND = settings(max_examples=60, deadline=None,
                 suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])


@ROUND
@given(stage=stages())
def test_spec_save_then_design_gives_the_same_json(stage: tuple[dict[str, Any], list[str]]) -> None:
    _round_trip(["spec"], stage)


@settings(ROUND, max_examples=20)
@given(stage=stages())
def test_net_save_then_design_gives_the_same_json(stage: tuple[dict[str, Any], list[str]]) -> None:
    _round_trip(["net"], stage)


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> str:
    path = str(tmp_path_factory.mktemp("designfiles") / "demo.db")
    run("init", "--demo", "--db", path)
    return path


def test_pick_save_then_design_gives_the_same_json(demo: str) -> None:
    @settings(ROUND, max_examples=20)
    @given(stage=stages())
    def inner(stage: tuple[dict[str, Any], list[str]]) -> None:
        _round_trip(["pick", "--db", demo], stage)

    inner()


def test_template_lists_every_key_and_reads_as_a_stage(tmp_path: Path) -> None:
    out = tmp_path / "stage.toml"
    run("design", "new", str(out))
    text = out.read_text()
    assert text == template()
    for key in KEYS:
        assert f"# {key}:" in text and "default:" in text
    base = load_design(out)
    assert base.topology == "inverting" and base.gain == 10
    # each commented example, taken in on its own, is a valid value of its key
    for line in text.splitlines():
        if not line.startswith("# ") or " = " not in line:
            continue
        key = line[2:].split(" = ")[0]
        if key not in KEYS:
            continue
        stage = tomllib.loads(text) | tomllib.loads(line[2:])
        if key in ("vcm", "cmrr"):
            stage["topology"] = "difference"
        if key in ("f0", "response", "passband-ripple", "bandwidth", "cap-tolerance",
                   "cap-series", "response-error"):
            stage["topology"] = "mfb-bandpass" if key == "bandwidth" else "vcvs-lowpass"
            stage.setdefault("f0", "1kHz")
            if key == "passband-ripple":
                stage["response"] = "chebyshev"
        if key in ("iin", "iin-min", "cdet", "rshunt", "zt", "f3db", "rise", "tia-response"):
            stage["topology"] = "transimpedance"
            for k in ("gain", "vin", "freq"):
                stage.pop(k, None)
            stage.setdefault("iin", "10uA")
            if key != "rise":
                stage.setdefault("f3db", "100kHz")
            stage.setdefault("zt", "100k")
        if key == "vout" and stage.get("topology") != "transimpedance":
            del stage["vin"]
        if key in ("coupling", "fmin", "low-corner"):  # the AC-coupling keys go together
            stage["coupling"] = "ac"
            stage.setdefault("fmin", "20Hz")
        if key == "network":
            stage["network"] = {"rf": "47k", "rg": "4k7"}
        if key == "rin":
            stage.pop("rg", None)
        if key in ("vin-range", "vout-range", "shift-source"):  # a level-shift stage
            for k in ("topology", "gain", "vin", "ref"):
                stage.pop(k, None)
            stage.setdefault("vin-range", "0..80mV")
            stage.setdefault("vout-range", "0.25..4.75V")
        (tmp_path / "one.toml").write_text(_toml_any(stage), encoding="utf-8")
        load_design(tmp_path / "one.toml")


def _toml_any(values: dict[str, Any]) -> str:
    from picker.design.designfile import _toml as write

    return "".join(f"{k} = {write(v)}\n" for k, v in values.items())


def test_design_new_keeps_an_existing_file_and_the_stockroom(tmp_path: Path, demo: str) -> None:
    out = tmp_path / "mine.toml"
    out.write_text("gain = 3\n")
    r = fails("design", "new", str(out))
    assert "--force" in r.stderr and out.read_text() == "gain = 3\n"
    run("design", "new", str(out), "--force")
    assert out.read_text() == template()
    before = Path(demo).read_bytes()
    assert "stockroom itself" in fails("design", "new", demo, "--force", "--db", demo).stderr
    r = fails("spec", "--topology", "follower", "--vin", "1V", "--freq", "1k", "--rails", "±12",
              "--save", demo + "-wal", "--db", demo)
    assert "stockroom itself" in r.stderr
    assert Path(demo).read_bytes() == before
