"""Stability, input capacitance, rejection and heat: nine optional part fields.

Revision ID: 0005
Revises: 0004

``parts.pm_unity_deg`` (°, phase margin as a follower without load; the second
open-loop pole follows from it), ``parts.min_noise_gain`` (V/V, decompensated parts),
``parts.cin_diff_f`` and ``parts.cin_cm_f`` (F, input capacitances),
``parts.vdiff_max_v`` (V, absolute maximum differential input), ``parts.cmrr_db`` and
``parts.psrr_db`` (dB), ``parts.theta_ja_c_per_w`` (°C/W) and ``parts.tj_max_c`` (°C).
All are NULL (unknown) for every existing row and added in place: no table copy, every
row and rule stays.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0005"
down_revision = "0004"
branch_labels = None
depends_on = None

# Frozen copy of this schema step (do not import picker code here).
_COLUMNS = ("pm_unity_deg", "min_noise_gain", "cin_diff_f", "cin_cm_f", "vdiff_max_v",
            "cmrr_db", "psrr_db", "theta_ja_c_per_w", "tj_max_c")


def upgrade() -> None:
    for name in _COLUMNS:
        op.add_column("parts", sa.Column(name, sa.Float(precision=53), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table("parts") as batch:
        for name in reversed(_COLUMNS):
            batch.drop_column(name)
