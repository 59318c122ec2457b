"""Exports and backups written beside the database never destroy it; backup and restore
paths with '#', '?', '%' or spaces mean the file of that name.

Sources: keeping the data safe is common practice, no source; SQLite's documentation,
"URI Filenames in SQLite" (sqlite.org/uri.html): in a URI, '?' starts the query, '#'
the fragment and '%HH' is an escaped byte, so a file name pasted into a URI unescaped
names another file; "Write-Ahead Logging" (sqlite.org/wal.html) and "Temporary Files
Used By SQLite" (sqlite.org/tempfiles.html): a database's -wal, -shm and -journal files
are part of it.
"""

from __future__ import annotations

import os
from pathlib import Path

import pytest
from click.testing import CliRunner
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from picker.cli import cli
from picker.store import Store
from tests.cli.clirun import fails, run
from tests.demo import DEMO_PARTS


def checksum(path: Path) -> str:
    s = Store.open(str(path))
    try:
        return s.checksum()
    finally:
        s.dispose()


def make_db(path: Path) -> str:
    run("init", "--demo", "--db", str(path))
    run("stock", "take", "bip-gp-a", "2", "--for", "preamp", "--by", "ann", "--db", str(path))
    return checksum(path)


# -- finding 1: a file next to the database ------------------------------------------------
@pytest.mark.parametrize("db_name, command", [
    ("stock.part", ["parts", "export", "stock"]),
    ("stock.part", ["db", "backup", "stock"]),
    ("stock.part.db", ["db", "backup", "--portable", "stock"]),
    ("stock.db.part", ["parts", "export", "stock.db"]),
])
def test_a_target_whose_temporary_name_was_the_database_leaves_it_whole(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch, db_name: str, command: list[str]) -> None:
    # each pair destroyed the stockroom before: the temporary file was TARGET.part
    monkeypatch.chdir(tmp_path)
    db = tmp_path / db_name
    before = make_db(db)
    run(*command, "--db", db_name)
    assert checksum(db) == before
    assert (tmp_path / command[-1]).stat().st_size > 0
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".picker-")]


@pytest.mark.parametrize("suffix", ["", "-wal", "-shm", "-journal"])
@pytest.mark.parametrize("command", [
    ["parts", "export"], ["db", "backup"], ["db", "backup", "--portable"],
])
def test_the_database_and_its_companions_are_refused_as_targets(
        tmp_path: Path, suffix: str, command: list[str]) -> None:
    db = tmp_path / "stock.db"
    before = make_db(db)
    result = fails(*command, str(db) + suffix, "--db", str(db))
    assert "is the stockroom itself" in result.stderr
    assert checksum(db) == before
    # nothing written: no temporary file left, no stray -journal that SQLite would replay
    assert sorted(p.name for p in tmp_path.iterdir()
                  if not p.name.endswith(("-wal", "-shm"))) == ["stock.db"]


@pytest.mark.parametrize("link", ["symlink", "hardlink"])
def test_a_link_to_the_database_is_refused_as_a_target(tmp_path: Path, link: str) -> None:
    db = tmp_path / "stock.db"
    before = make_db(db)
    alias = tmp_path / "alias.csv"
    (os.symlink if link == "symlink" else os.link)(db, alias)
    for command in (["parts", "export"], ["db", "backup"]):
        fails(*command, str(alias), "--db", str(db))
    assert checksum(db) == before


def test_an_unwritable_target_is_one_line_and_leaves_nothing(tmp_path: Path) -> None:
    db = tmp_path / "stock.db"
    before = make_db(db)
    fails("parts", "export", str(tmp_path / "no-such-folder" / "x.csv"), "--db", str(db))
    fails("db", "backup", str(tmp_path), "--db", str(db))  # a folder
    assert checksum(db) == before
    assert sorted(p.name for p in tmp_path.iterdir() if not p.name.startswith("stock.db")) == []


# -- finding 2: names that a URI would cut or decode ---------------------------------------
@pytest.mark.parametrize("name", ["nightly#2", "bk?x.db", "bk%20.db", "bk%.db", "sp ace.db"])
def test_backup_and_restore_use_exactly_the_named_file(tmp_path: Path,
                                                        monkeypatch: pytest.MonkeyPatch,
                                                        name: str) -> None:
    monkeypatch.chdir(tmp_path)
    source = tmp_path / "two.db"
    make_db(source)
    # decoys: the files the unescaped URI would have opened instead
    run("init", "--db", "nightly")
    run("init", "--db", "bk")
    run("init", "--db", "bk .db")
    run("db", "backup", name, "--db", "two.db")
    assert (tmp_path / name).exists()
    run("db", "restore", name, "--db", "r.db")
    a, b = Store.open("two.db"), Store.open("r.db")
    try:
        assert b.export_rows() == a.export_rows()
    finally:
        a.dispose()
        b.dispose()


@pytest.mark.parametrize("name", ["a?b.db", "a#b.db", "a%20b.db", "a b.db"])
def test_a_stockroom_file_name_means_itself(tmp_path: Path, name: str) -> None:
    path = tmp_path / name
    run("init", "--demo", "--db", str(path))
    assert path.exists() and path.stat().st_size > 0
    assert sorted(p.name for p in tmp_path.iterdir() if p.suffix == ".db") == [name]
    assert f"{DEMO_PARTS} part(s)" in run("parts", "list", "--db", str(path)).stderr


# -- property: generated names beside the database ------------------------------------------
NAME_PIECES = st.sampled_from(["stock", "stock.db", ".part", "#", "?", "%", "%20", " ", "-wal",
                               "-shm", "-journal", "x", ".db", "..", "/", "\x00"])


@settings(max_examples=150, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(pieces=st.lists(NAME_PIECES, min_size=1, max_size=4),
       command=st.sampled_from(["export", "backup", "portable", "restore"]))
def test_any_name_beside_the_database_succeeds_or_is_one_line(
        tmp_path_factory: pytest.TempPathFactory, pieces: list[str], command: str) -> None:
    # exit 0, or exit 2 with exactly one line; never a traceback; the stockroom unchanged
    folder = tmp_path_factory.mktemp("names")
    db = folder / "stock.db"
    before = make_db(db)
    name = str(folder / "".join(pieces))
    args = {
        "export": ["parts", "export", name],
        "backup": ["db", "backup", name],
        "portable": ["db", "backup", "--portable", name],
        "restore": ["db", "restore", name],
    }[command]
    result = CliRunner().invoke(cli, [*args, "--db", str(db)])
    assert result.exception is None or isinstance(result.exception, SystemExit), result.exception
    assert result.exit_code in (0, 2), result.output
    if result.exit_code == 2:
        assert len(result.stderr.strip().splitlines()) == 1, result.stderr
    assert checksum(db) == before


def test_a_plot_cannot_replace_the_database(tmp_path: Path) -> None:
    db = tmp_path / "stock.db"
    before = make_db(db)
    stage = ["bip-gp-a", "--topology", "non-inverting", "--gain", "20", "--vin", "0.25V",
             "--freq", "20kHz", "--rails", "±12", "--db", str(db)]
    for target in (db, Path(str(db) + "-wal")):
        fails("bode", *stage, "--png", str(target))
    assert checksum(db) == before
    run("bode", *stage, "--png", str(tmp_path / "bode.png"))
    assert (tmp_path / "bode.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature
