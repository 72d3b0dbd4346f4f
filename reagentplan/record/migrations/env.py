"""Alembic environment: run on the engine handed over in ``config.attributes``."""

from alembic import context

from reagentplan.record.models import Base

config = context.config
engine = config.attributes["engine"]

with engine.begin() as connection:
    context.configure(connection=connection, target_metadata=Base.metadata,
                      render_as_batch=connection.dialect.name == "sqlite")
    context.run_migrations()
