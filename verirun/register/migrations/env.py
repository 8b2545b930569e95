"""Alembic's environment for the register: migrate the connection verirun hands it."""

from __future__ import annotations

from alembic import context

from verirun.register.schema import metadata

connection = context.config.attributes.get("connection")
if connection is None:  # pragma: no cover - verirun always hands over its connection
    raise RuntimeError("verirun's register migrations run through 'verirun register migrate'")
context.configure(connection=connection, target_metadata=metadata, render_as_batch=True)
with context.begin_transaction():
    context.run_migrations()
