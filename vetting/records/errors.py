"""Errors raised by the records layer. Each carries a message a person can act on."""

from __future__ import annotations

from dataclasses import dataclass


class RecordsError(Exception):
    """Base class for every records-layer error."""


class NotFound(RecordsError):
    """An unknown job, instrument, attribute or norm key."""


class KeyConflict(RecordsError):
    """Records with these keys already exist (import without --replace)."""

    def __init__(self, message: str, keys: list[str] | None = None) -> None:
        super().__init__(message)
        self.keys = keys or []


class ConcurrentEdit(RecordsError):
    """Someone else saved this record after it was read; nothing was overwritten."""

    def __init__(self, message: str, who: str | None = None, when: str | None = None) -> None:
        super().__init__(message)
        self.who = who
        self.when = when


class DatabaseUnavailable(RecordsError):
    """The database cannot be opened or written (read-only file, full disk, bad URL)."""


class BadDatabaseURL(DatabaseUnavailable):
    """The database location given is not a usable database URL (a malformed URL or an unknown
    kind of database): a mistake in what the user typed, not a failure of the database."""


@dataclass(frozen=True)
class Problem:
    """One thing wrong with an input file: FILE:LINE: path.to.field: message."""

    file: str
    line: int | None
    path: str
    message: str

    def __str__(self) -> str:
        where = f"{self.file}:{self.line}" if self.line is not None else self.file
        return f"{where}: {self.path}: {self.message}" if self.path else f"{where}: {self.message}"


class CatalogueError(RecordsError):
    """A catalogue file failed validation; `problems` lists every problem found (capped)."""

    def __init__(self, problems: list[Problem], truncated: bool = False) -> None:
        self.problems = problems
        self.truncated = truncated
        lines = [str(p) for p in problems]
        if truncated:
            lines.append("... more problems not shown (fix these first)")
        super().__init__("\n".join(lines))
