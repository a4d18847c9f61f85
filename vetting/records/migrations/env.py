"""Alembic environment for vetting's records database.

vetting runs this programmatically (vetting.records.engine.upgrade) with an open connection in
``config.attributes["connection"]``; running ``alembic`` by hand with ``-x url=...`` also works.
"""

from alembic import context
from sqlalchemy import create_engine

import vetting.records.models as models

target_metadata = models.metadata
# None when this module is imported outside an Alembic run (a package walk, a layer test)
config = getattr(context, "config", None)


def _configure(connection) -> None:
    context.configure(
        connection=connection,
        target_metadata=target_metadata,
        render_as_batch=connection.dialect.name == "sqlite",
        compare_type=True,
    )


def run_migrations_offline() -> None:
    url = context.get_x_argument(as_dictionary=True).get("url") or config.get_main_option("sqlalchemy.url")
    context.configure(
        url=url,
        target_metadata=target_metadata,
        literal_binds=True,
        render_as_batch=url.startswith("sqlite"),
    )
    with context.begin_transaction():
        context.run_migrations()


def run_migrations_online() -> None:
    connection = config.attributes.get("connection")
    if connection is not None:
        _configure(connection)
        with context.begin_transaction():
            context.run_migrations()
        return
    url = context.get_x_argument(as_dictionary=True).get("url") or config.get_main_option("sqlalchemy.url")
    engine = create_engine(url)
    with engine.connect() as conn:
        _configure(conn)
        with context.begin_transaction():
            context.run_migrations()
    engine.dispose()


if config is None:
    pass
elif context.is_offline_mode():
    run_migrations_offline()
else:
    run_migrations_online()
