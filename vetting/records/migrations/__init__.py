"""Alembic migrations for the records database, shipped inside the package so that an
installed copy can upgrade an older database (see vetting.records.engine.upgrade)."""
