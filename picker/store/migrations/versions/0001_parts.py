"""First schema: the parts table.

Revision ID: 0001
Revises:
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0001"
down_revision = None
branch_labels = None
depends_on = None

# Frozen copy of the first schema (do not import picker.fields here: a migration
# must describe its own moment, not whatever the code says today).
_REAL = (
    "supply_min_v", "supply_max_v", "iq_a", "gbw_hz", "slew_v_per_s", "aol_v_per_v",
    "rin_ohm", "ib_a", "ios_a", "vos_v", "drift_v_per_c", "cm_head_pos_v",
    "cm_head_neg_v", "rout_ohm", "iout_a", "out_head_pos_v", "out_head_neg_v",
    "en_v_per_rthz", "in_a_per_rthz", "price",
)


def upgrade() -> None:
    op.create_table(
        "parts",
        sa.Column("id", sa.Integer, primary_key=True),
        sa.Column("label", sa.String(100), nullable=False, unique=True),
        sa.Column("description", sa.Text),
        sa.Column("tech", sa.Text),
        sa.Column("channels", sa.Integer),
        sa.Column("package", sa.Text),
        *[sa.Column(name, sa.Float(precision=53)) for name in _REAL],
        sa.Column("qty", sa.Integer, nullable=False, server_default="0"),
        sa.Column("location", sa.Text),
        sa.Column("notes", sa.Text),
        sa.Column("updated_at", sa.DateTime(timezone=True), nullable=False),
        sa.CheckConstraint("qty >= 0", name="ck_parts_qty_not_negative"),
    )


def downgrade() -> None:
    op.drop_table("parts")
