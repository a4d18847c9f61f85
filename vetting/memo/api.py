"""Make a memo file and verify one: the functions the command line and the terminal interface call.

    result = make_memo(store, "control-room-operator", fmt="html", out="memo.html", by="A. Author")
    check = verify(store, "memo.html")      # or verify(store, "<64 hex digits>")
    check.matches, check.changed, check.missing

Files are written to a temporary file in the target folder and renamed into place, so a failed
run never leaves a half-written memo. A final memo is recorded as a decision in the database
(with its fingerprint) before the file is renamed into place.
"""

from __future__ import annotations

import datetime as dt
import os
import re
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

from vetting.memo import fingerprint as fpm
from vetting.memo import charts, render_docx, render_html, render_md
from vetting.memo.build import MemoData, MemoError, gather, layout
from vetting.memo.document import Document, Figure
from vetting.records.errors import NotFound
from vetting.records.gcpause import gc_pause

FORMATS = ("md", "html", "docx")
_HEX64 = re.compile(r"^[0-9a-fA-F]{64}$")


class MemoOutputError(MemoError):
    """The output path cannot be written (missing folder, no permission, a directory)."""


class VerifyInputError(MemoError):
    """`verify` was given something that is neither a memo file nor a known fingerprint."""


def render(doc: Document, fmt: str) -> bytes:
    if fmt == "md":
        return render_md.render(doc).encode("utf-8")
    if fmt == "html":
        return render_html.render(doc).encode("utf-8")
    if fmt == "docx":
        return render_docx.render(doc)
    raise MemoError(f"--format: unknown format {fmt!r}; use one of {', '.join(FORMATS)}")


def check_output_path(path: str | os.PathLike) -> Path:
    """Refuse, before any work, a path that cannot be written. Returns the absolute path."""
    p = Path(path).expanduser()
    if str(path).strip() == "":
        raise MemoOutputError("--out: the output path is empty")
    if p.is_dir():
        raise MemoOutputError(f"--out {path}: is a folder; give a file name")
    parent = p.parent if str(p.parent) else Path(".")
    if not parent.exists():
        raise MemoOutputError(f"--out {path}: the folder {parent} does not exist")
    if not parent.is_dir():
        raise MemoOutputError(f"--out {path}: {parent} is not a folder")
    if not os.access(parent, os.W_OK | os.X_OK):
        raise MemoOutputError(f"--out {path}: the folder {parent} cannot be written (permission denied)")
    if p.exists() and not os.access(p, os.W_OK):
        raise MemoOutputError(f"--out {path}: the file exists and cannot be overwritten (permission denied)")
    return p.resolve()


class _PendingFile:
    """A temporary file next to the target; `commit()` renames it into place, `discard()` removes it."""

    def __init__(self, target: Path, data: bytes) -> None:
        self.target = target
        try:
            fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=target.parent)
        except OSError as exc:
            raise MemoOutputError(f"--out {target}: cannot write in {target.parent}: {exc.strerror or exc}") from None
        self.tmp = Path(tmp)
        try:
            with os.fdopen(fd, "wb") as fh:
                fh.write(data)
                fh.flush()
                os.fsync(fh.fileno())
            os.chmod(self.tmp, 0o644)
        except OSError as exc:
            self.discard()
            raise MemoOutputError(f"--out {target}: writing failed: {exc.strerror or exc}") from None

    def commit(self) -> None:
        try:
            os.replace(self.tmp, self.target)
        except OSError as exc:
            self.discard()
            raise MemoOutputError(f"--out {self.target}: cannot put the file in place: {exc.strerror or exc}") from None

    def discard(self) -> None:
        try:
            self.tmp.unlink()
        except FileNotFoundError:
            pass


def write_atomic(path: str | os.PathLike, data: bytes) -> Path:
    target = check_output_path(path)
    pending = _PendingFile(target, data)
    pending.commit()
    return target


@dataclass
class MemoResult:
    path: Path
    fmt: str
    fingerprint: str
    status: str
    decision: str | None  # chosen instrument key, None when no instrument is fit for use
    decision_id: int | None  # the database decision id (final memos)
    override: bool
    #: what the memo was made from and its document model: only with make_memo(..., keep=True)
    data: MemoData | None = field(default=None, repr=False)
    document: Document | None = field(default=None, repr=False)


def make_memo(
    store,
    job_key: str,
    *,
    fmt: str,
    out: str | os.PathLike,
    choose: str | None = None,
    override: str | None = None,
    by: str | None = None,
    final: bool = False,
    as_of: dt.date | None = None,
    now: dt.datetime | None = None,
    draws: int = 2000,
    seed: int = 0,
    keep: bool = False,
) -> MemoResult:
    """Write a memo for `job_key`. Raises MemoError (bad input), NotFound (unknown job or
    instrument) or the appraisal engine's AppraisalError; on any error nothing is written.
    `keep=True` also returns the gathered data and the document model in the result."""
    if fmt not in FORMATS:
        raise MemoError(f"--format: unknown format {fmt!r}; use one of {', '.join(FORMATS)}")
    target = check_output_path(out)
    status = "final" if final else "draft"
    # The memo builds a few hundred thousand small objects per thousand instruments (records,
    # engine results, document rows, Word XML) and none of them forms a reference cycle that
    # needs collecting while it runs: with the collector on, each full collection walked the
    # whole catalogue again (about half the time at 10,000 instruments). Paused as the records
    # layer pauses it for bulk reads (counted, so another thread's pause is respected).
    #
    # Everything the memo made is dropped before the pause ends (unless `keep` asks for it):
    # the objects then go by reference counting, and the collector's first young collection
    # after the pause has nothing of the memo's left to scan. It used to scan them all, once,
    # for nothing (0.13 s at 1,000 instruments, 0.8 s at 10,000): the caller only needs the
    # file and the few facts in MemoResult. This relies on the memo's data being in no
    # reference cycle: matplotlib, imported on first use, keeps exception tracebacks whose
    # frames linked back to the memo's frames, so charts.py imports it on a thread of its own
    # (tests/memo/test_equivalence.py checks, in a fresh interpreter, that the data goes
    # without any collection).
    #
    # The charts of an HTML or Word memo may be drawn by a helper process started here, which
    # imports matplotlib while the records are read (charts.ChartHelper: the same bytes).
    helper = charts.ChartHelper.start() if fmt in _CHARTED else None
    try:
        with gc_pause():
            result = _make(store, job_key, fmt, target, helper, choose=choose, override=override, by=by,
                           final=final, status=status, as_of=as_of, now=now, draws=draws, seed=seed, keep=keep)
    finally:
        if helper is not None:
            helper.close()
    return result


#: The formats with charts, and how each draws them (to_png's dpi, or None for SVG).
_CHARTED = {"html": ("svg", None), "docx": ("png", 200)}


def figures(doc: Document) -> list:
    """The document's charts in reading order."""
    found = []

    def walk(sections) -> None:
        for section in sections:
            found.extend(b.chart for b in section.blocks if isinstance(b, Figure))
            walk(section.subsections)

    walk(doc.sections)
    return found


def _make(store, job_key, fmt, target, helper, *, choose, override, by, final, status, as_of, now, draws, seed,
          keep) -> MemoResult:
    """make_memo's work, inside its pause of the collector."""
    data = gather(
        store, job_key, choose=choose, override=override, by=by, status=status,
        as_of=as_of, now=now, draws=draws, seed=seed,
    )
    doc = layout(data)
    if helper is None:
        payload = render(doc, fmt)
    else:
        kind, dpi = _CHARTED[fmt]
        with helper.drawing([(chart, kind, dpi) for chart in figures(doc)]):
            payload = render(doc, fmt)
    pending = _PendingFile(target, payload)
    del payload
    decision_id = None
    try:
        if final:
            decision_id = store.record_decision(
                job_key,
                data.chosen.instrument if data.chosen else None,
                status="final",
                by=data.by or store.user,
                fingerprint=data.fingerprint.value,
                override_reason=data.override_reason,
                memo_path=str(target),
                memo_format=fmt,
            )
    except BaseException:
        pending.discard()
        raise
    pending.commit()
    if data.job.first_ranked_at is None:
        store.mark_ranked(job_key)
    result = MemoResult(
        path=target,
        fmt=fmt,
        fingerprint=data.fingerprint.value,
        status=status,
        decision=data.chosen.instrument if data.chosen else None,
        decision_id=decision_id,
        override=data.override_reason is not None,
        data=data if keep else None,
        document=doc if keep else None,
    )
    del data, doc
    return result


# ---------------------------------------------------------------------------------------------
# verification
# ---------------------------------------------------------------------------------------------


def read_stamp_file(path: str | os.PathLike) -> dict:
    """The stamp stored in a memo file of any of the three formats."""
    p = Path(path)
    try:
        raw = p.read_bytes()
    except OSError as exc:
        raise VerifyInputError(f"{path}: cannot read the file: {exc.strerror or exc}") from None
    stamp = None
    try:
        if raw[:4] == b"PK\x03\x04":
            stamp = render_docx.read_stamp(raw)
        else:
            text = raw.decode("utf-8")
            head = text.lstrip()[:200].lower()
            if head.startswith("<!doctype html") or head.startswith("<html"):
                stamp = render_html.read_stamp(text)
            else:
                stamp = render_md.read_stamp(text)
    except (ValueError, KeyError, UnicodeDecodeError) as exc:
        raise VerifyInputError(f"{path}: not a vetting memo (its record stamp cannot be read: {exc})") from None
    except Exception as exc:  # a damaged Word file raises zip/XML errors of several kinds
        raise VerifyInputError(f"{path}: not a readable vetting memo ({type(exc).__name__}: {exc})") from None
    if stamp is None:
        raise VerifyInputError(f"{path}: not a vetting memo (no record stamp found)")
    return stamp


@dataclass
class VerifyResult:
    source: str
    stored: fpm.Fingerprint
    current: fpm.Fingerprint | None
    changed: list[str] = field(default_factory=list)
    missing: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    decision: object | None = None  # the recorded decision with this fingerprint, if any
    written: str | None = None  # when the memo was written (ISO 8601), from its stamp

    @property
    def matches(self) -> bool:
        return self.current is not None and self.current.value == self.stored.value and not self.changed and not self.missing


def _current(store, stored: fpm.Fingerprint) -> tuple[fpm.Fingerprint | None, list[str]]:
    missing = []
    try:
        job = store.job(stored.job)
    except NotFound:
        return None, [f"job:{stored.job}", f"policy:{stored.job}"]
    instruments = []
    with gc_pause():
        # every instrument in one read (one query per kind of evidence), not one read per
        # instrument: a memo uses the whole catalogue as it was, and `verify` used to make
        # 10,000 separate reads for a memo over 10,000 instruments
        on_record = {i.key: i for i in store.instruments()}
        for key in stored.instrument_keys:
            inst = on_record.get(key)
            if inst is None:
                missing.append(f"instrument:{key}")
            else:
                instruments.append(inst)
        return fpm.compute(job, job.policy, instruments), missing


def verify(store, target: str) -> VerifyResult:
    """Check a memo file (or a recorded fingerprint) against the records as they are now."""
    path = Path(target)
    decision = None
    written = None
    if path.exists():
        stamp = read_stamp_file(path)
        try:
            stored = fpm.from_stamp(stamp)
        except ValueError as exc:
            raise VerifyInputError(f"{target}: {exc}") from None
        source = str(path)
        written = stamp.get("written")
        decision = store.decision_by_fingerprint(stored.value)
    elif _HEX64.match(target.strip()):
        fp = target.strip().lower()
        decision = store.decision_by_fingerprint(fp)
        if decision is None:
            raise VerifyInputError(f"{target}: no decision with this fingerprint is recorded in the database")
        stored = None
        if decision.memo_path and Path(decision.memo_path).exists():
            try:
                stamp = read_stamp_file(decision.memo_path)
                candidate = fpm.from_stamp(stamp)
                if candidate.value == fp:
                    stored, written = candidate, stamp.get("written")
            except (VerifyInputError, ValueError):
                stored = None
        if stored is None:
            # without the memo file the record names are unknown: compare the whole fingerprint only
            try:
                job = store.job(decision.job)
            except NotFound:
                stub = fpm.Fingerprint(fp, decision.job, None, {})
                return VerifyResult(fp, stub, None, [], [f"job:{decision.job}"],
                                    ["the memo file is not available, so only the whole fingerprint can be checked"], decision)
            with gc_pause():
                current = fpm.compute(job, job.policy, store.instruments())
            stub = fpm.Fingerprint(fp, decision.job, None, {})
            result = VerifyResult(fp, stub, current, decision=decision)
            if current.value != fp:
                result.changed.append("one or more records (the memo file is not available to name them)")
            result.notes.append(
                f"the memo file ({decision.memo_path or 'not recorded'}) is not available; "
                "compared against the job and every instrument now on record"
            )
            return result
        source = fp
    else:
        raise VerifyInputError(
            f"{target}: no such file, and not a fingerprint (a fingerprint is 64 hexadecimal digits)"
        )
    current, missing = _current(store, stored)
    result = VerifyResult(source, stored, current, decision=decision, written=written)
    if current is None:
        result.missing = missing
        return result
    cmp = fpm.compare(stored, current)
    result.changed = cmp.changed
    result.missing = sorted(set(cmp.missing) | set(missing))
    result.notes = cmp.notes
    try:
        extra = sorted(set(store.instrument_keys()) - set(stored.instrument_keys))
    except Exception:  # pragma: no cover - a store without key listing
        extra = []
    if extra:
        result.notes.append(
            "instruments added since the memo was written (not considered by it): " + ", ".join(extra)
        )
    return result


def describe_change(store, result: VerifyResult) -> list[str]:
    """Lines naming each changed or missing record, each followed by the audit events recorded
    for it after the memo was written (when the memo says when that was)."""
    since = None
    if result.written:
        try:
            since = dt.datetime.fromisoformat(result.written)
        except ValueError:
            since = None
    lines = []
    for label, names in (("changed", result.changed), ("missing (deleted since)", result.missing)):
        for name in names:
            lines.append(f"{label}: {name}")
            kind, _, key = name.partition(":")
            try:
                if kind == "instrument":
                    events = store.audit_events(instrument=key)
                elif kind in ("job", "policy"):
                    events = [e for e in store.audit_events(job=key) if e.entity == kind]
                else:
                    events = []
            except Exception:  # the audit trail is a help here, never a reason to fail
                events = []
            for e in events:
                if since is not None and e.at is not None and _aware(e.at) <= _aware(since):
                    continue
                lines.append(f"    {e.at:%Y-%m-%d %H:%M} UTC  {e.who}  {e.action} {e.entity} {e.key}")
    return lines


def _aware(value: dt.datetime) -> dt.datetime:
    return value if value.tzinfo is not None else value.replace(tzinfo=dt.timezone.utc)
