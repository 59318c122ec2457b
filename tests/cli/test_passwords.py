"""No command prints a password of its --db URL, in any form the URL may carry it.

Issue 17, finding 8: a password in the user-info (with an unencoded space, ``&`` or
``@``), in the query string (``?password=``) or percent-encoded was printed by init,
upgrade, backup and connection errors; a libpq key-value string was taken as a SQLite
file name. Every command of the click tree is run (as tests/cli/test_bad_options.py
walks it) against an unreachable server and, where PostgreSQL runs, a working one.
The URL forms follow RFC 3986 (user-info, query, percent-encoding, section 2.1).
"""

from __future__ import annotations

import socket
from pathlib import Path

import pytest
from click.testing import CliRunner

from picker.cli import cli
from tests.cli.test_bad_options import _commands, _required_args

SECRET = "Zq7-hunter-2"


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def _forms(host: str) -> list[tuple[str, list[str]]]:
    """(URL, forms of the secret that must not appear) for each way to write a password."""
    return [
        (f"postgresql://u:{SECRET}@{host}/db", [SECRET]),
        (f"postgresql://u:sp ace&q=1{SECRET}@{host}/db", ["sp ace&q=1", SECRET]),
        (f"postgresql://u:at@{SECRET}@{host}/db", [SECRET, f"at@{SECRET}"]),
        (f"postgresql://u@{host}/db?password={SECRET}", [SECRET]),
        (f"postgresql://u@{host}/db?sslmode=disable&password=a%26b{SECRET}",
         [SECRET, f"a&b{SECRET}", f"a%26b{SECRET}"]),
        (f"postgresql://u:p%40ss%2F{SECRET}@{host}/db", [SECRET, f"p@ss/{SECRET}"]),
    ]


def _leaks(text: str, secrets: list[str]) -> list[str]:
    return [s for s in secrets if s in text]


def test_every_command_hides_every_form_of_the_password(tmp_path: Path) -> None:
    host = f"127.0.0.1:{_free_port()}"
    runner = CliRunner()
    ran = 0
    for url, secrets in _forms(host):
        for words, cmd in _commands():
            if not any(p.name == "db" for p in cmd.params):
                continue
            args = _required_args(cmd, tmp_path)
            result = runner.invoke(cli, [*words, *args, "--db", url], input="y\n")
            text = result.output + (result.stderr or "")
            assert not _leaks(text, secrets), (words, url, text)
            assert result.exception is None or isinstance(result.exception, SystemExit), (
                words, url, repr(result.exception))
            if result.exit_code == 2:
                assert len(result.stderr.strip().splitlines()) == 1, (words, result.stderr)
            ran += 1
    assert ran >= 6 * 10


def test_an_unencoded_at_sign_keeps_the_whole_password_hidden() -> None:
    # today's output showed 'u:***@ss@host': half of the password 'p@ss'
    url = f"postgresql://u:p@{SECRET}@127.0.0.1:{_free_port()}/db"
    result = CliRunner().invoke(cli, ["init", "--db", url])
    assert result.exit_code == 2
    assert SECRET not in result.stderr and "u:***@127.0.0.1" in result.stderr


@pytest.mark.parametrize("dsn", [
    f"host=localhost dbname=stock password={SECRET}",
    f"password={SECRET} host=/tmp",
    f"user=u password={SECRET}",
])
def test_a_key_value_dsn_is_refused_unseen_and_creates_no_file(
        dsn: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)
    for words in (["init"], ["parts", "list"], ["stock", "log"], ["db", "upgrade"]):
        result = CliRunner().invoke(cli, [*words, "--db", dsn])
        assert result.exit_code == 2, (words, result.output)
        lines = result.stderr.strip().splitlines()
        assert len(lines) == 1 and "key=value" in lines[0], lines
        assert SECRET not in result.output + result.stderr
    assert list(tmp_path.iterdir()) == []  # no SQLite file named after the DSN


@pytest.mark.postgres
def test_a_working_server_never_shows_the_password_nor_writes_it_in_a_backup(
        pg_url: str, tmp_path: Path) -> None:
    # the shared test server trusts loopback, so it accepts (and ignores) any password
    base = pg_url.split("://", 1)[1]  # picker@host:port/name
    user, _, rest = base.partition("@")
    urls = [
        (f"postgresql+psycopg://{user}:sp ace&x@{SECRET}@{rest}", [SECRET, "sp ace&x"]),
        (f"postgresql+psycopg://{user}@{rest}?password={SECRET}", [SECRET]),
        (f"postgresql+psycopg://{user}:p%40{SECRET}@{rest}", [SECRET]),
    ]
    from picker.data import demo_stockroom
    from picker.store import Store
    from picker.store.csvio import parse_csv

    # seeded through the library: `init` and `parts list` leave a pooled psycopg
    # connection to the garbage collector (found here; outside this finding)
    seed = Store.create(urls[0][0])
    seed.import_records(parse_csv(demo_stockroom().read_text(encoding="utf-8"), "demo"),
                        update=False)
    seed.dispose()
    runner = CliRunner()
    for k, (url, secrets) in enumerate(urls):
        outputs = []
        backup = tmp_path / f"b{k}.jsonl"
        for cmd in (["db", "upgrade"], ["stock", "log"],
                    ["db", "backup", str(backup)], ["stock", "take", "nope", "1", "--for", "p"]):
            outputs.append(runner.invoke(cli, [*cmd, "--db", url]))
        for res in outputs:
            assert not _leaks(res.output + res.stderr, secrets), res.output + res.stderr
        assert outputs[-1].exit_code == 2  # an error path on a working server
        header = backup.read_text(encoding="utf-8").splitlines()[0]
        assert not _leaks(header, secrets) and '"source"' in header and "***" in header
