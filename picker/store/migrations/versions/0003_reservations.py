"""Reservations: packages held for a project, separate from the quantity on hand.

Revision ID: 0003
Revises: 0002

``parts.reserved`` (packages set aside for projects, 0 for every existing row) is
added in place with its rule ``0 <= reserved <= qty``, so what is available
(``qty - reserved``) can never be negative. SQLite accepts a CHECK on ADD COLUMN
and tests it against the existing rows (3.37+), so the parts table is not copied.

``movements`` gains ``reserved_delta`` and ``reserved_after`` (0 for every existing
row: nothing was reserved before) and three reasons: ``reserve`` and ``release``
change only the reserved quantity, ``issue`` turns reserved packages into taken ones
(on hand and reserved both drop). The reason and change rules are replaced, which
SQLite can do only by copying the movements table (alembic batch mode, inside the
migration's one transaction); every row and index is kept.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0003"
down_revision = "0002"
branch_labels = None
depends_on = None

# Frozen copies of this schema step (do not import picker code here).
_OLD_REASONS = ("take", "return", "restock", "count", "import")
_REASONS = (*_OLD_REASONS, "reserve", "release", "issue")


def _reasons(names: tuple[str, ...]) -> str:
    return "reason IN (" + ", ".join(f"'{r}'" for r in names) + ")"


def upgrade() -> None:
    op.execute(
        "ALTER TABLE parts ADD COLUMN reserved INTEGER DEFAULT 0 NOT NULL "
        "CONSTRAINT ck_parts_reserved CHECK (reserved >= 0 AND (qty < 0 OR reserved <= qty))"
    )
    with op.batch_alter_table("movements") as batch:
        batch.add_column(sa.Column("reserved_delta", sa.Integer, nullable=False,
                                   server_default="0"))
        batch.add_column(sa.Column("reserved_after", sa.Integer, nullable=False,
                                   server_default="0"))
        batch.drop_constraint("ck_movements_reason", type_="check")
        batch.drop_constraint("ck_movements_delta", type_="check")
        batch.create_check_constraint("ck_movements_reason", _reasons(_REASONS))
        batch.create_check_constraint(
            "ck_movements_delta", "delta <> 0 OR reserved_delta <> 0 OR reason = 'count'")
        batch.create_check_constraint("ck_movements_reserved_after", "reserved_after >= 0")


def downgrade() -> None:
    # an issue took packages out of the stockroom: it stays in the log as a take, so the
    # log still explains the quantity on hand; reservations have no meaning before 0003
    op.execute("UPDATE movements SET reason = 'take' WHERE reason = 'issue'")
    op.execute("DELETE FROM movements WHERE reason IN ('reserve', 'release')")
    with op.batch_alter_table("movements") as batch:
        batch.drop_constraint("ck_movements_reserved_after", type_="check")
        batch.drop_constraint("ck_movements_delta", type_="check")
        batch.drop_constraint("ck_movements_reason", type_="check")
        batch.create_check_constraint("ck_movements_reason", _reasons(_OLD_REASONS))
        batch.create_check_constraint("ck_movements_delta", "delta <> 0 OR reason = 'count'")
        batch.drop_column("reserved_after")
        batch.drop_column("reserved_delta")
    # SQLite: DROP COLUMN refuses a column with a CHECK, so the table is copied
    with op.batch_alter_table("parts") as batch:
        batch.drop_constraint("ck_parts_reserved", type_="check")
        batch.drop_column("reserved")
