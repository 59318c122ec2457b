"""The error hierarchy. Every error a user can cause is a PickerError.

The command line turns any PickerError into one line on stderr and exit code 2
(see picker.cli.app); anything else is a bug and exits 1.
"""

from __future__ import annotations


class PickerError(Exception):
    """Base of every error picker raises on purpose."""


class BadValue(PickerError, ValueError):
    """A value the user wrote cannot be understood or is out of range."""

    def __init__(self, field: str, value: object, expected: str) -> None:
        self.field = field
        self.value = value
        self.expected = expected
        super().__init__(f"{field}: {value!r} {expected}")


class BadRequirement(PickerError, ValueError):
    """A stage requirement that no circuit can meet as written."""


class NotFound(PickerError, LookupError):
    """A part label (or other key) that is not in the store."""


class Conflict(PickerError):
    """A write that would break a rule of the store (duplicate label, negative stock)."""


class ImportProblems(PickerError, ValueError):
    """A file with one or more bad cells; nothing was written."""

    def __init__(self, source: str, problems: list[str]) -> None:
        self.problems = problems
        shown = "; ".join(problems[:20])
        more = f"; ... and {len(problems) - 20} more" if len(problems) > 20 else ""
        super().__init__(
            f"{source}: {len(problems)} bad cell(s), nothing imported: {shown}{more}"
        )


class StoreError(PickerError):
    """The database cannot be opened, is busy, or has the wrong schema version."""
