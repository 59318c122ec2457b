"""Fixtures for command-line tests."""

from __future__ import annotations

import pytest
from click.testing import CliRunner

from picker.cli import cli


@pytest.fixture(scope="module")
def db(tmp_path_factory: pytest.TempPathFactory) -> str:
    """A demo stockroom made through the CLI, shared by one test module (read-only use)."""
    path = str(tmp_path_factory.mktemp("cli") / "demo.db")
    result = CliRunner().invoke(cli, ["init", "--demo", "--db", path], catch_exceptions=False)
    assert result.exit_code == 0, result.output
    return path
