"""Alembic environment: picker always passes an open connection in."""

from __future__ import annotations

from alembic import context

from picker.store.models import metadata

connection = context.config.attributes.get("connection")
if connection is None:  # pragma: no cover - picker never runs alembic without one
    raise RuntimeError("picker runs its migrations through `picker db upgrade`")

context.configure(
    connection=connection,
    target_metadata=metadata,
    render_as_batch=True,  # SQLite can only alter tables by copying them
)
with context.begin_transaction():
    context.run_migrations()
