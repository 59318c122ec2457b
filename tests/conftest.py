"""Shared fixtures: stores on SQLite and on the real PostgreSQL from scripts/test."""

from __future__ import annotations

import os
import uuid
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import pytest

DATA = Path(__file__).parent / "data"
SMALL_CSV = DATA / "parts_small.csv"


def pg_admin_url() -> str | None:
    return os.environ.get("PICKER_TEST_PG_URL")


def _need_pg() -> str:
    url = pg_admin_url()
    if url:
        return url
    if os.environ.get("CI"):
        pytest.fail("PICKER_TEST_PG_URL is not set; scripts/test starts PostgreSQL for CI")
    pytest.skip("no PostgreSQL (run the suite through scripts/test)")


@contextmanager
def fresh_pg_database() -> Iterator[str]:
    """Create an empty PostgreSQL database on the server scripts/test started; drop it after."""
    from sqlalchemy import create_engine, text

    admin_url = _need_pg()
    name = f"picker_t_{uuid.uuid4().hex[:12]}"
    admin = create_engine(admin_url, isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    try:
        yield f"{admin_url.rsplit('/', 1)[0]}/{name}"
    finally:
        with admin.connect() as conn:
            conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
        admin.dispose()


@pytest.fixture
def pg_url() -> Iterator[str]:
    """A fresh, empty PostgreSQL database for one test; dropped afterwards."""
    with fresh_pg_database() as url:
        yield url


@pytest.fixture(params=["sqlite", "postgres"])
def db_url(request: pytest.FixtureRequest, tmp_path: Path) -> str:
    """An empty database URL: a SQLite file, or a fresh PostgreSQL database."""
    if request.param == "sqlite":
        return f"sqlite:///{tmp_path / 'stock.db'}"
    return request.getfixturevalue("pg_url")  # type: ignore[no-any-return]


@pytest.fixture
def store(db_url: str):  # type: ignore[no-untyped-def]
    """A stockroom seeded from tests/data/parts_small.csv, on SQLite and PostgreSQL."""
    from picker.store import Store
    from picker.store.csvio import parse_csv, read_text

    s = Store.create(db_url)
    s.import_records(parse_csv(read_text(SMALL_CSV), SMALL_CSV.name), update=False)
    yield s
    s.dispose()


@pytest.fixture
def memory_store():  # type: ignore[no-untyped-def]
    """An in-memory SQLite stockroom seeded from the small CSV."""
    from picker.store import Store
    from picker.store.csvio import parse_csv, read_text

    s = Store.create("sqlite://")
    s.import_records(parse_csv(read_text(SMALL_CSV), SMALL_CSV.name), update=False)
    yield s
    s.dispose()


@pytest.fixture
def demo_db(tmp_path: Path) -> str:
    """A SQLite file holding the demo stockroom, made through the CLI."""
    from click.testing import CliRunner

    from picker.cli import cli

    path = str(tmp_path / "demo.db")
    result = CliRunner().invoke(cli, ["init", "--demo", "--db", path], catch_exceptions=False)
    assert result.exit_code == 0, result.output
    return path
