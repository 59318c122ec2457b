"""Hostile option values, cells and filters through the command line (issue 17, 9 and 10).

Each case used to end in a traceback, numpy warnings beside the error line, a filter
that matched too much, or a value silently accepted. Bad input must be one line on
stderr and exit 2; good input must be read exactly.
"""

from __future__ import annotations

import json
import subprocess
import sys
import warnings
from datetime import UTC, datetime, timedelta
from pathlib import Path

import click
import pytest
from click.testing import CliRunner

from picker.cli.app import PickerGroup
from picker.errors import BadValue
from picker.store.stock import parse_since
from tests.cli.clirun import fails, run

STAGE = ["--topology", "non-inverting", "--gain", "10", "--vin", "0.1", "--freq", "1kHz",
         "--rails", "±12"]


def _stage_commands(db: str) -> list[list[str]]:
    return [["spec"], ["pick", "--db", db], ["why", "bip-gp-a", "--db", db], ["net"],
            ["wave", "bip-gp-a", "--db", db], ["bode", "bip-gp-a", "--db", db]]


@pytest.mark.parametrize("k", range(6))
@pytest.mark.parametrize("extra", [["--rf", "1e308k"], ["--freq", "1e308k"],
                                   ["--freq", "1e-320"], ["--gain", "10000dB"],
                                   ["--rf", "1e300"], ["--gain", "１０k"]])
def test_overflowing_values_are_one_line_in_every_stage_command(
        db: str, k: int, extra: list[str]) -> None:
    fails(*_stage_commands(db)[k], *STAGE, *extra)


def test_digits_of_another_script_read_as_ascii_on_the_command_line() -> None:
    # full-width digits (Unicode Character Database: U+FF11 is digit 1, U+FF10 digit 0)
    wide = run("spec", *STAGE[:3], "１０", *STAGE[4:], "--json")
    ascii_ = run("spec", *STAGE, "--json")
    assert wide.stdout == ascii_.stdout


def test_no_numpy_warning_beside_the_error_line() -> None:
    # the installed command with Python's default warning filters, as a user runs it
    proc = subprocess.run([sys.executable, "-m", "picker", "spec", *STAGE, "--rf", "1e300"],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 2
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("picker: error: "), proc.stderr


def test_warnings_are_held_back_when_a_command_is_refused(
        capsys: pytest.CaptureFixture[str]) -> None:
    group = PickerGroup(name="picker")

    @group.command()
    def refused() -> None:
        warnings.warn("overflow encountered", RuntimeWarning, stacklevel=1)
        raise BadValue("--x", "1", "is refused")

    @group.command()
    def done() -> None:
        warnings.warn("overflow encountered", RuntimeWarning, stacklevel=1)
        click.echo("ok")

    with warnings.catch_warnings(record=True) as shown:
        warnings.simplefilter("always")  # as a user's default filters would show it
        assert group.run(["refused"]) == 2
        err = capsys.readouterr().err
        assert err.strip().splitlines() == ["picker: error: --x: '1' is refused"]
        assert shown == []
        assert group.run(["done"]) == 0
        assert [str(w.message) for w in shown] == ["overflow encountered"]  # success shows it


def test_a_huge_decibel_cell_is_one_line(demo_db: str, tmp_path: Path) -> None:
    path = tmp_path / "in.csv"
    path.write_text("label,aol_v_per_v\nbig-a,10000dB\n", encoding="utf-8")
    assert "aol_v_per_v" in fails("parts", "import", str(path), "--db", demo_db).stderr


def test_since_the_first_day_of_the_calendar_and_relative_dates(demo_db: str) -> None:
    run("stock", "take", "bip-gp-a", "1", "--for", "p", "--db", demo_db)
    for since in ("0001-01-01", "7d", "12h", "2w", "1D"):
        out = run("stock", "log", "--since", since, "--json", "--db", demo_db).stdout
        assert len(json.loads(out)) == 1, since
    assert json.loads(run("stock", "log", "--since", "9999-12-31", "--json",
                          "--db", demo_db).stdout) == []
    fails("stock", "log", "--since", "7 days", "--db", demo_db)
    fails("stock", "log", "--since", "-7d", "--db", demo_db)


def test_relative_dates_count_back_from_now() -> None:
    # calendar arithmetic: a week is 7 days of 24 hours (common practice, no source)
    now = datetime(2026, 3, 10, 12, 0, tzinfo=UTC)
    assert parse_since("7d", now=now) == datetime(2026, 3, 3, 12, 0, tzinfo=UTC)
    assert parse_since("2w", now=now) == now - timedelta(days=14)
    assert parse_since("36h", now=now) == datetime(2026, 3, 9, 0, 0, tzinfo=UTC)
    assert parse_since("999999w", now=now) == datetime.min.replace(tzinfo=UTC)


def test_where_contains_matches_underscore_and_percent_literally(demo_db: str) -> None:
    run("parts", "add", "odd_label", "notes=100% sure", "--db", demo_db)
    run("parts", "add", "oddxlabel", "notes=100 sure", "--db", demo_db)
    labels = {r["label"] for r in json.loads(
        run("parts", "list", "--where", "label~_", "--json", "--db", demo_db).stdout)}
    assert labels == {"odd_label"}
    labels = {r["label"] for r in json.loads(
        run("parts", "list", "--where", "notes~100%", "--json", "--db", demo_db).stdout)}
    assert labels == {"odd_label"}


def test_where_language_lives_in_the_library(memory_store) -> None:  # type: ignore[no-untyped-def]
    from picker.store.query import parse_where

    assert parse_where("slew>=1V/us").value == 1e6  # V/µs -> V/s (SI)
    frame = memory_store.parts_frame(["label"], ["slew>=1V/us"])
    assert len(frame) == len(memory_store.parts_frame(["label"], [parse_where("slew>=1e6")]))
    source = (Path(__file__).resolve().parents[2] / "picker" / "cli" / "parts.py").read_text(
        encoding="utf-8")
    assert "_WHERE" not in source and "Condition(" not in source


@pytest.mark.parametrize("value", ["supply_max_v=-1", "supply_min_v=-5", "gbw=-1MHz",
                                   "aol=200V/MV"])
def test_parts_add_refuses_impossible_values(demo_db: str, value: str) -> None:
    fails("parts", "add", "new-a", value, "--db", demo_db)


def test_error_hints_name_commands_and_options_that_exist(demo_db: str) -> None:
    err = fails("parts", "list", "--where", "bogus>1", "--db", demo_db).stderr
    assert "picker parts fields" in err and "--fields" not in err
    run("parts", "fields")  # the command the hint names exists
    err = fails("parts", "add", "bip-gp-a", "--db", demo_db).stderr
    assert "--update" not in err and "picker parts edit bip-gp-a" in err


def test_names_listed_by_parts_fields_are_accepted_by_import(demo_db: str,
                                                             tmp_path: Path) -> None:
    listing = run("parts", "fields", "--db", demo_db).stdout.splitlines()[2:]
    names = set()
    for line in listing:
        field, also = line[:16].strip(), line[16:36].strip()
        names.add(field)
        names.update(a.strip() for a in also.split(",") if a.strip())
    assert {"input", "ch", "tech", "channels"} <= names
    for k, name in enumerate(sorted(names - {"label"})):
        path = tmp_path / f"h{k}.csv"
        path.write_text(f"label,{name}\n", encoding="utf-8")
        run("parts", "import", str(path), "--dry-run", "--db", demo_db)


def test_parts_list_json_whole_numbers_are_integers(demo_db: str) -> None:
    run("parts", "edit", "bip-gp-a", "qty=45", "--db", demo_db)
    raw = run("parts", "list", "--json", "--db", demo_db).stdout
    row = next(r for r in json.loads(raw) if r["label"] == "bip-gp-a")
    assert row["qty"] == 45 and isinstance(row["qty"], int)
    assert '"qty": 45.0' not in raw


def test_parts_fields_accepts_db(tmp_path: Path) -> None:
    result = CliRunner().invoke(__import__("picker.cli", fromlist=["cli"]).cli,
                                ["parts", "fields", "--db", str(tmp_path / "none.db")])
    assert result.exit_code == 0 and "channels" in result.stdout
