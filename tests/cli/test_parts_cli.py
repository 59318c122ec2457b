"""`picker init` and `picker parts ...` through click's CliRunner and the installed executable."""

from __future__ import annotations

import csv
import io
import json
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from picker.cli import cli

DEMO = Path(__file__).resolve().parents[2] / "picker" / "data" / "demo_stockroom.csv"


def run(*args: str, ok: bool = True):  # type: ignore[no-untyped-def]
    result = CliRunner().invoke(cli, list(args), catch_exceptions=not ok)
    if ok:
        assert result.exit_code == 0, result.output + result.stderr
    return result


def demo_rows() -> list[dict[str, str]]:
    with DEMO.open(encoding="utf-8") as f:
        return list(csv.DictReader(f))


def test_init_demo_loads_every_demo_row(demo_db: str) -> None:
    out = run("parts", "list", "--json", "--db", demo_db).stdout
    rows = json.loads(out)
    assert sorted(r["label"] for r in rows) == sorted(r["label"] for r in demo_rows())


def test_list_shows_engineering_units(demo_db: str) -> None:
    out = run("parts", "list", "--db", demo_db, "--where", "label=bip-gp-a").stdout
    # bip-gp-a holds 1 MHz, 0.5 V/µs, 200 V/mV = 106 dB in picker/data/demo_stockroom.csv
    assert "1 MHz" in out and "0.5 V/µs" in out and "106 dB" in out
    assert "SR [V/µs]" in out


def test_where_filter_with_units(demo_db: str) -> None:
    rows = json.loads(run("parts", "list", "--json", "--db", demo_db,
                          "--where", "slew>=10V/us", "--where", "tech~cmos").stdout)
    src = {r["label"]: r for r in demo_rows()}
    want = sorted(lbl for lbl, r in src.items()
                  if r["slew_v_per_s"] and float(r["slew_v_per_s"]) >= 10e6
                  and "cmos" in r["tech"].lower())
    assert sorted(r["label"] for r in rows) == want and want


def test_add_show_edit_remove(tmp_path: Path) -> None:
    db = str(tmp_path / "s.db")
    run("init", "--db", db)
    run("parts", "add", "mine-a", "gbw=4.7MHz", "slew=2V/us", "aol=100dB", "rin=10meg",
        "qty=12", "notes=bench spare", "--db", db)
    shown = json.loads(run("parts", "show", "mine-a", "--json", "--db", db).stdout)
    assert shown["gbw_hz"] == pytest.approx(4.7e6) and shown["slew_v_per_s"] == pytest.approx(2e6)
    assert shown["aol_v_per_v"] == pytest.approx(1e5) and shown["rin_ohm"] == pytest.approx(1e7)
    card = run("parts", "show", "mine-a", "--db", db).stdout
    assert "4.7 MHz" in card and "10 MΩ" in card
    run("parts", "edit", "mine-a", "slew=", "qty=3", "--db", db)
    shown = json.loads(run("parts", "show", "mine-a", "--json", "--db", db).stdout)
    assert shown["slew_v_per_s"] is None and shown["qty"] == 3
    run("parts", "remove", "mine-a", "--yes", "--db", db)
    assert json.loads(run("parts", "list", "--json", "--db", db).stdout) == []


@pytest.mark.parametrize(
    "args, words",
    [
        (["parts", "add", "x", "gbw=10V"], "is a voltage"),
        (["parts", "add", "x", "bogus=1"], "is not a part field"),
        (["parts", "add", "x", "gbw"], "FIELD=VALUE"),
        (["parts", "show", "nope"], "not in the stockroom"),
        (["parts", "list", "--where", "slew>>1"], "slew"),
        (["parts", "edit", "bip-gp-a", "supply_min=40"], "supply_min_v"),
        (["parts", "edit", "bip-gp-a", "qty=-1"], "negative"),
        (["parts", "list", "--nonsense"], "No such option"),
    ],
)
def test_bad_input_is_one_line_exit_2(demo_db: str, args: list[str], words: str) -> None:
    result = CliRunner().invoke(cli, [*args, "--db", demo_db])
    assert result.exit_code == 2, result.output
    assert result.stdout == ""
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and words in lines[0] and "Traceback" not in result.stderr


def test_import_reports_every_bad_cell_and_writes_nothing(demo_db: str, tmp_path: Path) -> None:
    f = tmp_path / "bad.csv"
    f.write_text("label,gbw,slew,qty\nok-1,1MHz,1V/us,2\nbad-1,fast,1V/us,2\nbad-2,1MHz,1V/us,-3\n",
                 encoding="utf-8")
    before = run("parts", "export", "--db", demo_db).stdout
    result = CliRunner().invoke(cli, ["parts", "import", str(f), "--db", demo_db])
    assert result.exit_code == 2
    assert "row 3, column gbw_hz" in result.stderr and "row 4, column qty" in result.stderr
    assert run("parts", "export", "--db", demo_db).stdout == before


def test_import_dry_run_and_update(demo_db: str, tmp_path: Path) -> None:
    f = tmp_path / "upd.csv"
    f.write_text("label,qty\nbip-gp-a,3\nnew-one,1\n", encoding="utf-8")
    before = run("parts", "export", "--db", demo_db).stdout
    out = run("parts", "import", str(f), "--update", "--dry-run", "--db", demo_db).stdout
    assert "would add 1" in out and "would update 1" in out
    assert run("parts", "export", "--db", demo_db).stdout == before
    assert CliRunner().invoke(cli, ["parts", "import", str(f), "--db", demo_db]).exit_code == 2
    run("parts", "import", str(f), "--update", "--db", demo_db)
    assert json.loads(run("parts", "show", "bip-gp-a", "--json", "--db", demo_db).stdout)["qty"] == 3


def test_export_then_import_into_empty_database_is_identical(demo_db: str, tmp_path: Path) -> None:
    f = tmp_path / "all.csv"
    run("parts", "export", str(f), "--db", demo_db)
    other = str(tmp_path / "other.db")
    run("init", "--db", other)
    run("parts", "import", str(f), "--db", other)
    assert run("parts", "export", "--db", other).stdout == f.read_text(encoding="utf-8")


def test_export_neutralises_formulas_and_imports_back(tmp_path: Path) -> None:
    # OWASP "CSV Injection": prefix cells starting with = + - @ tab CR so spreadsheets
    # show them as text
    db = str(tmp_path / "s.db")
    run("init", "--db", db)
    nasty = ["=1+1", "+cmd", "-2+3", "@SUM(A1)", "\tx", "'quoted"]
    for i, text in enumerate(nasty):
        run("parts", "add", f"n{i}", f"notes={text}", "--db", db)
    out = run("parts", "export", "--db", db).stdout
    cells = [r["notes"] for r in csv.DictReader(io.StringIO(out))]
    assert all(c.startswith("'") for c in cells)
    f = tmp_path / "n.csv"
    f.write_text(out, encoding="utf-8")
    other = str(tmp_path / "o.db")
    run("init", "--db", other)
    run("parts", "import", str(f), "--db", other)
    back = json.loads(run("parts", "list", "--json", "--columns", "notes", "--db", other).stdout)
    assert sorted(r["notes"] for r in back) == sorted(nasty)


def test_installed_executable_runs(tmp_path: Path) -> None:
    exe = shutil.which("picker")
    cmd = [exe] if exe else [sys.executable, "-m", "picker"]
    db = str(tmp_path / "x.db")
    done = subprocess.run([*cmd, "init", "--demo", "--db", db], capture_output=True, text=True,
                          timeout=120)
    assert done.returncode == 0, done.stderr
    done = subprocess.run([*cmd, "parts", "show", "nope", "--db", db], capture_output=True,
                          text=True, timeout=120)
    assert done.returncode == 2 and done.stderr.count("\n") == 1 and "nope" in done.stderr


def test_every_command_has_help_and_is_in_readme() -> None:
    readme = (Path(__file__).resolve().parents[2] / "README.md").read_text(encoding="utf-8")
    runner = CliRunner()
    import click

    def walk(group: click.Group, path: list[str]) -> list[list[str]]:
        found = []
        ctx = click.Context(group)
        for name in group.list_commands(ctx):
            cmd = group.get_command(ctx, name)
            assert cmd is not None
            found.append([*path, name])
            if isinstance(cmd, click.Group):
                found.extend(walk(cmd, [*path, name]))
        return found

    commands = walk(cli, [])
    assert len(commands) >= 9
    for words in commands:
        result = runner.invoke(cli, [*words, "--help"], catch_exceptions=False)
        assert result.exit_code == 0 and "Usage:" in result.output
        assert f"picker {' '.join(words)}" in readme, f"README lacks `picker {' '.join(words)}`"


def test_show_counts_reserved_and_available(demo_db: str) -> None:
    """available = on hand - reserved (the stockroom's own rule, README "Stock")."""
    before = json.loads(run("parts", "show", "bip-gp-a", "--json", "--db", demo_db).stdout)
    run("stock", "reserve", "bip-gp-a", "7", "--for", "amp-1", "--db", demo_db)
    after = json.loads(run("parts", "show", "bip-gp-a", "--json", "--db", demo_db).stdout)
    assert (after["qty"], after["reserved"], after["available"]) == (
        before["qty"], 7, before["qty"] - 7)
    card = run("parts", "show", "bip-gp-a", "--db", demo_db).stdout
    assert re.search(r"^reserved\s+7\s", card, re.M)
    assert re.search(rf"^available\s+{before['qty'] - 7}\s", card, re.M)
