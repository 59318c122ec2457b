"""Stock movements: a per-part reorder level and the movement log.

Revision ID: 0002
Revises: 0001

``parts.reorder_level`` (packages; NULL = no reorder level) is added in place, so
every existing row keeps its values. ``movements`` holds one row per change of a
quantity on hand, written in the same transaction as the change itself.

A movement points at its part by id with ON DELETE SET NULL and also keeps the
part's label as it was at that moment (``part_label``): removing a part from the
catalogue keeps the history of who took what (the rows lose only the link), so the
log stays a complete record of the stockroom.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0002"
down_revision = "0001"
branch_labels = None
depends_on = None

# Frozen copy of this schema step (do not import picker code here).
_REASONS = ("take", "return", "restock", "count", "import")


def upgrade() -> None:
    # a plain ADD COLUMN: no table copy on SQLite, every row and constraint stays
    op.add_column("parts", sa.Column("reorder_level", sa.Integer, nullable=True))
    op.create_table(
        "movements",
        sa.Column("id", sa.Integer, primary_key=True),
        sa.Column("at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("by_user", sa.String(100), nullable=False),
        sa.Column(
            "part_id",
            sa.Integer,
            sa.ForeignKey("parts.id", name="fk_movements_part_id", ondelete="SET NULL"),
            nullable=True,
        ),
        sa.Column("part_label", sa.String(100), nullable=False),
        sa.Column("delta", sa.Integer, nullable=False),
        sa.Column("qty_after", sa.Integer, nullable=False),
        sa.Column("project", sa.String(200), nullable=True),
        sa.Column("reason", sa.String(16), nullable=False),
        sa.Column("note", sa.Text, nullable=True),
        sa.CheckConstraint(
            "reason IN (" + ", ".join(f"'{r}'" for r in _REASONS) + ")",
            name="ck_movements_reason",
        ),
        sa.CheckConstraint("delta <> 0 OR reason = 'count'", name="ck_movements_delta"),
        sa.CheckConstraint("qty_after >= 0", name="ck_movements_qty_after"),
    )
    op.create_index("ix_movements_part_id", "movements", ["part_id"])
    op.create_index("ix_movements_at", "movements", ["at"])
    op.create_index("ix_movements_part_label", "movements", ["part_label"])


def downgrade() -> None:
    op.drop_index("ix_movements_part_label", "movements")
    op.drop_index("ix_movements_at", "movements")
    op.drop_index("ix_movements_part_id", "movements")
    op.drop_table("movements")
    # native DROP COLUMN (SQLite >= 3.35, PostgreSQL): no table copy, constraints stay
    op.drop_column("parts", "reorder_level")
