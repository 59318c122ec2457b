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
    return cols


parts = Table(
    "parts",
    metadata,
    *_part_columns(),
    CheckConstraint("qty >= 0", name="ck_parts_qty_not_negative"),
)
