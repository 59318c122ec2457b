"""The library decides, the command line renders: each command's --json equals the
picker.api result serialised, for stages of every topology, with and without source,
load and an explicit network (a notebook user gets exactly what --json prints)."""

from __future__ import annotations

import json
from typing import Any

import pytest

from picker import api
from picker.report.tables import to_json
from picker.store import Store
from tests.cli.clirun import run

STAGES: list[dict[str, str]] = [
    {"topology": "inverting", "gain": "10", "vin": "0.5V", "freq": "20kHz", "rails": "±12"},
    {"topology": "inverting", "gain": "4.7", "vin": "1V", "freq": "5kHz", "rails": "±15",
     "source": "600", "load": "2k"},
    {"topology": "inverting", "gain": "20", "vout": "8V", "freq": "10kHz", "rails": "±12",
     "load": "10k", "network": "rf=20k,rg=1k"},
    {"topology": "non-inverting", "gain": "2", "vin": "1V", "freq": "1kHz", "rails": "±10",
     "load": "1k"},
    {"topology": "non-inverting", "gain": "20", "vin": "0.25V", "freq": "20kHz",
     "rails": "±12", "source": "10k", "offset-max": "50mV", "noise-max": "1mV"},
    {"topology": "non-inverting", "gain": "11", "vin": "0.1V", "freq": "2kHz", "rails": "+5/0",
     "load": "10k", "network": "rf=100k,rg=10k"},
    {"topology": "non-inverting", "gain": "5", "vin": "0.2V", "freq": "50kHz",
     "rails": "±5", "rf": "47k"},
    {"topology": "follower", "vin": "1V", "freq": "100kHz", "rails": "±5"},
    {"topology": "follower", "vin": "2V", "freq": "10kHz", "rails": "±15", "source": "100k",
     "load": "600", "temp": "-40..85C", "offset-max": "10mV"},
    {"topology": "difference", "gain": "2", "vin": "1V", "freq": "1kHz", "rails": "±15"},
    {"topology": "difference", "gain": "10", "vin": "0.1V", "freq": "5kHz", "rails": "±12",
     "source": "100", "load": "5k", "gain-error": "2%"},
    {"topology": "difference", "gain": "1", "vin": "2V", "freq": "2kHz", "rails": "±15",
     "network": "r1=10k,r2=10k,r3=10k,r4=10k"},
]
PART = "bip-gp-a"


def _design(stage: dict[str, str], tmp: Any) -> list[str]:
    """The stage as options, its explicit network (if any) in a design file."""
    args: list[str] = []
    for k, v in stage.items():
        if k != "network":
            args += [f"--{k}", v]
    if "network" in stage:
        pairs = dict(kv.split("=") for kv in stage["network"].split(","))
        path = tmp / "net.toml"
        path.write_text("[network]\n" + "".join(f'{k} = "{v}"\n' for k, v in pairs.items()),
                        encoding="utf-8")
        args += ["--design", str(path)]
    return args


def _req(args: list[str]) -> Any:
    opts = {a.lstrip("-"): b for a, b in zip(args[::2], args[1::2], strict=True)}
    design = opts.pop("design", None)
    return api.requirement(design=design, **opts)


def _same(stdout: str, obj: Any) -> None:
    assert json.loads(stdout) == json.loads(to_json(obj))


@pytest.mark.parametrize("stage", STAGES, ids=[f"{i}-{s['topology']}" for i, s in
                                               enumerate(STAGES)])
def test_every_command_json_equals_the_api(stage: dict[str, str], demo_db: str,
                                           tmp_path: Any) -> None:
    args = _design(stage, tmp_path)
    req = _req(args)
    store = Store.open(demo_db)
    _same(run("spec", *args, "--json").stdout, api.spec(req).to_json())
    _same(run("pick", *args, "--json", "--list", "all", "--db", demo_db).stdout,
          api.pick(req, store).to_json())
    _same(run("pick", *args, "--json", "--list", "all", "--network-per-part", "--db",
              demo_db).stdout, api.pick(req, store, network_per_part=True).to_json())
    _same(run("why", PART, *args, "--json", "--db", demo_db).stdout,
          api.why(req, PART, store).to_json())
    if "network" not in stage:
        _same(run("net", *args, "--json").stdout, api.design_network(req).as_json())
    _same(run("wave", PART, *args, "--json", "--db", demo_db).stdout,
          api.waveform(req, store, PART).summary(0))
    _same(run("bode", PART, *args, "--json", "--db", demo_db).stdout,
          api.response(req, store, PART).summary(0))
    store.dispose()


def test_spec_of_the_api_is_the_stage_as_built() -> None:
    """The designed network is the library's default: api.spec and picker spec agree, and
    both differ from the ideal-ratio stage (which the command line never shows)."""
    from picker.design.spec import minimum_specs

    req = api.requirement(topology="inverting", gain="10", vin="0.5V", freq="20kHz",
                          rails="±12", load="2k")
    built = api.spec(req)
    assert built.stage.resistors == dict(api.built(req).network or {})
    assert not built.stage.ideal_network and minimum_specs(req).stage.ideal_network
