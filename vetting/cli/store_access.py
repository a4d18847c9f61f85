"""Opening the records store from a command, with records errors turned into exit statuses.

    with open_store(args) as store:
        ...

Inside the block, NotFound, KeyConflict, CatalogueError, ConcurrentEdit and BadDatabaseURL become a
CommandError with exit status 2 (bad input); DatabaseUnavailable and any other RecordsError
become exit status 1. Use `records_errors()` alone to wrap work that has no store.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from typing import TYPE_CHECKING, Any

from vetting.cli.common import EXIT_BAD_INPUT, EXIT_FAILURE, CommandError
from vetting.records.errors import BadDatabaseURL, CatalogueError, ConcurrentEdit, KeyConflict, NotFound, RecordsError
from vetting.records.location import resolve_url

if TYPE_CHECKING:  # imported inside open_store so `vetting --help` need not load SQLAlchemy
    from vetting.records.store import Store

BAD_INPUT_ERRORS = (NotFound, KeyConflict, CatalogueError, ConcurrentEdit, BadDatabaseURL)


def status_for(exc: RecordsError) -> int:
    return EXIT_BAD_INPUT if isinstance(exc, BAD_INPUT_ERRORS) else EXIT_FAILURE


@contextmanager
def records_errors() -> Iterator[None]:
    try:
        yield
    except RecordsError as exc:
        raise CommandError(str(exc), status_for(exc)) from exc


def store_url(args: Any) -> str:
    """The database URL chosen by `--db`, $VETTING_DB or the default file."""
    return resolve_url(getattr(args, "db", None))


@contextmanager
def open_store(args: Any, *, url: str | None = None) -> Iterator[Store]:
    """Open the store for `args.db` (or `url`), close it afterwards, translate records errors."""
    from vetting.records.store import Store

    with records_errors():
        store = Store.open(url or store_url(args))
        try:
            yield store
        finally:
            store.close()
