"""Tables of the stockroom (SQLAlchemy 2 Core), built from the field contract.

The migrations under migrations/versions are the authority on the schema of a
database file; these Table objects describe the current head and are what the
repository code reads and writes.
"""

from __future__ import annotations

from sqlalchemy import (
    CheckConstraint,
    Column,
    DateTime,
    Float,
    ForeignKey,
    Index,
    Integer,
    MetaData,
    String,
    Table,
    Text,
)

from picker.fields import FIELDS

metadata = MetaData()

LABEL_MAX = 100


def _part_columns() -> list[Column]:  # type: ignore[type-arg]
    cols: list[Column] = [Column("id", Integer, primary_key=True)]  # type: ignore[type-arg]
    for f in FIELDS:
        if f.name == "label":
            cols.append(Column("label", String(LABEL_MAX), nullable=False, unique=True))
        elif f.name == "qty":
            cols.append(Column("qty", Integer, nullable=False, server_default="0"))
        elif f.kind == "count":
            cols.append(Column(f.name, Integer))
        elif f.kind == "text":
            cols.append(Column(f.name, Text))
        else:
            cols.append(Column(f.name, Float(precision=53)))
    cols.append(Column("updated_at", DateTime(timezone=True), nullable=False))
    # packages set aside for projects (migration 0003); not a user field: only the
    # stock commands change it, each with its row in the movement log
    cols.append(Column("reserved", Integer, nullable=False, server_default="0"))
    return cols


parts = Table(
    "parts",
    metadata,
    *_part_columns(),
    CheckConstraint("qty >= 0", name="ck_parts_qty_not_negative"),
    # available = qty - reserved is never negative (a negative qty is the rule above's
    # to refuse: SQLite names only the first rule that fails)
    CheckConstraint("reserved >= 0 AND (qty < 0 OR reserved <= qty)", name="ck_parts_reserved"),
)


# Why a quantity changed; 'import' is for bulk loads that log their stock. 'reserve' and
# 'release' change only the reserved quantity; 'issue' turns reserved packages into
# taken ones (on hand and reserved both drop) (migration 0003).
REASONS: tuple[str, ...] = ("take", "return", "restock", "count", "import",
                            "reserve", "release", "issue")
# The reasons whose changes on hand belong to a project's parts out.
OUT_REASONS: tuple[str, ...] = ("take", "return", "issue")

# One row per change of a quantity on hand or reserved (migrations 0002, 0003).
# delta/qty_after: on hand; reserved_delta/reserved_after: reserved. part_id is cleared
# when the part is removed (ON DELETE SET NULL); part_label keeps the label of that moment.
movements = Table(
    "movements",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("at", DateTime(timezone=True), nullable=False),
    Column("by_user", String(100), nullable=False),
    Column(
        "part_id",
        Integer,
        ForeignKey("parts.id", name="fk_movements_part_id", ondelete="SET NULL"),
        nullable=True,
    ),
    Column("part_label", String(LABEL_MAX), nullable=False),
    Column("delta", Integer, nullable=False),
    Column("qty_after", Integer, nullable=False),
    Column("project", String(200), nullable=True),
    Column("reason", String(16), nullable=False),
    Column("note", Text, nullable=True),
    Column("reserved_delta", Integer, nullable=False, server_default="0"),
    Column("reserved_after", Integer, nullable=False, server_default="0"),
    CheckConstraint(
        "reason IN (" + ", ".join(f"'{r}'" for r in REASONS) + ")", name="ck_movements_reason"
    ),
    CheckConstraint("delta <> 0 OR reserved_delta <> 0 OR reason = 'count'",
                    name="ck_movements_delta"),
    CheckConstraint("qty_after >= 0", name="ck_movements_qty_after"),
    CheckConstraint("reserved_after >= 0", name="ck_movements_reserved_after"),
    Index("ix_movements_part_id", "part_id"),
    Index("ix_movements_at", "at"),
    Index("ix_movements_part_label", "part_label"),
)
