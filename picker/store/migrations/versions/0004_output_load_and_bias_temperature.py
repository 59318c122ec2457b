"""Swing under load and bias current over temperature: three optional part fields.

Revision ID: 0004
Revises: 0003

``parts.out_rsat_pos_ohm`` and ``parts.out_rsat_neg_ohm`` (Ω): the output's saturation
resistance toward each rail, so the headroom grows with the output current,
``head(I) = head + Rsat·|I|`` (the light-load headroom stays in ``out_head_pos_v`` /
``out_head_neg_v``). ``parts.ib_double_c`` (°C): the warming over which the input bias
and offset currents double (negative: they halve). All three are NULL (unknown) for
every existing row and added in place: no table copy, every row and rule stays.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0004"
down_revision = "0003"
branch_labels = None
depends_on = None

# Frozen copy of this schema step (do not import picker code here).
_COLUMNS = ("out_rsat_pos_ohm", "out_rsat_neg_ohm", "ib_double_c")


def upgrade() -> None:
    for name in _COLUMNS:
        op.add_column("parts", sa.Column(name, sa.Float(precision=53), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table("parts") as batch:
        for name in reversed(_COLUMNS):
            batch.drop_column(name)
