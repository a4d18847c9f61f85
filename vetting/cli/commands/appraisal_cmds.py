"""Appraisal commands: rank, plan, gaps, alternatives, policy.

    vetting rank JOB [--json] [--draws N] [--seed S]
    vetting plan JOB INSTRUMENT [--selection-ratio S | --raw-cut X] [--norm KEY] [--confidence C] [--json]
    vetting gaps INSTRUMENT [--job KEY] [--json]
    vetting alternatives JOB [--json]
    vetting policy show JOB [--json]
    vetting policy set JOB [--weight NAME=VALUE ...] [--min-reliability R] [--max-norm-age YEARS]
                           [--impact-floor F] [--criteria A,B] [--job-families A,B] [--json]
    vetting policy lock JOB [--json]

Every figure comes from vetting.appraisal; this module only formats it.
"""

from __future__ import annotations

import argparse
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

from vetting.cli.common import EXIT_OK, BadInput, print_json, to_jsonable
from vetting.cli.store_access import open_store

GATE_NAMES = ("job_relatedness", "validity_evidence", "reliability", "reading_level", "time", "qualification")
COMPONENT_NAMES = ("coverage", "validity", "reliability", "norms", "fairness", "practicality")


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("rank", help="appraise every instrument for a job under its scoring policy, and rank them")
    p.add_argument("job", metavar="JOB", help="the job's key")
    p.add_argument("--draws", type=int, default=2000, help="robustness draws (default 2000)")
    p.add_argument("--seed", type=int, default=0, help="random seed for the robustness draws (default 0)")
    p.add_argument("--json", action="store_true", help="print JSON")
    p.set_defaults(func=cmd_rank)

    p = sub.add_parser("plan", help="cut-score plan for an instrument and a job")
    p.add_argument("job", metavar="JOB", help="the job's key")
    p.add_argument("instrument", metavar="INSTRUMENT", help="the instrument's key")
    which = p.add_mutually_exclusive_group()
    which.add_argument("--selection-ratio", type=float, metavar="S", help="share of applicants hired (default: hires / applicants)")
    which.add_argument("--raw-cut", type=float, metavar="X", help="a raw cut score on the norm group instead")
    p.add_argument("--norm", metavar="KEY", help="norm group (default: the most suitable for the job)")
    p.add_argument("--confidence", type=float, default=0.95, help="confidence of the band around the cut (default .95)")
    p.add_argument("--json", action="store_true", help="print JSON")
    p.set_defaults(func=cmd_plan)

    p = sub.add_parser("gaps", help="evidence still missing for an instrument, and a request letter to its publisher")
    p.add_argument("instrument", metavar="INSTRUMENT", help="the instrument's key")
    p.add_argument("--job", metavar="KEY", help="judge relevance and norm age by this job's policy")
    p.add_argument("--json", action="store_true", help="print JSON")
    p.set_defaults(func=cmd_gaps)

    p = sub.add_parser("alternatives", help="equally valid eligible instruments with less expected adverse impact")
    p.add_argument("job", metavar="JOB", help="the job's key")
    p.add_argument("--json", action="store_true", help="print JSON")
    p.set_defaults(func=cmd_alternatives)

    p = sub.add_parser("policy", help="show, change or lock a job's scoring policy (gates and weights)")
    psub = p.add_subparsers(dest="policy_command", metavar="show|set|lock", required=True)
    s = psub.add_parser("show", help="every policy version of the job")
    s.add_argument("job", metavar="JOB")
    s.add_argument("--json", action="store_true", help="print JSON")
    s.set_defaults(func=cmd_policy_show)
    s = psub.add_parser("set", help="new rules for the job (a new policy version when they differ)")
    s.add_argument("job", metavar="JOB")
    s.add_argument("--weight", action="append", default=[], metavar="NAME=VALUE",
                   help=f"a weight ({', '.join(COMPONENT_NAMES)}); repeat for several")
    s.add_argument("--min-reliability", type=float, metavar="R", help="reliability gate minimum (0..1)")
    s.add_argument("--max-norm-age", type=int, metavar="YEARS", help="oldest norm group age allowed")
    s.add_argument("--impact-floor", type=float, metavar="F", help="expected impact ratio floor (e.g. 0.8)")
    s.add_argument("--criteria", metavar="A,B", help="relevant criteria, comma-separated ('' for all)")
    s.add_argument("--job-families", metavar="A,B", help="relevant job families, comma-separated ('' for all)")
    s.add_argument("--json", action="store_true", help="print JSON")
    s.set_defaults(func=cmd_policy_set)
    s = psub.add_parser("lock", help="fix the current policy version before looking at results")
    s.add_argument("job", metavar="JOB")
    s.add_argument("--json", action="store_true", help="print JSON")
    s.set_defaults(func=cmd_policy_lock)


@contextmanager
def _engine_errors() -> Iterator[None]:
    from vetting.appraisal.errors import AppraisalError
    from vetting.psychometrics.errors import PsychometricsError

    try:
        yield
    except (AppraisalError, PsychometricsError) as exc:
        raise BadInput(str(exc)) from None


def _print_cautions(cautions) -> None:
    print()
    print("Cautions:")
    for c in cautions:
        print(f"  * {c}")


def _num(x: float | None, fmt: str = ".2f", none: str = "-") -> str:
    return none if x is None else format(x, fmt)


# ---------------------------------------------------------------------------
# rank
# ---------------------------------------------------------------------------


def ranking_json(r) -> dict[str, Any]:
    """The rank command's JSON (binding keys first; extra keys for readers who want more)."""
    return {
        "job": r.job,
        "policy_version": r.policy_version,
        "policy_locked": r.policy_locked,
        "locked_before_first_ranking": r.locked_before_first_ranking,
        "policy_locked_at": to_jsonable(r.policy_locked_at),
        "first_ranked_at": to_jsonable(r.first_ranked_at),
        "as_of": r.as_of.isoformat(),
        "selection_ratio": r.selection_ratio,
        "weights": r.weights,
        "results": [
            {
                "instrument": a.instrument,
                "title": a.title,
                "eligible": a.eligible,
                "rank": a.rank,
                "score": a.score,
                "gates": {n: a.gates[n].passed for n in GATE_NAMES},
                "components": {n: a.components[n].value for n in COMPONENT_NAMES},
                "warnings": a.warning_codes,
                "p_best": a.p_best,
                "reasons": {n: a.gates[n].reason for n in GATE_NAMES},
                "warning_texts": [w.text for w in a.warnings],
                "component_details": {
                    n: {"raw": a.components[n].raw, "raw_text": a.components[n].raw_text, "mapping": a.components[n].mapping}
                    for n in COMPONENT_NAMES
                },
                "conservative_validity": a.validity.conservative,
                "impact_ratio": a.impact_ratio,
                "reliability_used": to_jsonable(a.reliability_used),
            }
            for a in r.results
        ],
        "robustness": {
            "draws": r.robustness.draws,
            "seed": r.robustness.seed,
            "concentration": r.robustness.concentration,
            "smallest_flip": to_jsonable(r.robustness.smallest_flip),
            "tied_with_top": list(r.robustness.tied_with_top),
            "method": r.robustness.method,
        },
        "alternatives": to_jsonable(r.alternatives),
        "warnings": [w.code for w in r.warnings],
        "cautions": list(r.cautions),
    }


def _policy_line(r) -> str:
    if r.policy_locked:
        when = r.policy_locked_at.isoformat(timespec="minutes") if r.policy_locked_at else "?"
        timing = "before" if r.locked_before_first_ranking else "AFTER"
        return f"policy version {r.policy_version}, locked {when}, {timing} the job's first ranking"
    return f"policy version {r.policy_version}, NOT locked"


def print_ranking(r) -> None:
    print(f"Ranking for job '{r.job}' ({r.job_title}) - {_policy_line(r)}")
    print(f"weights: " + ", ".join(f"{n} {r.weights[n]:.2f}" for n in COMPONENT_NAMES))
    print()
    print(f"{'rank':>4}  {'instrument':<24} {'score':>6} {'p_best':>6}  gates")
    for a in r.results:
        failed = a.failed_gates
        gates = "all 6 PASS" if not failed else "FAIL " + "; FAIL ".join(f"{g.name}: {g.reason}" for g in failed)
        rank = str(a.rank) if a.rank is not None else "-"
        pb = f"{a.p_best:.2f}" if a.eligible else "-"
        print(f"{rank:>4}  {a.instrument:<24} {a.score:6.1f} {pb:>6}  {gates}")
        comps = "  ".join(f"{n} {_num(a.components[n].value)}" for n in COMPONENT_NAMES)
        print(f"{'':6}{comps}")
        if a.warnings:
            print(f"{'':6}warnings: " + ", ".join(a.warning_codes))
    print("('-' component = no evidence, counted as 0 in the score)")
    rob = r.robustness
    top = r.top
    print()
    if top is None:
        print("No instrument passes all six gates: no instrument is fit for this use.")
    else:
        print(f"Top choice: {top.instrument} (ranked first in {top.p_best:.0%} of {rob.draws} robustness draws, seed {rob.seed})")
        f = rob.smallest_flip
        if rob.tied_with_top:
            print(f"Its score is tied with: {', '.join(rob.tied_with_top)} (the order between them is only the tie-break)")
        if f is not None:
            print(f"Smallest single weight change that changes it: {f.weight} {f.from_value:g} -> {f.to_value:.3g} "
                  f"(then {f.new_top} ties or leads)")
        else:
            print("No single weight change can change the top choice.")
        alt = r.alternatives
        if alt.alternatives:
            print("Alternatives of substantially equal validity with less expected adverse impact:")
            for a in alt.alternatives:
                print(f"  {a.instrument}: {a.reason}")
        elif alt.note:
            print(f"Alternatives: {alt.note}")
    for w in r.warnings:
        print(f"Note: {w.text}")
    _print_cautions(r.cautions)


def cmd_rank(args: argparse.Namespace) -> int:
    from vetting.appraisal.service import rank_job

    if args.draws < 1:
        raise BadInput(f"--draws: must be at least 1, got {args.draws}")
    with open_store(args) as store, _engine_errors():
        r = rank_job(store, args.job, draws=args.draws, seed=args.seed)
    if args.json:
        print_json(ranking_json(r))
    else:
        print_ranking(r)
    return EXIT_OK


def cmd_alternatives(args: argparse.Namespace) -> int:
    from vetting.appraisal.service import rank_job

    with open_store(args) as store, _engine_errors():
        r = rank_job(store, args.job, draws=1)
    alt = r.alternatives
    if args.json:
        print_json({"job": r.job, "policy_version": r.policy_version, **to_jsonable(alt), "cautions": list(r.cautions)})
        return EXIT_OK
    print(f"Alternatives for job '{r.job}' - {_policy_line(r)}")
    print(alt.rule)
    if alt.top is None:
        print(alt.note)
    else:
        print(f"Top choice: {alt.top} (conservative validity {_num(alt.top_validity)}, "
              f"expected impact ratio {_num(alt.top_impact_ratio)})")
        for a in alt.alternatives:
            print(f"  {a.instrument} ({a.title}): {a.reason}")
        if not alt.alternatives:
            print(alt.note)
    _print_cautions(r.cautions)
    return EXIT_OK


# ---------------------------------------------------------------------------
# plan
# ---------------------------------------------------------------------------


def plan_json(p) -> dict[str, Any]:
    return {
        "job": p.job,
        "instrument": p.instrument,
        "norm": p.norm,
        "selection_ratio": p.selection_ratio,
        "validity_used": p.validity_used,
        "cut": to_jsonable(p.cut),
        "expected_success_rate": p.expected_success_rate,
        "mean_criterion_z": p.mean_criterion_z,
        "utility_per_year": p.utility_per_year,
        "impact_ratio": p.impact_ratio,
        "sem_raw": p.sem_raw,
        "cut_band_raw": list(p.cut_band_raw) if p.cut_band_raw is not None else None,
        "confidence": p.confidence,
        "base_rate": p.base_rate,
        "d_used": p.d_used,
        "norm_reason": p.norm_reason,
        "reliability_used": to_jsonable(p.reliability_used),
        "local_validation": to_jsonable(p.local_validation),
        "warnings": [w.code for w in p.warnings],
        "cautions": list(p.cautions),
    }


def cmd_plan(args: argparse.Namespace) -> int:
    from vetting.appraisal.service import plan_cut

    with open_store(args) as store, _engine_errors():
        p = plan_cut(store, args.job, args.instrument, selection_ratio=args.selection_ratio,
                     norm_key=args.norm, raw_cut=args.raw_cut, confidence=args.confidence)
    if args.json:
        print_json(plan_json(p))
        return EXIT_OK
    c = p.cut
    print(f"Cut-score plan: instrument '{p.instrument}' for job '{p.job}'")
    print(f"  norm group:            {p.norm or '-'} {p.norm_text}".rstrip())
    print(f"                         ({p.norm_reason})")
    print(f"  selection ratio:       {p.selection_ratio:.3f}")
    print(f"  cut:                   raw {_num(c.raw)}  z {c.z:.2f}  T {c.t:.1f}  stanine {c.stanine}  percentile {c.percentile:.1f}")
    if p.cut_band_raw is not None:
        print(f"  SEM band ({p.confidence:.0%}):        raw {p.cut_band_raw[0]:.2f} to {p.cut_band_raw[1]:.2f} (SEM {p.sem_raw:.2f})")
    print(f"  validity used:         {_num(p.validity_used, '.3f')}")
    print(f"  expected success rate: {_num(p.expected_success_rate, '.3f')} (base rate {_num(p.base_rate)})")
    print(f"  mean criterion z:      {_num(p.mean_criterion_z, '.3f')}")
    print(f"  utility, one year's hiring: {_num(p.utility_per_year, ',.0f')}")
    print(f"  expected impact ratio: {_num(p.impact_ratio, '.3f')}")
    if p.local_validation is not None:
        print(f"  local validation:      {p.local_validation.text}")
    for w in p.warnings:
        print(f"  Note: {w.text}")
    _print_cautions(p.cautions)
    return EXIT_OK


# ---------------------------------------------------------------------------
# gaps
# ---------------------------------------------------------------------------


def cmd_gaps(args: argparse.Namespace) -> int:
    from vetting.appraisal.service import instrument_gaps

    with open_store(args) as store, _engine_errors():
        rep = instrument_gaps(store, args.instrument, args.job)
    if args.json:
        print_json({"instrument": rep.instrument, "title": rep.title, "publisher": rep.publisher,
                    "gaps": [{"code": g.code, "text": g.text} for g in rep.gaps], "letter": rep.letter})
        return EXIT_OK
    print(f"Evidence gaps: {rep.instrument} ({rep.title})")
    if not rep.gaps:
        print("  none found")
        return EXIT_OK
    for g in rep.gaps:
        print(f"  - [{g.code}] {g.text}")
    if rep.letter:
        print()
        print("Request letter:")
        print()
        print(rep.letter, end="")
    return EXIT_OK


# ---------------------------------------------------------------------------
# policy
# ---------------------------------------------------------------------------


def _policy_dict(p) -> dict[str, Any]:
    return {
        "version": p.version,
        "locked": p.locked,
        "locked_at": to_jsonable(p.locked_at),
        "created_at": to_jsonable(p.created_at),
        "min_reliability": p.min_reliability,
        "max_norm_age_years": p.max_norm_age_years,
        "impact_ratio_floor": p.impact_ratio_floor,
        "weights": dict(p.weights),
        "relevant_criteria": list(p.relevant_criteria),
        "relevant_job_families": list(p.relevant_job_families),
    }


def _print_policy(p) -> None:
    lock = f"locked {p.locked_at.isoformat(timespec='minutes')}" if p.locked else "not locked"
    print(f"version {p.version} ({lock})")
    print("  weights: " + ", ".join(f"{n} {p.weights.get(n, 0):g}" for n in COMPONENT_NAMES))
    print(f"  min reliability {p.min_reliability:g}; max norm age {p.max_norm_age_years} years; "
          f"impact ratio floor {p.impact_ratio_floor:g}")
    print(f"  relevant criteria: {', '.join(p.relevant_criteria) or 'all'}; "
          f"relevant job families: {', '.join(p.relevant_job_families) or 'all'}")


def cmd_policy_show(args: argparse.Namespace) -> int:
    with open_store(args) as store:
        job = store.job(args.job)
        versions = store.policy_versions(args.job)
    if args.json:
        print_json({"job": job.key, "current_version": job.policy.version,
                    "first_ranked_at": to_jsonable(job.first_ranked_at),
                    "versions": [_policy_dict(p) for p in versions]})
        return EXIT_OK
    first = job.first_ranked_at.isoformat(timespec="minutes") if job.first_ranked_at else "never"
    print(f"Scoring policy of job '{job.key}' ({job.title}); first ranked: {first}")
    for p in versions:
        _print_policy(p)
    return EXIT_OK


def _parse_weights(items: list[str]) -> dict[str, float]:
    weights: dict[str, float] = {}
    for item in items:
        name, sep, value = item.partition("=")
        name = name.strip()
        if not sep:
            raise BadInput(f"--weight {item!r}: expected NAME=VALUE, e.g. coverage=40")
        if name not in COMPONENT_NAMES:
            raise BadInput(f"--weight {item!r}: unknown weight name {name!r}; the names are {', '.join(COMPONENT_NAMES)}")
        try:
            weights[name] = float(value)
        except ValueError:
            raise BadInput(f"--weight {item!r}: {value!r} is not a number") from None
    return weights


def _split(text: str | None) -> list[str] | None:
    if text is None:
        return None
    return [x.strip() for x in text.split(",") if x.strip()]


def cmd_policy_set(args: argparse.Namespace) -> int:
    from vetting.appraisal.policy import with_changes

    weights = _parse_weights(args.weight)
    changes = dict(
        weights=weights or None,
        min_reliability=args.min_reliability,
        max_norm_age_years=args.max_norm_age,
        impact_ratio_floor=args.impact_floor,
        relevant_criteria=_split(args.criteria),
        relevant_job_families=_split(args.job_families),
    )
    if all(v is None for v in changes.values()):
        raise BadInput("policy set: nothing to change; give --weight NAME=VALUE or another rule option")
    with open_store(args) as store:
        job = store.job(args.job)
        with _engine_errors():
            new = with_changes(job.policy, **changes)
        saved = store.set_policy(args.job, new)
    changed = saved.version != job.policy.version
    if args.json:
        print_json({"job": args.job, "changed": changed, "policy": _policy_dict(saved)})
        return EXIT_OK
    print(f"job '{args.job}': " + ("new policy version" if changed else "no change (same rules as the current version)"))
    _print_policy(saved)
    return EXIT_OK


def cmd_policy_lock(args: argparse.Namespace) -> int:
    with open_store(args) as store:
        current = store.job(args.job).policy
        if current.locked:
            raise BadInput(
                f"job '{args.job}': policy version {current.version} is already locked "
                f"({current.locked_at.isoformat(timespec='minutes')}); set new rules to make a new version"
            )
        locked = store.lock_policy(args.job)
    if args.json:
        print_json({"job": args.job, "policy": _policy_dict(locked)})
        return EXIT_OK
    print(f"job '{args.job}': policy version {locked.version} locked at {locked.locked_at.isoformat(timespec='minutes')}")
    return EXIT_OK
