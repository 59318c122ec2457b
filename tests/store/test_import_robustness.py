"""Broken and hostile CSV files: a clear error and an unchanged database, every time."""

from __future__ import annotations

import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest
from click.testing import CliRunner
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from picker.cli import cli
from picker.errors import PickerError
from picker.store import Store
from picker.store.csvio import parse_csv, read_text

HEADER = "label,gbw_hz,slew_v_per_s,qty,notes\n"
GOOD_ROW = "good-1,1000000,500000,4,fine\n"

BROKEN = {
    "empty file": b"",
    "only blank lines": b"\n\n\n",
    "semicolon separators": b"label;gbw_hz;qty\nx;1e6;3\n",
    "latin-1 text": "label,notes\nx,r\xe9sistance\n".encode("latin-1"),
    "random bytes": bytes(range(256)) * 4,
    "missing label column": b"gbw_hz,qty\n1e6,3\n",
    "duplicated header": b"label,gbw,gbw_hz\nx,1e6,2e6\n",
    "unknown header": b"label,colour\nx,red\n",
    "duplicate labels": (HEADER + GOOD_ROW + GOOD_ROW).encode(),
    "huge number": (HEADER + "h,1e400,1,1,\n").encode(),
    "too large": (HEADER + "h,1e35,1,1,\n").encode(),
    "nan": (HEADER + "h,nan,1,1,\n").encode(),
    "inf": (HEADER + "h,inf,1,1,\n").encode(),
    "negative quantity": (HEADER + "h,1e6,1,-4,\n").encode(),
    "fractional quantity": (HEADER + "h,1e6,1,2.5,\n").encode(),
    "100000-character cell": (HEADER + "h,1e6,1,1," + "x" * 100_000 + "\n").encode(),
    "short row": (HEADER + "h,1e6\n").encode(),
    "too many columns": (",".join(f"c{i}" for i in range(500)) + "\n").encode(),
    "unbalanced quote": (HEADER + 'h,1e6,1,1,"open\n').encode(),
    "NUL bytes": (HEADER + "h\x00,1e6,1,1,\n").encode(),
}


@pytest.mark.parametrize("name", sorted(BROKEN))
def test_broken_file_is_refused_and_database_unchanged(
    name: str, store: Store, tmp_path: Path
) -> None:
    f = tmp_path / "in.csv"
    f.write_bytes(BROKEN[name])
    before = store.checksum()
    with pytest.raises(PickerError) as info:
        store.import_records(parse_csv(read_text(f), f.name), update=False)
    message = str(info.value)
    assert message and "\n" not in message.strip()
    assert store.checksum() == before


def test_cli_lists_bad_cells_in_one_line(tmp_path: Path, demo_db: str) -> None:
    f = tmp_path / "in.csv"
    f.write_bytes(BROKEN["negative quantity"])
    result = CliRunner().invoke(cli, ["parts", "import", str(f), "--db", demo_db])
    assert result.exit_code == 2
    assert result.stderr.count("\n") == 1 and "row 2, column qty" in result.stderr


def test_utf8_bom_is_accepted(memory_store: Store, tmp_path: Path) -> None:
    f = tmp_path / "bom.csv"
    f.write_bytes(b"\xef\xbb\xbf" + (HEADER + GOOD_ROW).encode())
    memory_store.import_records(parse_csv(read_text(f), f.name), update=False)
    assert memory_store.get("good-1")["gbw_hz"] == 1e6


def test_oversized_file_is_refused_before_reading(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    import picker.store.csvio as csvio

    monkeypatch.setattr(csvio, "MAX_BYTES", 1000)
    f = tmp_path / "big.csv"
    f.write_text(HEADER + GOOD_ROW * 100, encoding="utf-8")
    with pytest.raises(PickerError, match="split it"):
        read_text(f)


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.binary(max_size=400) | st.text(max_size=400).map(lambda t: t.encode("utf-8")))
def test_generated_files_never_escape_our_errors(data: bytes, tmp_path_factory: pytest.TempPathFactory) -> None:
    f = tmp_path_factory.mktemp("gen") / "g.csv"
    f.write_bytes(data)
    try:
        records = parse_csv(read_text(f), f.name)
    except PickerError as exc:
        assert str(exc)
    else:
        assert all(isinstance(r.get("label"), str) for r in records)


@settings(max_examples=100, deadline=None)
@given(cells=st.lists(st.text(alphabet=st.characters(blacklist_categories=("Cs",)), max_size=12),
                      min_size=5, max_size=5))
def test_generated_rows_on_good_header(cells: list[str]) -> None:
    import csv
    import io

    buf = io.StringIO()
    csv.writer(buf).writerows([HEADER.strip().split(","), cells])
    try:
        parse_csv(buf.getvalue(), "gen")
    except PickerError as exc:
        assert "row" in str(exc) or "gen" in str(exc)


N_KILL = 100_000


def _big_csv(path: Path) -> None:
    with path.open("w", encoding="utf-8") as f:
        f.write("label,gbw_hz,slew_v_per_s,aol_v_per_v,qty,notes\n")
        for i in range(N_KILL):
            f.write(f"k{i:06d},{1e6 + i},{5e5},{2e5},{i % 9},row {i}\n")


@pytest.mark.parametrize("delay", [0.3, 1.2, 2.5])
def test_sigkill_during_import_keeps_all_or_nothing(tmp_path: Path, delay: float) -> None:
    """Kill -9 part-way: the file passes integrity_check and holds none or all new rows."""
    db = tmp_path / "k.db"
    assert CliRunner().invoke(cli, ["init", "--demo", "--db", str(db)]).exit_code == 0
    before = Store.open(str(db)).count()
    src = tmp_path / "k.csv"
    _big_csv(src)
    proc = subprocess.Popen(
        [sys.executable, "-m", "picker", "parts", "import", str(src), "--db", str(db)],
        stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
    )
    time.sleep(delay)
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait(timeout=30)
    conn = sqlite3.connect(db)
    try:
        assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        n = conn.execute("SELECT count(*) FROM parts").fetchone()[0]
    finally:
        conn.close()
    assert n in (before, before + N_KILL)
