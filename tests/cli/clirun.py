"""Helpers for command-line tests: run a command that must succeed or must be refused."""

from __future__ import annotations

from click.testing import CliRunner, Result

from picker.cli import cli


def run(*args: str) -> Result:
    """Run picker; it must exit 0 (a bug shows its traceback)."""
    result = CliRunner().invoke(cli, list(args), catch_exceptions=False)
    assert result.exit_code == 0, result.output + result.stderr
    return result


def fails(*args: str) -> Result:
    """Run picker; it must refuse with exit 2 and one line on stderr, no traceback."""
    result = CliRunner().invoke(cli, list(args))
    assert result.exit_code == 2, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("picker: error: "), result.stderr
    return result
