"""Writing a file beside the stockroom without ever touching the stockroom.

Every file picker writes (a parts export, a backup) first goes to a new temporary file
made exclusively (``O_EXCL``: it can never be a file that already exists, the database
included) in the target's folder, and replaces the target only once it is complete.
Before the first byte and again before the replace, the target is compared with the
database file and its ``-wal``, ``-shm`` and ``-journal`` companions, by resolved path
and by identity (same device and inode, so a symlink or a hard link is caught too); a
match is refused with one line and nothing is written.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path

from picker.errors import BadValue
from picker.store.engine import is_sqlite

COMPANIONS = ("", "-wal", "-shm", "-journal")


def database_files(url: str) -> list[Path]:
    """The files a SQLite stockroom lives in (none for PostgreSQL or memory)."""
    if not is_sqlite(url) or "///" not in url:
        return []
    name = url.split("///", 1)[1]
    if name in ("", ":memory:"):
        return []
    db = Path(os.path.abspath(Path(name).expanduser()))
    return [db.with_name(db.name + s) for s in COMPANIONS]


def same_file(a: Path, b: Path) -> bool:
    """a and b name the same file: equal resolved paths, or the same inode."""
    try:
        if Path(os.path.abspath(a)) == Path(os.path.abspath(b)) or a.resolve() == b.resolve():
            return True
    except (OSError, RuntimeError):  # a symlink loop: compare by identity only
        pass
    try:
        return os.path.samefile(a, b)
    except (OSError, ValueError):  # one of them does not exist (or a NUL in the name)
        return False


def refuse_database(path: Path, protected: Sequence[Path], what: str = "FILE") -> None:
    """Refuse a target that is the stockroom's file or one of its companions."""
    target = path.expanduser()
    if any(same_file(target, p) for p in protected):
        raise BadValue(what, str(path), "is the stockroom itself (its database file or its "
                       "-wal, -shm or -journal file); choose another file; nothing was written")


def fresh_temp(folder: Path, protected: Sequence[Path]) -> Path:
    """A new, empty file in folder that is none of the protected files."""
    fd, name = tempfile.mkstemp(prefix=".picker-", suffix=".part", dir=folder)
    os.close(fd)
    tmp = Path(name)
    mask = os.umask(0o022)
    os.umask(mask)
    tmp.chmod(0o666 & ~mask)  # mkstemp makes 0600; give the file the usual permissions
    if any(same_file(tmp, p) for p in protected):  # cannot happen with O_EXCL; stated
        tmp.unlink()
        raise OSError(0, "the temporary file is the database")
    return tmp


@contextmanager
def replacing(path: Path, protected: Sequence[Path], what: str = "FILE") -> Iterator[Path]:
    """A fresh temporary file beside path; when the block ends well it replaces path.

    On any failure the temporary file is removed and path is left as it was. An
    operating-system error (no such folder, no permission, disk full) becomes one
    BadValue naming the file.
    """
    target = path.expanduser()
    refuse_database(path, protected, what)
    try:
        tmp = fresh_temp(target.parent, protected)
    except OSError as exc:
        raise BadValue(what, str(path), f"cannot be written ({exc.strerror or exc})") from None
    try:
        yield tmp
        refuse_database(path, protected, what)  # nothing may have moved in between
        with tmp.open("rb+") as f:
            os.fsync(f.fileno())
        os.replace(tmp, target)
    except OSError as exc:
        raise BadValue(what, str(path), f"cannot be written ({exc.strerror or exc})") from None
    finally:
        tmp.unlink(missing_ok=True)
