"""Decision memo commands.

    vetting memo JOB [--choose INSTRUMENT [--override "REASON"]] --format md|html|docx --out PATH
                     [--by NAME] [--final] [--json]
    vetting verify MEMO-FILE|FINGERPRINT [--json]

`memo` writes the memo (nothing is written on any error) and, with --final, records the
decision with the memo's record fingerprint. `verify` exits 0 when the records the memo used are
unchanged, 1 when any changed (naming them), 2 for input it cannot read.
"""

from __future__ import annotations

import argparse
import sys

from vetting.cli.common import EXIT_FAILURE, EXIT_OK, BadInput, print_json
from vetting.cli.store_access import open_store

SUMMARY_CAUTION = (
    "The memo lists the cautions for this use (adverse impact monitoring, local validation, "
    "qualified users, accommodations); it does not replace advice under local employment law "
    "or licensed professional practice."
)


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "memo",
        help="write the decision memo for a job (Markdown, HTML or Word)",
        description="Write a decision memo for JOB: the choice, the evidence, the rules, the planned use, "
        "the cautions and a fingerprint of the records used. Default choice: the top-ranked eligible instrument.",
    )
    p.add_argument("job", metavar="JOB", help="the job's key")
    p.add_argument("--choose", metavar="INSTRUMENT", help="choose this instrument instead of the top-ranked one")
    p.add_argument(
        "--override",
        metavar="REASON",
        help="allow --choose of an instrument that fails a gate; the reason is printed in the memo",
    )
    p.add_argument("--format", dest="fmt", required=True, choices=("md", "html", "docx"), help="file format")
    p.add_argument("--out", required=True, metavar="PATH", help="the file to write")
    p.add_argument("--by", metavar="NAME", help="author named in the memo (default: the database user)")
    p.add_argument("--final", action="store_true", help="final memo: record the decision and its fingerprint")
    p.add_argument("--json", action="store_true", help="print what was written as JSON")
    p.add_argument("--seed", type=int, default=0, help=argparse.SUPPRESS)
    p.set_defaults(func=cmd_memo)

    p = sub.add_parser(
        "verify",
        help="check whether the records a memo used have changed since (exit 0 unchanged, 1 changed)",
    )
    p.add_argument("target", metavar="MEMO-FILE|FINGERPRINT", help="a memo file, or a recorded fingerprint")
    p.add_argument("--json", action="store_true", help="print the result as JSON")
    p.set_defaults(func=cmd_verify)


def cmd_memo(args: argparse.Namespace) -> int:
    from vetting.appraisal.errors import AppraisalError
    from vetting.memo.api import make_memo
    from vetting.memo.build import MemoError
    from vetting.psychometrics.errors import PsychometricsError

    if args.override is not None and args.choose is None:
        raise BadInput("--override is only used together with --choose INSTRUMENT")
    with open_store(args) as store:
        try:
            result = make_memo(
                store,
                args.job,
                fmt=args.fmt,
                out=args.out,
                choose=args.choose,
                override=args.override,
                by=args.by,
                final=args.final,
                seed=args.seed,
            )
        except (MemoError, AppraisalError, PsychometricsError) as exc:
            raise BadInput(str(exc)) from None
    if args.json:
        print_json(
            {
                "path": str(result.path),
                "format": result.fmt,
                "status": result.status,
                "job": args.job,
                "decision": result.decision,
                "override": result.override,
                "fingerprint": result.fingerprint,
                "decision_id": result.decision_id,
            }
        )
    else:
        chosen = result.decision or "no instrument is fit for use"
        out = sys.stdout
        out.write(f"wrote {result.path} ({result.fmt}, {result.status})\n")
        out.write(f"decision: {chosen}" + (" (OVERRIDE: fails a gate)" if result.override else "") + "\n")
        out.write(f"fingerprint: {result.fingerprint}\n")
        if result.decision_id is not None:
            out.write(f"recorded as decision #{result.decision_id}\n")
        out.write(SUMMARY_CAUTION + "\n")
    return EXIT_OK


def cmd_verify(args: argparse.Namespace) -> int:
    from vetting.memo.api import describe_change, verify
    from vetting.memo.build import MemoError

    with open_store(args) as store:
        try:
            result = verify(store, args.target)
        except MemoError as exc:
            raise BadInput(str(exc)) from None
        lines = [] if result.matches else describe_change(store, result)
    if args.json:
        print_json(
            {
                "source": result.source,
                "matches": result.matches,
                "fingerprint": result.stored.value,
                "current_fingerprint": result.current.value if result.current else None,
                "job": result.stored.job,
                "changed": result.changed,
                "missing": result.missing,
                "notes": result.notes,
                "decision": getattr(result.decision, "id", None),
            }
        )
    else:
        out = sys.stdout
        if result.matches:
            out.write(f"unchanged: the records used by {result.source} match (fingerprint {result.stored.value})\n")
        else:
            out.write(f"CHANGED: the records used by {result.source} are not what the memo used\n")
            for line in lines:
                out.write(line + "\n")
        for note in result.notes:
            out.write(f"note: {note}\n")
    return EXIT_OK if result.matches else EXIT_FAILURE
