"""Gather what a memo needs from the records and the appraisal engine, and lay it out.

`gather()` reads the job, its policy history, every instrument in the catalogue and the audit
trail from the Store, asks the appraisal engine for the ranking, the cut-score plan, the sweep
of selection ratios and the evidence gaps, and computes the record fingerprint. `layout()`
turns that into the neutral document model (document.py); it formats the engine's figures and
never computes a figure of its own.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from typing import Any

from vetting.appraisal.types import (
    COMPONENT_NAMES,
    GATE_ORDER,
    CutPlan,
    GapReport,
    InstrumentAppraisal,
    PlanSweep,
    Ranking,
)
from vetting.memo import fmt
from vetting.memo import fingerprint as fpm
from vetting.memo.document import (
    BulletList,
    Callout,
    DistributionChart,
    Document,
    Facts,
    Figure,
    Paragraph,
    Section,
    SweepChart,
    Table,
)
from vetting.records.domain import Instrument, Job, Policy

NO_FIT = "No instrument is fit for use"

#: How many of the newest audit events of the records used the memo lists.
AUDIT_SHOWN = 200

#: Selection ratios shown in the planner table and chart (the planned ratio is added to them).
SWEEP_RATIOS = (0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9)

#: Cautions the memo adds to the engine's own (CAUTIONS in appraisal/types.py) so that every
#: item the issue lists is named in words (common practice, no published source).
MEMO_CAUTIONS = (
    "Give and score the test exactly as the publisher's manual sets out (standardised "
    "administration and scoring); results from non-standard conditions are not comparable "
    "with the norms.",
    "Check that the norm group resembles this job's applicants and is recent enough; old or "
    "unrelated norms can misplace the cut.",
)

LEGAL_NOTE = (
    "This memo records a professional judgement on the evidence listed. It does not replace "
    "advice under local employment law or the judgement of a licensed professional, and it "
    "should be reviewed with them before the test is used to decide about people."
)


class MemoError(ValueError):
    """A memo cannot be made as asked (bad choice, missing override...): exit status 2."""


@dataclass
class MemoData:
    job: Job
    policy: Policy
    policy_versions: list[Policy]
    instruments: list[Instrument]
    attribute_names: dict[str, str]
    ranking: Ranking
    chosen: InstrumentAppraisal | None
    chosen_instrument: Instrument | None
    override_reason: str | None
    plan: CutPlan | None
    plan_problem: str | None
    sweep: list[Any]  # PlanPoint per SWEEP_RATIOS (plus the planned ratio)
    sweep_problem: str | None
    distribution: Any  # (NormGroup, CutPlan) for the chart, or None
    gaps: dict[str, GapReport]
    audit: list[Any]  # the newest AUDIT_SHOWN audit events of the records used, oldest first
    audit_total: int  # how many audit events those records have in all
    fingerprint: fpm.Fingerprint
    by: str
    status: str
    written: dt.datetime
    as_of: dt.date
    warnings: list[str] = field(default_factory=list)


# ---------------------------------------------------------------------------------------------
# gathering
# ---------------------------------------------------------------------------------------------


def gather(
    store,
    job_key: str,
    *,
    choose: str | None = None,
    override: str | None = None,
    by: str | None = None,
    status: str = "draft",
    as_of: dt.date | None = None,
    now: dt.datetime | None = None,
    draws: int = 2000,
    seed: int = 0,
) -> MemoData:
    """Read the records and run the engine. Raises NotFound (unknown job or instrument),
    MemoError (a gate-failing choice without --override) or the engine's AppraisalError."""
    from vetting.appraisal.gaps import gap_report
    from vetting.appraisal.planner import plan as make_plan
    from vetting.appraisal.ranking import rank

    if status not in ("draft", "final"):
        raise MemoError(f"status must be draft or final, got {status!r}")
    now = now or dt.datetime.now(dt.timezone.utc)
    as_of = as_of or now.date()
    job = store.job(job_key)
    instruments = store.instruments()
    if choose is not None and choose not in {i.key for i in instruments}:
        store.instrument(choose)  # raises NotFound with the store's own message
    versions = store.policy_versions(job_key)
    attribute_names = {a.key: a.name for a in store.attributes()}

    first = job.first_ranked_at or now
    ranking = rank(job, instruments, draws=draws, seed=seed, as_of=as_of, first_ranked_at=first)

    if override is not None and not override.strip():
        raise MemoError("--override: give the reason in words (it is printed in the memo)")
    if choose is None:
        chosen = ranking.top
        if override is not None:
            raise MemoError("--override is only used together with --choose INSTRUMENT")
    else:
        chosen = ranking.result(choose)
        if chosen is not None and not chosen.eligible and override is None:
            failed = "; ".join(f"{g.name}: {g.reason}" for g in chosen.failed_gates)
            raise MemoError(
                f"--choose {choose}: this instrument fails the gate(s) {failed}. "
                "Choose an eligible instrument, or give --override \"REASON\" to choose it anyway "
                "(the memo will say so plainly)"
            )
        if chosen is not None and chosen.eligible and override is not None:
            override = None  # nothing to override: it passes every gate
    by_key = {i.key: i for i in instruments}
    chosen_inst = by_key.get(chosen.instrument) if chosen else None

    plan = plan_problem = sweep_problem = None
    sweep: list[Any] = []
    distribution = None
    if chosen_inst is not None:
        try:
            plan = make_plan(job, chosen_inst, as_of=as_of)
        except ValueError as exc:  # AppraisalError / PsychometricsError are ValueErrors
            plan_problem = str(exc)
        if plan is not None:
            ratios = sorted(set(SWEEP_RATIOS) | ({round(plan.selection_ratio, 4)} if plan.selection_ratio else set()))
            try:
                for sr in ratios:
                    sweep.append(make_plan(job, chosen_inst, selection_ratio=sr, norm_key=plan.norm, as_of=as_of))
            except ValueError as exc:
                sweep, sweep_problem = [], str(exc)
            norm = chosen_inst.norm(plan.norm) if plan.norm else None
            if norm is not None and plan.cut.raw is not None and plan.cut_band_raw is not None:
                distribution = (norm, plan)

    gaps = {i.key: gap_report(i, job=job, policy=job.policy, as_of=as_of) for i in instruments}

    # the audit events of the records used, in batched reads (oldest first): the memo shows the
    # newest AUDIT_SHOWN of them and says how many there are in all
    used = {"jobs": [job_key], "instruments": [i.key for i in instruments]}
    audit = list(store.audit_events_for(**used, last=AUDIT_SHOWN))
    audit_total = store.audit_event_count_for(**used)

    fp = fpm.compute(job, job.policy, instruments)
    return MemoData(
        job=job,
        policy=job.policy,
        policy_versions=versions,
        instruments=instruments,
        attribute_names=attribute_names,
        ranking=ranking,
        chosen=chosen,
        chosen_instrument=chosen_inst,
        override_reason=override if (chosen is not None and not chosen.eligible) else None,
        plan=plan,
        plan_problem=plan_problem,
        sweep=sweep,
        sweep_problem=sweep_problem,
        distribution=distribution,
        gaps=gaps,
        audit=audit,
        audit_total=audit_total,
        fingerprint=fp,
        by=by or getattr(store, "user", "") or "",
        status=status,
        written=now,
        as_of=as_of,
    )


# ---------------------------------------------------------------------------------------------
# layout
# ---------------------------------------------------------------------------------------------


def _attr(data: MemoData, key: str) -> str:
    name = data.attribute_names.get(key)
    return f"{name} ({key})" if name and name != key else key


def _pct_se(value: float) -> str:
    if value is None or value != value:
        return fmt.DASH
    if value >= 100:
        return "100% or more: the studies differ no more than sampling error alone would make them"
    return f"{value:.0f}%"


def _sentence(text: str) -> str:
    text = (text or "").strip()
    if not text:
        return ""
    text = text[0].upper() + text[1:]
    return text if text.endswith((".", "!", "?")) else text + "."


def decision_text(data: MemoData) -> str:
    if data.chosen is None:
        return NO_FIT
    return f"{data.chosen.title} ({data.chosen.instrument})"


def layout(data: MemoData) -> Document:
    job = data.job
    doc = Document(
        title=f"Decision memo: {job.title}",
        subtitle=(
            f"Test choice for job '{job.key}' · {fmt.date(data.as_of)} · {data.status.upper()} · "
            f"prepared by {data.by or 'unknown'}"
        ),
        author=data.by,
        status=data.status,
        date=fmt.date(data.as_of),
    )
    _header(doc, data)
    _purpose(doc, data)
    _rules(doc, data)
    _candidates(doc, data)
    _evidence(doc, data)
    _robustness(doc, data)
    _planned_use(doc, data)
    _cautions(doc, data)
    _gaps(doc, data)
    _record(doc, data)
    doc.stamp = fpm.to_stamp(
        data.fingerprint,
        status=data.status,
        decision=data.chosen.instrument if data.chosen else None,
        written=data.written.isoformat(timespec="seconds"),
        by=data.by,
    )
    return doc


# 1 ---------------------------------------------------------------------------------------------


def _header(doc: Document, data: MemoData) -> None:
    s = doc.section("decision", "1. Decision")
    r = data.ranking
    if data.chosen is None:
        s.add(
            Callout(
                "warning",
                f"Decision: {NO_FIT}",
                [
                    f"None of the {len(r.results)} instruments considered passes all six gates of "
                    f"policy version {fmt.text(r.policy_version)}. No test should be used for this job "
                    "until one that passes is found or the job's limits are reviewed.",
                ],
            )
        )
    else:
        c = data.chosen
        lines = [f"Score {fmt.score(c.score)} of 100 under policy version {fmt.text(r.policy_version)}."]
        if c.eligible and c.rank == 1:
            lines.append(f"It is the top-ranked of {len(r.eligible)} eligible instrument(s).")
        elif c.eligible:
            top = r.top
            lines.append(
                f"It ranks {c.rank} of {len(r.eligible)} eligible instruments; the top-ranked instrument is "
                f"{top.title} ({top.instrument}). It was chosen by the author over the top-ranked one."
            )
        s.add(Callout("decision", f"Decision: {decision_text(data)}", lines))
        if not c.eligible:
            failed = [f"{fmt.words(g.name)}: {g.reason}" for g in c.failed_gates]
            s.add(
                Callout(
                    "warning",
                    "Chosen against the rules (override)",
                    [
                        f"{c.title} FAILS {len(failed)} of the six gates set by the policy, so by the "
                        "rules it is not fit for use for this job. It was chosen anyway by "
                        f"{data.by or 'the author'}.",
                        *[f"Failed gate — {f}" for f in failed],
                        f"Reason given for the override: {data.override_reason}",
                    ],
                )
            )
    s.add(
        Facts(
            [
                ("Job", f"{data.job.title} ({data.job.key})"),
                ("Date", fmt.date(data.as_of)),
                ("Author", fmt.text(data.by)),
                ("Decision", decision_text(data)),
                ("Status", data.status + (" (recorded as a decision)" if data.status == "final" else " (not yet a decision)")),
                ("Policy version", fmt.text(r.policy_version)),
                ("Record fingerprint", data.fingerprint.value),
            ]
        )
    )


# 2 ---------------------------------------------------------------------------------------------


def _purpose(doc: Document, data: MemoData) -> None:
    job = data.job
    s = doc.section("job", "2. Purpose and the job")
    s.add(
        Paragraph(
            f"This memo records which off-the-shelf test is to be used to select applicants for the job "
            f"'{job.title}', on what evidence and by which rules, so that a reader who was not involved "
            "can follow and check the choice."
        )
    )
    s.add(Facts([("Job analysis source", fmt.text(job.analysis_source))]))
    rows = [
        [
            _attr(data, req.attribute),
            str(req.importance),
            "critical" if req.critical else "",
        ]
        for req in job.requirements
    ]
    s.add(Table(["Required attribute", "Importance (1-5)", "Critical"], rows, caption="Required attributes", numeric={1}))
    s.add(
        Facts(
            [
                ("Testing time budget", f"{fmt.g(job.time_budget_minutes)} minutes" if job.time_budget_minutes is not None else fmt.DASH),
                ("Applicants' reading grade", fmt.g(job.applicant_reading_grade)),
                ("Budget per applicant", fmt.g(job.budget_per_applicant)),
                ("Qualification of testing staff", fmt.text(job.staff_qualification)),
                ("Applicants per year", fmt.text(job.applicants_per_year)),
                ("Hires per year", fmt.text(job.hires_per_year)),
                ("Selection ratio (hires ÷ applicants)", fmt.r2(data.ranking.selection_ratio)),
                ("Base rate (share of hires who succeed without the test)", fmt.r2(job.base_rate)),
            ]
        )
    )


# 3 ---------------------------------------------------------------------------------------------


def _rules(doc: Document, data: MemoData) -> None:
    r, p = data.ranking, data.policy
    s = doc.section("rules", "3. Rules")
    if r.locked_before_first_ranking:
        lock = (
            f"Policy version {fmt.text(r.policy_version)} was locked at {fmt.date(r.policy_locked_at)}, before the "
            f"job was first ranked ({fmt.date(r.first_ranked_at)}): the rules were fixed before any result was seen."
        )
        kind = "note"
    elif r.policy_locked:
        lock = (
            f"Policy version {fmt.text(r.policy_version)} was locked at {fmt.date(r.policy_locked_at)}, AFTER the job "
            f"was first ranked ({fmt.date(r.first_ranked_at)}): the rules may have been set with results in view."
        )
        kind = "warning"
    else:
        lock = (
            f"Policy version {fmt.text(r.policy_version)} is NOT locked: the rules were not fixed before results were "
            f"seen (first ranking {fmt.date(r.first_ranked_at)})."
        )
        kind = "warning"
    s.add(Callout(kind, "When the rules were fixed", [lock]))
    s.add(
        Facts(
            [
                ("Minimum reliability", fmt.r2(p.min_reliability)),
                ("Oldest norms allowed", f"{p.max_norm_age_years} years"),
                ("Impact-ratio floor", fmt.r2(p.impact_ratio_floor)),
                ("Criteria counted as relevant", ", ".join(p.relevant_criteria) or "all"),
                ("Job families counted as relevant", ", ".join(p.relevant_job_families) or "all"),
            ]
        )
    )
    gate_rules = {
        "job_relatedness": "measures at least one required attribute",
        "validity_evidence": "at least one validity study on record",
        "reliability": f"reliability used is at least {fmt.r2(p.min_reliability)}",
        "reading_level": "reading grade at most the applicants' grade (unknown: passes with a warning)",
        "time": "testing minutes within the time budget",
        "qualification": "required user qualification at most the staff's (open < trained < licensed)",
    }
    s.add(Table(["Gate", "Rule"], [[fmt.words(g), gate_rules.get(g, "")] for g in GATE_ORDER], caption="Gates (all must pass)"))
    s.add(
        Table(
            ["Component", "Policy weight", "Share of the score"],
            [[fmt.words(n), fmt.g(p.weights.get(n, 0.0)), fmt.pct(r.weights.get(n))] for n in COMPONENT_NAMES],
            caption="Weights of the scored components",
            numeric={1, 2},
        )
    )
    if len(data.policy_versions) > 1:
        s.add(
            Table(
                ["Version", "Created", "Locked"],
                [[fmt.text(v.version), fmt.date(v.created_at), fmt.date(v.locked_at)] for v in data.policy_versions],
                caption="Policy history (every version stays on record)",
                numeric={0},
            )
        )


# 4 ---------------------------------------------------------------------------------------------


def _candidates(doc: Document, data: MemoData) -> None:
    r = data.ranking
    s = doc.section("candidates", "4. Candidates considered")
    s.add(
        Paragraph(
            f"{len(r.results)} instrument(s) were considered; {len(r.eligible)} pass all six gates. "
            "PASS/FAIL is written out so that the table reads the same in black and white."
        )
    )
    rows = []
    for res in r.results:
        rows.append([f"{res.title} ({res.instrument})"] + [res.gates[g].symbol if g in res.gates else fmt.DASH for g in GATE_ORDER] + ["yes" if res.eligible else "no"])
    s.add(Table(["Instrument"] + [fmt.words(g) for g in GATE_ORDER] + ["Eligible"], rows, caption="Gate results"))
    failures = [
        f"{res.title} ({res.instrument}) — {fmt.words(g.name)}: {g.reason}" for res in r.results for g in res.failed_gates
    ]
    if failures:
        sub = s.sub("failures", "Reasons for each gate failure")
        sub.add(BulletList(failures))
    ranked = [res for res in r.results if res.eligible]
    sub = s.sub("ranking", "Ranking of the eligible instruments")
    if ranked:
        sub.add(
            Table(
                ["Rank", "Instrument", "Score"] + [fmt.words(n) for n in COMPONENT_NAMES] + ["P(first)"],
                [
                    [fmt.text(res.rank), f"{res.title} ({res.instrument})", fmt.score(res.score)]
                    + [fmt.r2(res.components[n].value) if n in res.components else fmt.DASH for n in COMPONENT_NAMES]
                    + [fmt.pct(res.p_best)]
                    for res in ranked
                ],
                caption="Component scores (0 to 1) and the weighted score (0 to 100); — means no evidence, counted as 0",
                numeric={0, 2, 3, 4, 5, 6, 7, 8, 9},
            )
        )
    else:
        sub.add(Paragraph("No instrument passed every gate, so none is ranked."))
    warn_rows = [[f"{res.instrument}", w.text] for res in r.results for w in res.warnings]
    if warn_rows:
        sub = s.sub("warnings", "Warnings raised by the appraisal")
        sub.add(Table(["Instrument", "Warning"], warn_rows))


# 5 ---------------------------------------------------------------------------------------------


def _evidence(doc: Document, data: MemoData) -> None:
    s = doc.section("evidence", "5. Evidence for the chosen instrument")
    inst, res = data.chosen_instrument, data.chosen
    if inst is None or res is None:
        s.add(Paragraph("No instrument was chosen, so there is no evidence to summarise here. Section 4 lists why each candidate failed."))
        return
    s.add(
        Facts(
            [
                ("Instrument", f"{inst.title} ({inst.key})"),
                ("Publisher", fmt.text(inst.publisher)),
                ("Edition / year", f"{fmt.text(inst.edition)} / {fmt.text(inst.year)}"),
                ("Testing time", f"{fmt.g(inst.minutes)} minutes"),
                ("Modes", ", ".join(inst.mode) or fmt.DASH),
                ("Reading grade", fmt.g(inst.reading_grade)),
                ("Cost per applicant", f"{fmt.g(inst.cost_per_applicant)} {inst.currency or ''}".strip()),
                ("User qualification", fmt.text(inst.user_qualification)),
                ("Measures", "; ".join(f"{_attr(data, m.attribute)} ({m.fit})" for m in inst.measures)),
                ("Accommodations offered", "; ".join(inst.accommodations) or "none recorded"),
                ("Languages", ", ".join(inst.languages) or fmt.DASH),
            ]
        )
    )
    # reliability
    sub = s.sub("reliability", "Reliability")
    sub.add(
        Table(
            ["Type", "Value", "N", "Interval (days)", "Sample", "Source"],
            [
                [x.type, fmt.r2(x.value), fmt.text(x.n), fmt.text(x.interval_days), fmt.text(x.sample), fmt.text(x.source)]
                for x in inst.reliability
            ],
            numeric={1, 2, 3},
        )
    )
    used = res.reliability_used
    facts = [("Figure used", used.why)]
    if data.plan is not None:
        facts.append(("SEM (raw points)", fmt.num(data.plan.sem_raw, 2)))
        facts.append(("Norm group for the SEM", fmt.text(data.plan.norm_text or data.plan.norm)))
    sub.add(Facts(facts))
    # validity
    sub = s.sub("validity", "Validity studies and their synthesis")
    v = res.validity
    studies = sorted(v.studies_used + v.studies_excluded, key=lambda st: st.index)
    sub.add(
        Table(
            ["Criterion", "r", "N", "Design", "Job family", "Source", "Used"],
            [
                [
                    st.criterion,
                    fmt.r2(st.r),
                    fmt.whole(st.n),
                    st.design,
                    fmt.text(st.job_family),
                    fmt.text(st.source),
                    "yes" if st.used else f"no: {st.reason}",
                ]
                for st in studies
            ],
            numeric={1, 2},
        )
    )
    meta = v.meta
    facts = [("Studies used", f"k = {v.k}, total N = {fmt.whole(v.total_n)}")]
    if meta is not None:
        facts += [
            ("Mean r (sample-size weighted)", fmt.r2(meta.mean_r)),
            ("80% credibility interval", fmt.interval(meta.credibility_80)),
            ("95% confidence interval of the mean r", fmt.interval(meta.confidence_95)),
            ("Variance explained by sampling error", _pct_se(meta.pct_variance_sampling_error)),
        ]
    elif v.k == 1:
        facts.append(("Single study", "one study only: no synthesis; the conservative figure is its lower 95% confidence limit"))
    facts += [("Conservative validity used", fmt.r2(v.conservative)), ("Rule", fmt.text(v.rule))]
    sub.add(Facts(facts))
    if "validity" in res.components:
        sub.add(Paragraph(f"Validity component: {res.components['validity'].raw_text}.", style="small"))
    # norms
    from vetting.appraisal.components import norm_age, occupation_match

    sub = s.sub("norms", "Norm groups")
    max_age = data.policy.max_norm_age_years
    rows = []
    for n in inst.norms:
        age = norm_age(n, data.as_of)
        rows.append(
            [
                n.key,
                n.group,
                str(n.year),
                f"{age} ({'within' if age <= max_age else 'older than'} the {max_age} allowed)",
                fmt.whole(n.n),
                n.scope,
                fmt.text(n.occupation) + f" ({occupation_match(n, data.job, data.policy)})",
                fmt.num(n.mean, 1),
                fmt.num(n.sd, 1),
            ]
        )
    sub.add(
        Table(
            ["Key", "Group", "Year", "Age (years)", "N", "Scope", "Occupation", "Mean", "SD"],
            rows,
            numeric={2, 4, 7, 8},
        )
        if rows
        else Paragraph("No norm group is recorded.")
    )
    if "norms" in res.components:
        sub.add(Paragraph(f"Norms component: {res.components['norms'].raw_text}.", style="small"))
    # subgroup differences
    sub = s.sub("subgroups", "Subgroup differences")
    if inst.subgroup_differences:
        sub.add(
            Table(
                ["Groups compared", "d", "N", "Source"],
                [[x.groups, fmt.r2(x.d), fmt.text(x.n), fmt.text(x.source)] for x in inst.subgroup_differences],
                numeric={1, 2},
            )
        )
    else:
        sub.add(Paragraph("No subgroup difference is recorded: adverse impact cannot be estimated in advance and must be monitored from the first applicants."))
    sub.add(Facts([("Expected impact ratio at the job's selection ratio", fmt.r2(res.impact_ratio))]))
    # reviews
    sub = s.sub("reviews", "Independent reviews")
    if inst.reviews:
        sub.add(
            Table(
                ["Date", "By", "Stance", "Note", "Source"],
                [[fmt.date(x.date), x.by, x.stance, x.note, fmt.text(x.source)] for x in inst.reviews],
            )
        )
    else:
        sub.add(Paragraph("No review is recorded."))
    # sample copy
    sub = s.sub("sample-copy", "Sample-copy checks")
    sc = inst.sample_copy
    if sc is None:
        sub.add(Paragraph("No sample copy was requested or checked."))
    else:
        sub.add(
            Facts(
                [
                    ("Requested", fmt.date(sc.requested)),
                    ("Received", fmt.date(sc.received)),
                    ("Checked by", fmt.text(sc.checked_by)),
                ]
            )
        )
        if sc.checks:
            sub.add(Table(["Item checked", "Result", "Note"], [[c.item, c.result.upper(), fmt.text(c.note)] for c in sc.checks]))


# 6 ---------------------------------------------------------------------------------------------


def _robustness(doc: Document, data: MemoData) -> None:
    r = data.ranking
    rb = r.robustness
    s = doc.section("robustness", "6. Robustness and alternatives")
    if not r.eligible:
        s.add(Paragraph("No instrument is eligible, so there is no choice whose robustness could be tested."))
        return
    s.add(Paragraph(f"Method: {rb.method}.", style="small"))
    s.add(
        Table(
            ["Instrument", "Probability of ranking first"],
            [[f"{res.title} ({res.instrument})", fmt.pct(rb.p_best.get(res.instrument))] for res in r.eligible],
            numeric={1},
        )
    )
    flip = rb.smallest_flip
    if flip is None:
        s.add(Paragraph("No change of a single weight would change the top choice."))
    else:
        s.add(
            Paragraph(
                f"Smallest single weight change that changes the top choice: {fmt.words(flip.weight)} from "
                f"{fmt.g(round(flip.from_value, 4))} to {fmt.num(flip.to_value, 2)} (a change of {fmt.num(flip.change, 2)} "
                f"in the policy's units); beyond it {flip.new_top} would rank first."
            )
        )
    flip_rows = [
        [fmt.words(name), fmt.num(f.change, 2), f.new_top] if f is not None else [fmt.words(name), "no change flips it", fmt.DASH]
        for name, f in rb.flips.items()
    ]
    if flip_rows:
        s.add(Table(["Weight", "Change needed", "New top choice"], flip_rows, caption="Per weight", numeric={1}))
    alt = r.alternatives
    sub = s.sub("alternatives", "Alternatives with less expected adverse impact")
    sub.add(Paragraph(alt.rule, style="small"))
    if alt.alternatives:
        sub.add(
            Table(
                ["Instrument", "Conservative validity", "Validity difference", "Expected impact ratio", "Impact ratio gain", "Score", "Why"],
                [
                    [
                        f"{a.title} ({a.instrument})",
                        fmt.r2(a.conservative_validity),
                        fmt.r2(a.validity_difference),
                        fmt.r2(a.impact_ratio),
                        fmt.r2(a.impact_ratio_gain),
                        fmt.score(a.score),
                        a.reason,
                    ]
                    for a in alt.alternatives
                ],
                numeric={1, 2, 3, 4, 5},
            )
        )
        if data.chosen is not None and data.chosen.instrument == alt.top:
            sub.add(
                Callout(
                    "warning",
                    "Alternatives exist",
                    ["The instrument(s) above are about as valid and expected to have less adverse impact; the reasons for not choosing them should be on file."],
                )
            )
    else:
        sub.add(Paragraph(("No alternative of substantially equal validity with less expected adverse impact was found. " + _sentence(alt.note)).strip()))


# 7 ---------------------------------------------------------------------------------------------


def _planned_use(doc: Document, data: MemoData) -> None:
    s = doc.section("planned-use", "7. Planned use")
    plan = data.plan
    if data.chosen_instrument is None:
        s.add(Paragraph("No instrument was chosen, so no cut score is planned."))
        return
    if plan is None:
        s.add(Callout("warning", "No cut-score plan", [f"The planner could not plan a cut: {data.plan_problem}"]))
        return
    cut = plan.cut
    s.add(
        Facts(
            [
                ("Selection ratio", fmt.r2(plan.selection_ratio)),
                ("Norm group", fmt.text(plan.norm_text or plan.norm)),
                ("Why this norm group", fmt.text(plan.norm_reason)),
                ("Cut (raw score)", fmt.num(cut.raw, 1)),
                ("Cut (z / T / stanine / percentile)", f"{fmt.r2(cut.z)} / {fmt.num(cut.t, 1)} / {cut.stanine} / {fmt.num(cut.percentile, 1)}"),
                ("SEM (raw points)", fmt.num(plan.sem_raw, 2)),
                (f"{fmt.pct(plan.confidence, 0)} band around the cut (raw)", fmt.band(plan.cut_band_raw)),
                ("Validity used", fmt.r2(plan.validity_used)),
                ("Base rate", fmt.r2(plan.base_rate)),
                ("Expected success rate of those hired", fmt.pct(plan.expected_success_rate)),
                ("Mean criterion gain of those hired (z)", fmt.r2(plan.mean_criterion_z)),
                ("Utility of one year's hiring (money units of the job's criterion SD)", fmt.money(plan.utility_per_year)),
                ("Expected impact ratio", fmt.r2(plan.impact_ratio)),
            ]
        )
    )
    s.add(
        Paragraph(
            "Treat applicants whose scores fall inside the band as not reliably different from the cut; "
            "decide about them on other job-related information rather than on the single point."
        )
    )
    if data.sweep:
        table = Table(
            ["Selection ratio", "Cut (raw)", "Cut (percentile)", "Expected success rate", "Expected impact ratio", "Utility per year"],
            [
                [
                    fmt.r2(pt.selection_ratio),
                    fmt.num(pt.cut.raw, 1),
                    fmt.num(pt.cut.percentile, 1),
                    fmt.pct(pt.expected_success_rate),
                    fmt.r2(pt.impact_ratio),
                    fmt.money(pt.utility_per_year),
                ]
                for pt in data.sweep
            ],
            caption="Across selection ratios",
            numeric={0, 1, 2, 3, 4, 5},
        )
        if any(pt.expected_success_rate is not None for pt in data.sweep):
            chart = SweepChart(
                selection_ratios=[pt.selection_ratio for pt in data.sweep],
                success_rates=[pt.expected_success_rate for pt in data.sweep],
                impact_ratios=[pt.impact_ratio for pt in data.sweep],
                base_rate=plan.base_rate,
                planned_ratio=plan.selection_ratio,
                impact_floor=data.policy.impact_ratio_floor,
                instrument=data.chosen_instrument.title,
            )
            s.add(Figure(chart, "Expected success rate and expected impact ratio across selection ratios", table))
        else:
            s.add(table)
    elif data.sweep_problem:
        s.add(Paragraph(f"The sweep across selection ratios could not be made: {data.sweep_problem}", style="small"))
    if data.distribution is not None:
        norm, p = data.distribution
        lo, hi = p.cut_band_raw
        chart = DistributionChart(
            mean=norm.mean, sd=norm.sd, cut_raw=p.cut.raw, band_low=lo, band_high=hi,
            norm_label=f"{norm.group} ({norm.year})", instrument=data.chosen_instrument.title,
        )
        table = Table(
            ["Norm mean", "Norm SD", "Cut (raw)", "Band low", "Band high"],
            [[fmt.num(norm.mean, 1), fmt.num(norm.sd, 1), fmt.num(p.cut.raw, 1), fmt.num(lo, 1), fmt.num(hi, 1)]],
            numeric={0, 1, 2, 3, 4},
        )
        s.add(Figure(chart, "Score distribution of the norm group (normal model) with the cut and its SEM band", table))
    for w in plan.warnings:
        s.add(Paragraph(f"Planner warning: {w.text}", style="small"))
    sub = s.sub("monitoring", "What to monitor")
    items = [
        "Adverse impact on actual pass rates: compare each group's pass rate with the highest group's; "
        f"a ratio below four-fifths (0.80) is the usual signal of adverse impact (Uniform Guidelines 1978, "
        f"section 4D). The policy's floor is {fmt.r2(data.policy.impact_ratio_floor)}.",
    ]
    lv = plan.local_validation
    if lv is not None:
        items.append(f"A local validation study: {lv.text}.")
    else:
        items.append("A local validation study relating test scores to job performance once enough people have been hired.")
    items.append("Score distributions of applicants against the norm group used, to see whether the cut behaves as planned.")
    sub.add(BulletList(items))


# 8 ---------------------------------------------------------------------------------------------


def _cautions(doc: Document, data: MemoData) -> None:
    s = doc.section("cautions", "8. Cautions")
    s.add(BulletList(list(data.ranking.cautions) + list(MEMO_CAUTIONS)))
    s.add(Callout("warning", "Not legal or licensed professional advice", [LEGAL_NOTE]))


# 9 ---------------------------------------------------------------------------------------------


def _gaps(doc: Document, data: MemoData) -> None:
    s = doc.section("gaps", "9. Evidence gaps still open")
    order = ([data.chosen.instrument] if data.chosen else []) + [
        r.instrument for r in data.ranking.results if not data.chosen or r.instrument != data.chosen.instrument
    ]
    rows = []
    for key in order:
        rep = data.gaps.get(key)
        if rep is None:
            continue
        label = f"{rep.title} ({key})" + (" — chosen" if data.chosen and key == data.chosen.instrument else "")
        if rep.gaps:
            rows += [[label, g.text] for g in rep.gaps]
        else:
            rows.append([label, "none found"])
    s.add(Table(["Instrument", "Still to ask the publisher for"], rows))
    if data.chosen is not None:
        rep = data.gaps.get(data.chosen.instrument)
        if rep is not None and rep.gaps:
            sub = s.sub("letter", "Request to the publisher (draft)")
            sub.add(BulletList([g.request or g.text for g in rep.gaps]))


def _record(doc: Document, data: MemoData) -> None:
    s = doc.section("record", "10. Record fingerprint and audit trail")
    fp = data.fingerprint
    s.add(
        Paragraph(
            "The fingerprint is a SHA-256 digest over the exact records this memo used: the job profile, the policy "
            "version with its rules, and every instrument considered with all its evidence (canonical JSON, keys sorted, "
            "ISO dates). Anyone can check later whether those records changed with: vetting verify THIS-FILE"
        )
    )
    s.add(Facts([("Fingerprint", fp.value), ("Job", fp.job), ("Policy version", fmt.text(fp.policy_version))]))
    s.add(Table(["Record", "SHA-256"], [[name, digest] for name, digest in sorted(fp.records.items())], caption="Records used"))
    events = data.audit[-AUDIT_SHOWN:]
    rows = [[fmt.date(e.at), e.who, e.action, f"{e.entity} {e.key}"] for e in events]
    sub = s.sub("audit", "Audit events for these records")
    if data.audit_total > len(events):
        sub.add(Paragraph(f"The last {len(events)} of {data.audit_total} events are shown.", style="small"))
    sub.add(Table(["When (UTC)", "Who", "Action", "Record"], rows) if rows else Paragraph("No audit event is recorded."))
