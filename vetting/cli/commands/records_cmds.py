"""Record-keeping commands: init, list, show, log, backup, restore.

    vetting [--db URL] init
    vetting list instruments|jobs [--json]
    vetting show instrument|job KEY [--json]
    vetting log [--job KEY | --instrument KEY] [--json]
    vetting backup PATH
    vetting restore PATH
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path
from typing import Any

from vetting.cli.common import EXIT_BAD_INPUT, EXIT_OK, BadInput, CommandError, print_json
from vetting.cli.store_access import open_store, records_errors, store_url
from vetting.records.domain import Instrument, Job
from vetting.records.errors import DatabaseUnavailable, RecordsError
from vetting.records.results import AuditEvent


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("init", help="create the database (or upgrade it to this version) and say where it is")
    p.add_argument("--json", action="store_true", help="print the result as JSON")
    p.set_defaults(func=cmd_init)

    p = sub.add_parser("list", help="list the instruments or jobs on record")
    p.add_argument("what", choices=("instruments", "jobs"), help="what to list")
    p.add_argument("--json", action="store_true", help="print JSON instead of a table")
    p.set_defaults(func=cmd_list)

    p = sub.add_parser("show", help="show one instrument or job in full")
    p.add_argument("what", choices=("instrument", "job"), help="what to show")
    p.add_argument("key", metavar="KEY", help="its key")
    p.add_argument("--json", action="store_true", help="print JSON")
    p.set_defaults(func=cmd_show)

    p = sub.add_parser("log", help="show the audit trail: who changed what, when, before and after")
    which = p.add_mutually_exclusive_group()
    which.add_argument("--job", metavar="KEY", help="only this job (its policy versions and decisions too)")
    which.add_argument("--instrument", metavar="KEY", help="only this instrument")
    p.add_argument("--json", action="store_true", help="print JSON")
    p.set_defaults(func=cmd_log)

    p = sub.add_parser(
        "backup",
        help="copy the whole database to a new file while it is in use "
        "(SQLite: a database file; PostgreSQL: a catalogue export of every record)",
    )
    p.add_argument("path", metavar="PATH", help="the new file to write (must not exist)")
    p.set_defaults(func=cmd_backup)

    p = sub.add_parser("restore", help="load a backup made by `vetting backup` into an EMPTY database")
    p.add_argument("path", metavar="PATH", help="the backup file")
    p.set_defaults(func=cmd_restore)


# ---------------------------------------------------------------------------
# init
# ---------------------------------------------------------------------------


def cmd_init(args: argparse.Namespace) -> int:
    url = store_url(args)
    with open_store(args, url=url) as store:
        where = _where(store.url)
        counts = {"instruments": len(store.instrument_keys()), "jobs": len(store.job_keys())}
    if args.json:
        print_json({"database": where, **counts})
    else:
        print(f"database ready: {where}")
        print(f"{counts['instruments']} instrument(s), {counts['jobs']} job(s) on record")
    return EXIT_OK


def _where(url: str) -> str:
    from vetting.records.engine import sqlite_path  # not at module level: keeps --help light

    path = sqlite_path(url)
    if path is not None:
        return str(path.resolve())
    from sqlalchemy.engine import make_url

    return make_url(url).render_as_string(hide_password=True)


# ---------------------------------------------------------------------------
# list / show
# ---------------------------------------------------------------------------


def cmd_list(args: argparse.Namespace) -> int:
    with open_store(args) as store:
        if args.what == "instruments":
            items: list[Any] = store.instruments()
        else:
            items = store.jobs()
    if args.json:
        print_json(items)
        return EXIT_OK
    if not items:
        print(f"no {args.what} on record (load a catalogue with `vetting import FILE`)")
        return EXIT_OK
    if args.what == "instruments":
        rows = [
            [
                i.key,
                i.title,
                i.publisher or "",
                _num(i.minutes),
                ", ".join(i.attribute_keys()),
                str(len(i.validity)),
            ]
            for i in items
        ]
        _table(["key", "title", "publisher", "minutes", "measures", "validity studies"], rows)
    else:
        rows = [
            [
                j.key,
                j.title,
                ", ".join(r.attribute for r in j.requirements),
                f"v{j.policy.version}" + (" locked" if j.policy.locked else ""),
                "yes" if j.first_ranked_at else "no",
            ]
            for j in items
        ]
        _table(["key", "title", "requirements", "policy", "ranked"], rows)
    return EXIT_OK


def cmd_show(args: argparse.Namespace) -> int:
    with open_store(args) as store:
        obj: Instrument | Job = store.instrument(args.key) if args.what == "instrument" else store.job(args.key)
    if args.json:
        print_json(obj)
    elif isinstance(obj, Instrument):
        _show_instrument(obj)
    else:
        _show_job(obj)
    return EXIT_OK


def _show_instrument(i: Instrument) -> None:
    print(f"{i.key}: {i.title}")
    _field("publisher", i.publisher)
    _field("edition", i.edition)
    _field("year", i.year)
    _field("minutes", _num(i.minutes))
    _field("mode", ", ".join(i.mode))
    _field("reading grade", _num(i.reading_grade))
    if i.cost_per_applicant is not None:
        _field("cost per applicant", f"{_num(i.cost_per_applicant)} {i.currency or ''}".strip())
    _field("user qualification", i.user_qualification)
    _field("accommodations", ", ".join(i.accommodations))
    _field("languages", ", ".join(i.languages))
    _field("record version", i.row_version)
    print("measures:")
    for x in i.measures:
        print(f"  - {x.attribute} ({x.fit})")
    if i.reliability:
        print("reliability:")
        for r in i.reliability:
            extra = f", {r.interval_days} days" if r.interval_days is not None else ""
            print(f"  - {r.type} {_num(r.value)} (n={r.n if r.n is not None else '?'}{extra}){_src(r.source)}")
    if i.validity:
        print("validity:")
        for v in i.validity:
            fam = f", {v.job_family}" if v.job_family else ""
            print(f"  - {v.criterion}: r={_num(v.r)} (n={v.n}, {v.design}, corrected: {v.corrected}{fam}){_src(v.source)}")
    if i.norms:
        print("norm groups:")
        for n in i.norms:
            occ = f", {n.occupation}" if n.occupation else ""
            print(f"  - {n.key}: {n.group} ({n.scope}{occ}, {n.year}, n={n.n}) mean {_num(n.mean)}, SD {_num(n.sd)}")
            if n.table:
                pts = ", ".join(f"P{_num(p.percentile)}={_num(p.raw)}" for p in n.table)
                print(f"      percentiles: {pts}")
    if i.subgroup_differences:
        print("subgroup differences:")
        for g in i.subgroup_differences:
            print(f"  - {g.groups}: d={_num(g.d)} (n={g.n if g.n is not None else '?'}){_src(g.source)}")
    if i.reviews:
        print("reviews:")
        for rv in i.reviews:
            print(f"  - {rv.date.isoformat()} {rv.by} [{rv.stance}]: {rv.note}{_src(rv.source)}")
    if i.sample_copy is not None:
        s = i.sample_copy
        print("sample copy:")
        _field("requested", s.requested.isoformat() if s.requested else None, indent=2)
        _field("received", s.received.isoformat() if s.received else None, indent=2)
        _field("checked by", s.checked_by, indent=2)
        for c in s.checks:
            note = f" — {c.note}" if c.note else ""
            print(f"  - {c.item}: {c.result}{note}")


def _show_job(j: Job) -> None:
    print(f"{j.key}: {j.title}")
    _field("analysis source", j.analysis_source)
    _field("applicant reading grade", _num(j.applicant_reading_grade))
    _field("time budget (minutes)", _num(j.time_budget_minutes))
    _field("budget per applicant", _num(j.budget_per_applicant))
    _field("staff qualification", j.staff_qualification)
    _field("applicants per year", j.applicants_per_year)
    _field("hires per year", j.hires_per_year)
    _field("base rate", _num(j.base_rate))
    _field("criterion SD", _num(j.criterion_sd))
    _field("tenure (years)", _num(j.tenure_years))
    _field("first ranked", j.first_ranked_at.isoformat(timespec="seconds") if j.first_ranked_at else "never")
    _field("record version", j.row_version)
    print("requirements:")
    for r in j.requirements:
        print(f"  - {r.attribute}: importance {r.importance}{', critical' if r.critical else ''}")
    p = j.policy
    locked = f"locked {p.locked_at.isoformat(timespec='seconds')}" if p.locked_at else "not locked"
    print(f"policy (version {p.version}, {locked}):")
    _field("minimum reliability", _num(p.min_reliability), indent=2)
    _field("maximum norm age (years)", p.max_norm_age_years, indent=2)
    _field("impact ratio floor", _num(p.impact_ratio_floor), indent=2)
    _field("weights", ", ".join(f"{k} {_num(v)}" for k, v in p.weights.items()), indent=2)
    _field("relevant criteria", ", ".join(p.relevant_criteria) or "all", indent=2)
    _field("relevant job families", ", ".join(p.relevant_job_families) or "all", indent=2)


# ---------------------------------------------------------------------------
# log
# ---------------------------------------------------------------------------


def cmd_log(args: argparse.Namespace) -> int:
    with open_store(args) as store:
        if args.job:
            events = store.audit_events(job=args.job)
        elif args.instrument:
            events = store.audit_events(instrument=args.instrument)
        else:
            events = store.audit_events()
    if args.json:
        print_json(events)
        return EXIT_OK
    if not events:
        what = f" for job {args.job}" if args.job else f" for instrument {args.instrument}" if args.instrument else ""
        print(f"no audit events{what}")
        return EXIT_OK
    for e in events:
        print(_event_line(e))
        for line in _changes(e):
            print(f"    {line}")
    return EXIT_OK


def _event_line(e: AuditEvent) -> str:
    return f"{e.at.isoformat(timespec='seconds')}  {e.who}  {e.action} {e.entity} {e.key}".rstrip()


def _changes(e: AuditEvent) -> list[str]:
    """Field-level differences between before and after, one line each."""
    if e.action == "import":
        return [json.dumps(e.after, ensure_ascii=False, sort_keys=True)] if e.after else []
    before = e.before if isinstance(e.before, dict) else {}
    after = e.after if isinstance(e.after, dict) else {}
    if e.before is None and e.after is not None and e.action == "create":
        return []
    if e.after is None:
        return ["(deleted; the full record is kept in the log: use --json)"]
    out = []
    for name in sorted(set(before) | set(after)):
        if before.get(name) != after.get(name):
            out.append(f"{name}: {_short(before.get(name))} -> {_short(after.get(name))}")
    return out


def _short(value: Any, limit: int = 80) -> str:
    text = json.dumps(value, ensure_ascii=False, sort_keys=True)
    return text if len(text) <= limit else text[: limit - 3] + "..."


# ---------------------------------------------------------------------------
# backup / restore
# ---------------------------------------------------------------------------


def cmd_backup(args: argparse.Namespace) -> int:
    target = Path(args.path)
    if target.exists():
        raise BadInput(f"{target}: already exists; a backup is always written to a new file")
    if not target.parent.is_dir():
        raise BadInput(f"{target}: the folder {target.parent} does not exist")
    with open_store(args) as store:
        try:
            store.backup(target)
            kind = "SQLite database copy"
        except NotImplementedError:
            cat = store.export_catalogue()
            with records_errors():
                try:
                    from vetting.records.catalogue import write_catalogue
                except ImportError as exc:  # pragma: no cover - the catalogue module ships with vetting
                    raise CommandError(f"cannot write a catalogue backup: {exc}", 1) from None
                try:
                    write_catalogue(cat, target)
                except OSError as exc:
                    raise CommandError(f"{target}: cannot write the backup: {exc.strerror or exc}", 1) from None
            kind = (
                "catalogue export (every instrument, job and attribute; the audit trail, policy history "
                "and decisions stay in the server's own backups)"
            )
    print(f"backup written: {target} ({kind})")
    return EXIT_OK


def cmd_restore(args: argparse.Namespace) -> int:
    source = Path(args.path)
    if not source.is_file():
        raise BadInput(f"{source}: no such backup file")
    with open_store(args) as store:
        if not store.is_empty():
            raise CommandError(
                f"{_where(store.url)} already holds records; restore only into an empty database "
                "(choose a new one with --db)",
                EXIT_BAD_INPUT,
            )
        with open(source, "rb") as fh:
            is_sqlite = fh.read(16) == b"SQLite format 3\x00"
        if is_sqlite:
            try:
                copied = store.restore(source)
            except RecordsError as exc:
                if isinstance(exc, DatabaseUnavailable):
                    raise
                raise CommandError(f"{source}: {exc}", EXIT_BAD_INPUT) from None
            total = sum(copied.values())
            print(f"restored {total} row(s) from {source} into {_where(store.url)}")
        else:
            from vetting.records.catalogue import load_catalogue

            cat = load_catalogue(source)
            counts = store.import_catalogue(cat, source=str(source))
            print(
                f"restored {counts['attributes']} attribute(s), {counts['instruments']} instrument(s) and "
                f"{counts['jobs']} job(s) from the catalogue {source} into {_where(store.url)}"
            )
    return EXIT_OK


# ---------------------------------------------------------------------------
# formatting helpers (text only: every number shown is a stored value, never computed here)
# ---------------------------------------------------------------------------


def _num(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value)


def _src(source: str | None) -> str:
    return f" — {source}" if source else ""


def _field(label: str, value: Any, indent: int = 0) -> None:
    if value is None or value == "":
        return
    print(f"{' ' * indent}{label}: {value}")


def _table(headers: list[str], rows: list[list[str]]) -> None:
    widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(headers)]
    widths[-1] = 0  # last column is not padded
    out = sys.stdout
    out.write("  ".join(h.ljust(w) for h, w in zip(headers, widths)).rstrip() + "\n")
    for r in rows:
        out.write("  ".join(c.ljust(w) for c, w in zip(r, widths)).rstrip() + "\n")
