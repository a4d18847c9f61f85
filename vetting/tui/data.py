"""A thin adapter between the screens and the records Store.

Every method here may block (it talks to the database), so screens call it only from thread
workers. It hands back the plain domain objects of `vetting.records.domain` and the engine's
summaries; it does no arithmetic of its own. Heavy modules (SQLAlchemy, Alembic, the appraisal
engine) are imported on first use, inside the worker, so the first screen appears at once.
"""

from __future__ import annotations

import datetime as dt
import threading
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Callable

if TYPE_CHECKING:  # pragma: no cover - typing only
    from vetting.records.domain import Attribute, Instrument, Job, Policy


@dataclass
class CatalogueRow:
    """One line of the catalogue table: the instrument's identity and the engine's summary."""

    key: str
    title: str
    publisher: str
    attributes: list[str]
    summary: Any  # vetting.appraisal.types.InstrumentSummary
    #: lowercase text searched by the filter (title, key, attribute keys and names, publisher)
    haystack: str = ""


def _summariser() -> Callable[[Any, dt.date], Any]:
    """The engine's `summarise(instrument, as_of)`, wherever the appraisal package exports it."""
    import importlib

    for name in ("vetting.appraisal", "vetting.appraisal.summary", "vetting.appraisal.types"):
        try:
            module = importlib.import_module(name)
        except ModuleNotFoundError:
            continue
        function = getattr(module, "summarise", None)
        if function is not None:
            return function
    raise RuntimeError("the appraisal engine has no summarise(instrument, as_of)")


def _row(inst: Instrument, summary: Any, names: dict[str, str]) -> CatalogueRow:
    attrs = inst.attribute_keys()
    hay = " ".join([inst.title, inst.key, inst.publisher or ""] + attrs + [names.get(a, "") for a in attrs])
    return CatalogueRow(
        key=inst.key,
        title=inst.title,
        publisher=inst.publisher or "",
        attributes=attrs,
        summary=summary,
        haystack=hay.lower(),
    )


class Data:
    """Opens the Store lazily (once) and serves the screens. Safe to call from worker threads."""

    def __init__(self, url: str, *, today: dt.date | None = None) -> None:
        self.url = url
        self.today = today
        self._store = None
        self._lock = threading.Lock()

    # -- connection ----------------------------------------------------------------------------

    @property
    def store(self):
        with self._lock:
            if self._store is None:
                from vetting.records.store import Store

                self._store = Store.open(self.url)
            return self._store

    def close(self) -> None:
        with self._lock:
            if self._store is not None:
                self._store.close()
                self._store = None

    def as_of(self) -> dt.date:
        return self.today or dt.date.today()

    # -- catalogue -----------------------------------------------------------------------------

    def catalogue_rows(
        self, progress: Callable[[int, int], None] | None = None, cancelled: Callable[[], bool] | None = None
    ) -> list[CatalogueRow]:
        """Every instrument with its summary from the appraisal engine."""
        from vetting.appraisal.summary import summarise_all

        store = self.store
        names = {a.key: a.name for a in store.attributes()}
        if progress is not None:
            progress(0, len(store.instrument_keys()))
        instruments = store.instruments()
        as_of = self.as_of()
        rows: list[CatalogueRow] = []
        total = len(instruments)
        for start in range(0, total, 500):
            if cancelled is not None and start and cancelled():
                break
            chunk = instruments[start : start + 500]
            # the engine's batched summaries, 500 at a time so progress shows and cancelling works
            rows.extend(_row(inst, summary, names) for inst, summary in zip(chunk, summarise_all(chunk, as_of)))
            if progress is not None:
                progress(len(rows), total)
        return rows

    def catalogue_first_page(self, limit: int) -> tuple[list[CatalogueRow], int]:
        """The first `limit` instruments by title with their summaries, and the total count:
        what the catalogue shows while the rest is still being read."""
        from vetting.appraisal.summary import summarise_all

        store = self.store
        names = {a.key: a.name for a in store.attributes()}
        instruments, total = store.instruments_first_by_title(limit)
        summaries = summarise_all(instruments, self.as_of())
        return [_row(inst, summary, names) for inst, summary in zip(instruments, summaries)], total

    def catalogue_row(self, key: str) -> CatalogueRow:
        """The table row of one instrument (after it was saved)."""
        store = self.store
        names = {a.key: a.name for a in store.attributes()}
        inst = store.instrument(key)
        return _row(inst, _summariser()(inst, self.as_of()), names)

    def import_file(self, path: str, *, replace: bool = False) -> dict[str, int]:
        """Check the whole catalogue file, then write it in one transaction (all or nothing).

        Raises CatalogueError (every problem, with file, line and field), KeyConflict, or
        OSError for a file that cannot be read; the database is then left as it was.
        """
        from vetting.records.catalogue import load_catalogue

        store = self.store
        cat = load_catalogue(path, known_attributes=store.attribute_keys())
        return store.import_catalogue(cat, replace=replace, source=str(path))

    # -- single records ------------------------------------------------------------------------

    def instrument(self, key: str) -> Instrument:
        return self.store.instrument(key)

    def save_instrument(self, inst: Instrument) -> Instrument:
        return self.store.save_instrument(inst)

    def delete_instrument(self, key: str, row_version: int | None) -> None:
        self.store.delete_instrument(key, row_version=row_version)

    def delete_job(self, key: str) -> None:
        self.store.delete_job(key)

    def attributes(self) -> list[Attribute]:
        return self.store.attributes()

    def save_attribute(self, attr: Attribute) -> None:
        self.store.save_attribute(attr)

    def jobs(self) -> list[Job]:
        return self.store.jobs()

    def job(self, key: str) -> Job:
        return self.store.job(key)

    def save_job(self, job: Job) -> Job:
        return self.store.save_job(job)

    def policy_versions(self, job_key: str) -> list[Policy]:
        return self.store.policy_versions(job_key)

    def set_policy(self, job_key: str, policy: Policy) -> Policy:
        return self.store.set_policy(job_key, policy)

    def lock_policy(self, job_key: str) -> Policy:
        return self.store.lock_policy(job_key)


# -- letting go of many records ----------------------------------------------------------------
#
# Freeing thousands of records at once (their last reference dropped in a worker) is one chain of
# deallocations in C that holds the interpreter, and so the interface's keys, for as long as it
# runs: about 100-150 ms at 10,000 instruments. The workers hand what they are done with to
# `drop_in_steps` instead.


def items_of(data) -> list:
    """The items of the lists, tuples and dicts `data` holds, and of those held by its
    attributes one level down (a ranking's results), in a list of our own.

    Holding the items here lets the caller drop `data` (its containers then go at once,
    cheaply) and hand the items to `drop_in_steps`. Nothing is changed: an item still referred
    to elsewhere stays alive.
    """
    held: list = []

    def take(value, depth: int) -> None:
        if isinstance(value, (list, tuple)):
            held.extend(value)
        elif isinstance(value, dict):
            held.extend(value.values())
        elif depth and hasattr(value, "__dict__") and not isinstance(value, type):
            for inner in vars(value).values():
                take(inner, depth - 1)

    for value in vars(data).values():
        take(value, 1)
    return held


def drop_in_steps(held: list, step: int = 200) -> None:
    """Empty `held` from the end, `step` items at a time: between steps the interpreter can
    switch to the interface's thread."""
    while held:
        del held[-step:]
