"""Every command closes its database connections when it ends.

A connection left to the garbage collector is closed at a moment nobody chose (psycopg
warns "deleted while still open"; under a test runner that warning lands in whichever
test happens to run then). Checked on the PostgreSQL server the test suite starts,
where each connection is a server process: the server's own count of connections to
the test database (pg_stat_activity) must be back to zero after each command.
"""

from __future__ import annotations

import gc
import warnings

import pytest
import sqlalchemy as sa
from click.testing import CliRunner

from picker.cli import cli

STAGE = ["--topology", "inverting", "--gain", "10", "--vin", "0.1V", "--freq", "1kHz",
         "--rails", "±12"]

COMMANDS = [
    ["init", "--demo"],
    ["parts", "list"],
    ["parts", "show", "bip-gp-a"],
    ["pick", *STAGE],
    ["why", "bip-gp-a", *STAGE],
    ["net", *STAGE],
    ["wave", "bip-gp-a", *STAGE],
]


def _open_connections(url: str) -> int:
    name = url.rsplit("/", 1)[1]
    admin = sa.create_engine(url.replace("postgresql://", "postgresql+psycopg://", 1)
                             if url.startswith("postgresql://") else url)
    try:
        with admin.connect() as conn:
            return int(conn.execute(sa.text(
                "SELECT count(*) FROM pg_stat_activity WHERE datname = :n "
                "AND pid <> pg_backend_pid()"), {"n": name}).scalar_one())
    finally:
        admin.dispose()


@pytest.mark.postgres
def test_each_command_leaves_no_connection_open(pg_url: str) -> None:
    runner = CliRunner()
    for args in COMMANDS:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            res = runner.invoke(cli, [*args, "--db", pg_url], catch_exceptions=False)
            gc.collect()
        assert res.exit_code == 0, (args, res.output)
        leaked = [w for w in caught if issubclass(w.category, ResourceWarning)]
        assert not leaked, (args, [str(w.message) for w in leaked])
        assert _open_connections(pg_url) == 0, args
