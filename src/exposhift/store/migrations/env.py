"""Alembic environment: always run with a connection handed in by exposhift.store.migrate."""

from alembic import context

from exposhift.store.models import metadata

connection = context.config.attributes.get("connection")
if connection is None:  # pragma: no cover - exposhift always hands one in
    raise RuntimeError("run migrations through 'exposhift init', not the alembic command line")

context.configure(
    connection=connection,
    target_metadata=metadata,
    render_as_batch=True,
    compare_type=True,
)
with context.begin_transaction():
    context.run_migrations()
