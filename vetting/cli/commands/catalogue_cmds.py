"""Catalogue commands: `import FILE...`, `export FILE`, `demo`.

`import` checks every file completely before it touches the database, then writes all of them
in one transaction: a file with any problem means nothing is imported (exit status 2).
"""

from __future__ import annotations

import argparse
import os
import sys
from importlib import resources
from pathlib import Path
from typing import Any

from vetting.cli.common import EXIT_OK, BadInput, CommandError, EXIT_FAILURE, err, print_json
from vetting.cli.store_access import open_store, records_errors
from vetting.records import catalogue as catalogue_io
from vetting.records.errors import CatalogueError
from vetting.records.location import demo_url

#: The demo catalogue ships inside the package; catalogues/demo.yaml in the repository is a
#: byte-identical copy for people browsing the source.
DEMO_RESOURCE = ("vetting.records", "data/demo.yaml")


def register(subparsers: Any) -> None:
    p = subparsers.add_parser(
        "import",
        help="check catalogue files and load them into the database (all or nothing)",
        description=(
            "Check every FILE completely, then load all of them in one transaction. "
            "Any problem in any file: every problem is listed, nothing is written, exit status 2."
        ),
    )
    p.add_argument("files", nargs="+", metavar="FILE", help="catalogue file (format 1, YAML)")
    p.add_argument(
        "--replace",
        action="store_true",
        help="replace instruments and jobs whose keys already exist (recorded in the audit trail)",
    )
    p.add_argument("--json", action="store_true", help="print the counts as JSON")
    p.set_defaults(func=cmd_import)

    p = subparsers.add_parser(
        "export",
        help="write records to a catalogue file (all, or chosen jobs/instruments)",
        description="Write a format-1 catalogue file that imports back to identical records.",
    )
    p.add_argument("file", metavar="FILE", help="file to write ('-' for standard output)")
    p.add_argument("--job", action="append", metavar="KEY", default=None, help="export this job (repeatable)")
    p.add_argument(
        "--instrument", action="append", metavar="KEY", default=None, help="export this instrument (repeatable)"
    )
    p.add_argument("--json", action="store_true", help="print the counts as JSON")
    p.set_defaults(func=cmd_export)

    p = subparsers.add_parser(
        "demo",
        help="load the invented demo into a database of its own and open it",
        description=(
            "Rebuild the demo database (never your main one) from the built-in demo catalogue, "
            "then open the interface on it."
        ),
    )
    p.add_argument("--no-open", action="store_true", help="only load the demo; print how to open it")
    p.add_argument("--json", action="store_true", help="with --no-open: print the counts and URL as JSON")
    p.set_defaults(func=cmd_demo)


def _refuse(exc: CatalogueError, what: str) -> BadInput:
    """Print every problem on stderr and return the error that ends the command (exit 2)."""
    for problem in exc.problems:
        err(str(problem))
    if exc.truncated:
        err("... more problems not shown (fix these first)")
    count = len(exc.problems)
    more = "+" if exc.truncated else ""
    return BadInput(f"{what}: {count}{more} problem{'s' if count != 1 or more else ''} found; nothing was written")


def cmd_import(args: argparse.Namespace) -> int:
    with open_store(args) as store:
        known = store.attribute_keys()
        try:
            cats = catalogue_io.load_catalogues(list(args.files), known_attributes=known)
        except CatalogueError as exc:
            raise _refuse(exc, "import refused") from None
        merged = catalogue_io.merge_catalogues(cats)
        counts = store.import_catalogue(merged, replace=args.replace, source=", ".join(args.files))
    if args.json:
        print_json({"files": list(args.files), "url": store.url, **counts})
    else:
        print(
            f"Imported {_n(counts.get('instruments', 0), 'instrument')}, {_n(counts.get('jobs', 0), 'job')} "
            f"and {_n(counts.get('attributes', 0), 'attribute')} from {_n(len(args.files), 'file')}"
            f" (new: {counts.get('created', 0)}, replaced: {counts.get('replaced', 0)})."
        )
    return EXIT_OK


def _n(count: int, noun: str) -> str:
    return f"{count} {noun}{'' if count == 1 else 's'}"


def cmd_export(args: argparse.Namespace) -> int:
    with open_store(args) as store:
        cat = store.export_catalogue(jobs=args.job, instruments=args.instrument)
    target = args.file
    if target == "-":
        # streamed record by record: the whole text is never held in memory
        try:
            catalogue_io.emit_catalogue(cat, sys.stdout)
        except ValueError as exc:
            raise CommandError(f"export to standard output stopped part-way: {exc}", EXIT_FAILURE) from None
    else:
        try:
            catalogue_io.write_catalogue(cat, target)
        except OSError as exc:
            raise BadInput(f"cannot write {target}: {exc.strerror or exc}") from None
    counts = {
        "file": target,
        "instruments": len(cat.instruments),
        "jobs": len(cat.jobs),
        "attributes": len(cat.attributes),
    }
    if args.json and target != "-":
        print_json(counts)
    elif target != "-":
        print(
            f"Wrote {_n(counts['instruments'], 'instrument')}, {_n(counts['jobs'], 'job')} and "
            f"{_n(counts['attributes'], 'attribute')} to {target}."
        )
    return EXIT_OK


def demo_catalogue_bytes() -> bytes:
    """The built-in demo catalogue (package data)."""
    package, name = DEMO_RESOURCE
    try:
        return resources.files(package).joinpath(name).read_bytes()
    except OSError as exc:  # a broken installation
        raise CommandError(f"the built-in demo catalogue is missing ({exc}); reinstall vetting", EXIT_FAILURE) from None


def _sqlite_path(url: str) -> Path | None:
    prefix = "sqlite:///"
    return Path(url[len(prefix):]) if url.startswith(prefix) else None


def cmd_demo(args: argparse.Namespace) -> Any:
    url = demo_url()
    data = demo_catalogue_bytes()
    path = _sqlite_path(url)
    if path is not None:  # rebuilt fresh every time
        for suffix in ("", "-wal", "-shm", "-journal"):
            try:
                os.unlink(f"{path}{suffix}")
            except FileNotFoundError:
                pass
            except OSError as exc:
                raise CommandError(f"cannot remove the old demo database {path}{suffix}: {exc.strerror}", EXIT_FAILURE)
    with open_store(args, url=url) as store:
        with records_errors():
            cat = catalogue_io.parse_catalogue(data, "demo.yaml (built in)", known_attributes=store.attribute_keys())
        counts = store.import_catalogue(cat, source="built-in demo")
    if args.no_open:
        if args.json:
            print_json({"url": url, **counts})
        else:
            print(
                f"Demo loaded: {_n(counts.get('instruments', 0), 'instrument')}, {_n(counts.get('jobs', 0), 'job')} "
                f"into {path or url} (its own database; your main database is untouched).\n"
                f"Open it with: vetting --db {url}"
            )
        return EXIT_OK
    from vetting.cli.main import OpenInterface  # imported here: main discovers this module

    return OpenInterface(url)
