"""Every command that takes a stage cautions about supplies beyond extra-low voltage or mains.

The 60 V DC limit of extra-low voltage is the one the issue names (IEC 61140 practice;
common practice, no source beyond that).
"""

from __future__ import annotations

import pytest

from tests.cli.clirun import run

HIGH = ["--topology", "non-inverting", "--gain", "5", "--vin", "1Vpk", "--freq", "1kHz",
        "--rails", "±40"]
LOW = [*HIGH[:-1], "±12"]


def _commands(db: str) -> list[list[str]]:
    return [["spec"], ["pick", "--db", db], ["why", "bip-hv-a", "--db", db], ["net"],
            ["wave", "bip-hv-a", "--db", db], ["bode", "bip-hv-a", "--db", db]]


@pytest.mark.parametrize("k", range(6))
@pytest.mark.parametrize("as_json", [False, True])
def test_caution_beyond_extra_low_voltage(db: str, k: int, as_json: bool) -> None:
    cmd = _commands(db)[k]
    extra = ["--json"] if as_json else []
    result = run(*cmd, *HIGH, *extra)
    said = result.stdout + result.stderr
    assert "Caution" in said and "60 V" in said and "licensed" in said
    if as_json:
        assert "Caution" not in result.stdout  # JSON stays machine-readable
    quiet = run(*cmd, *LOW, *extra)
    assert "Caution" not in quiet.stdout + quiet.stderr


@pytest.mark.parametrize("k", range(6))
def test_caution_for_mains(db: str, k: int) -> None:
    result = run(*_commands(db)[k], *LOW, "--mains")
    assert "mains" in result.stdout + result.stderr and "Caution" in result.stdout + result.stderr
