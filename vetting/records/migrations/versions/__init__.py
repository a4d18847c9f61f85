"""Alembic revisions, oldest first. Never edit a revision that has been released; add one."""
