"""Every instrument's appraisal for one job in one pass: what rank() writes for each instrument.

`appraise_all` gives, for each instrument, exactly what `ranking._appraisal` gives it (the gates
with their reasons, the six components with their words, the warnings, the validity synthesis,
the reliability used and the expected impact ratio, then the score): the same rules, the same
arithmetic in the same order and the same sentences. What it saves:

- what depends only on the job is worked out once per ranking (its limits, budgets and policy
  minimum in words, the qualification gate of each level, each norm occupation's match, the
  words of each synthesis rule and of each reliability choice's reason);
- what depends on one value of an instrument and on the job is kept per value (reliability type
  and figure, reading grade, minutes, cost, impact ratio with its d), and coverage with the
  job-relatedness reason per set of required attributes measured (most instruments measure
  none of a job's attributes);
- each instrument's reliability choice, worst subgroup difference and study totals are worked
  out once where several gates and components use them, and everything is written in one
  function instead of one call per gate and component.

Uncommon cases (a reliability type outside the preferred tiers, an unknown selection ratio)
take the plain functions themselves. tests/appraisal/test_batch_appraisal.py pins every field,
to the bit, against the plain path.
"""
from __future__ import annotations

import datetime as dt
import math

import numpy as np

from vetting.appraisal import components as comp
from vetting.appraisal.gates import RELIABILITY_TIERS, _reliability_order, choose_reliability, gate_qualification
from vetting.appraisal.types import (
    COMPONENT_NAMES,
    AppraisalWarning,
    Component,
    GateResult,
    ReliabilityUsed,
    StudyUse,
    ValidityDetail,
)
from vetting.records.domain import Instrument, Job

# appraise_all names the components one by one, in this order (the order of the score's sum)
assert COMPONENT_NAMES == ("coverage", "validity", "reliability", "norms", "fairness", "practicality")

_TIER = {t: i for i, tier in enumerate(RELIABILITY_TIERS) for t in tier}
_NO_TIER = len(RELIABILITY_TIERS)
_PREFERRED = ": a retest/alternate-form figure is preferred for selection use"
_NEXT = ": no retest or alternate-form figure is recorded, so the next preferred kind is used"
_SEVERAL = "; of several figures of this kind, the one from the largest sample (then the lower) is used"
_RETEST = ("retest", "alternate")
_PLAIN = (float, int)  # the kinds of number whose figures are kept per value (see appraise_all)



def _budget_part(value: float, budget: float, slope: float) -> float:
    """Practicality's part for `value` (minutes or cost) against `budget`: the plain form's
    clip(1 - slope x value / budget, 0, 1), written with the same comparisons (nan and -0.0
    give 0, as there)."""
    if budget <= 0:
        return 1.0 if value <= 0 else 0.0
    x = value / budget
    x = 1.0 - slope * x if not x > 1 else 0.0
    return (x if x < 1.0 else 1.0) if x > 0.0 else 0.0

def validity_details(instruments: list[Instrument], policy, ctx: comp.JobContext) -> list[ValidityDetail]:
    """`components.validity_details` with the study choice written inline (the same reasons,
    the same grouped engine call, each detail made once with its figures)."""
    return _validity(instruments, policy, ctx)[0]


def _validity(instruments: list[Instrument], policy, ctx: comp.JobContext) -> tuple[list[ValidityDetail], list[tuple]]:
    """validity_details, and for each instrument the total N of all its studies, the total N
    of the studies used and whether every study used has N < SMALL_STUDY_N (added in the
    studies' order, as the gate and the component add them)."""
    from vetting.psychometrics import validity as pv

    criteria, families = ctx.criteria, ctx.families
    designs = comp.CRITERION_DESIGNS
    small = comp.SMALL_STUDY_N
    not_criterion: dict = {}  # a design that gives no validity coefficient -> the reason
    splits = []
    sums = []
    rs, ns, sizes = [], [], []  # the studies used, for the grouped engine call
    for instrument in instruments:
        used, excluded = [], []
        n_all = n_used = 0
        all_small = True
        for i, s in enumerate(instrument.validity):
            n = s.n
            n_all += n
            design = s.design
            if design not in designs:
                reason = not_criterion.get(design)
                if reason is None:
                    reason = not_criterion[design] = f"{design} study: not a criterion-related validity coefficient"
            elif criteria is not None and (s.criterion is None or s.criterion.strip().lower() not in criteria):
                reason = f"criterion '{s.criterion}' is not marked relevant for this job"
            elif families is not None and (s.job_family is None or s.job_family.strip().lower() not in families):
                reason = (
                    "job family not stated" if s.job_family is None
                    else f"job family '{s.job_family}' is not marked relevant for this job"
                )
            elif n < 4:
                reason = f"sample too small to use (N = {n})"
            else:
                r_signed = s.r_signed
                used.append(StudyUse(
                    i, s.criterion, s.r, r_signed, n, s.job_family, design, s.source, True,
                    "used (sign reversed: lower criterion is better)" if s.lower_is_better else "used",
                ))
                rs.append(r_signed)
                ns.append(n)
                n_used += n
                if all_small and not n < small:
                    all_small = False
                continue
            excluded.append(StudyUse(i, s.criterion, s.r, s.r_signed, n, s.job_family, design, s.source, False, reason))
        splits.append((used, excluded))
        sums.append((n_all, n_used, all_small))
        if used:
            sizes.append(len(used))
    # components.synthesise's call, on the same figures in the same order
    grouped = pv.grouped_validity(np.array(rs, dtype=float), np.array(ns, dtype=float), sizes) if sizes else None
    details = []
    if grouped is None:
        for used, excluded in splits:
            details.append(ValidityDetail(None, None, "no relevant criterion-related study", None, used, excluded))
        return details, sums
    rule = pv.CONSERVATIVE_RULE + " (basis: "
    rules: dict = {}
    figures = zip(grouped.metas(), grouped.conservative.tolist(), grouped.basis.tolist(), grouped.floored.tolist())
    for used, excluded in splits:
        if not used:
            details.append(ValidityDetail(None, None, "no relevant criterion-related study", None, used, excluded))
            continue
        meta, value, basis, floored = next(figures)
        text = rules.get((basis, floored))
        if text is None:
            text = rules[basis, floored] = rule + basis + ("; floored at 0)" if floored else ")")
        details.append(ValidityDetail(meta, value, text, meta.se_mean_r, used, excluded))
    return details, sums


def appraise_all(job: Job, instruments: list[Instrument], weights: dict[str, float], as_of: dt.date,
                 ctx: comp.JobContext) -> list[tuple]:
    """For each instrument, `ranking._appraisal(job, instrument, weights, as_of, ratio, detail,
    ctx)`'s figures (score, gates, components, warnings, validity, reliability used, impact
    ratio), with the expected impact ratios and validity syntheses of all of them worked out
    in one vectorised and one grouped engine call, as rank() always did."""
    policy = job.policy
    if ctx.job is not job or ctx.policy is not policy:
        ctx = comp.JobContext(job)
    n_ins = len(instruments)
    # --- the job's side, once -----------------------------------------------------------
    w_cov, w_val, w_rb, w_norm, w_fair, w_prac = [weights[n] for n in COMPONENT_NAMES]
    missing = [(i, f"missing_{n}", f"{n}: no evidence, counted as 0 in the score")
               for i, n in enumerate(COMPONENT_NAMES) if weights.get(n, 0) > 0]
    required = [r.attribute for r in job.requirements]
    positions = ctx.positions
    requirements = ctx.requirements
    zero_words = ctx.zero_words
    critical = ctx.critical
    total = ctx.total_weight
    total_txt = f"{total:g}"
    unrelated = f"measures none of the job's required attributes ({', '.join(required) or 'none listed'})"
    minimum = policy.min_reliability
    min_txt = f"{minimum:.2f}"
    no_rel_gate = f"no reliability figure is recorded (policy minimum {min_txt})"
    limit = job.applicant_reading_grade
    limit_txt = None if limit is None else f"{limit:g}"
    budget = job.time_budget_minutes
    budget_txt = None if budget is None else f"{budget:g}"
    cost_budget = job.budget_per_applicant
    cost_budget_txt = None if cost_budget is None else f"{cost_budget:g}"
    plans: dict = {}  # the types of an instrument's reliability records -> _reliability_plan
    suffixes: dict = {}  # (tier, candidates, other types) -> the end of the reason
    quals: dict = {}  # user qualification -> (passed, reason, warning) of the qualification gate
    max_age = policy.max_norm_age_years
    too_old = f"every norm group is older than the policy allows ({max_age} years)"
    older = f" (older than the policy's {max_age} years)"
    year = as_of.year
    occupations: dict = {}  # a norm group's occupation -> its match with the job
    scope_credit = comp.SCOPE_CREDIT
    occ_credit = comp.OCCUPATION_CREDIT
    full_size = comp.NORM_FULL_SIZE
    sqrt = math.sqrt
    fit_credit = comp.FIT_CREDIT
    rel_zero = comp.RELIABILITY_ZERO
    rel_span = comp.RELIABILITY_FULL - comp.RELIABILITY_ZERO
    full_marks = comp.VALIDITY_FULL_MARKS
    small = comp.SMALL_STUDY_N
    slope = comp.PRACTICALITY_SLOPE
    sr = job.selection_ratio
    sr_known = sr is not None and 0 < sr <= 1
    sr_txt = f"{sr:.2f}" if sr_known else None
    floor = policy.impact_ratio_floor
    floor_txt = f"{floor:.2f}"
    cov_map, val_map, rel_map = comp.COVERAGE_MAPPING, comp.VALIDITY_MAPPING, comp.RELIABILITY_MAPPING
    norm_map, fair_map, prac_map = comp.NORMS_MAPPING, comp.FAIRNESS_MAPPING, comp.PRACTICALITY_MAPPING
    W = AppraisalWarning
    G = GateResult
    C = Component

    # --- the engine's grouped calls: impact ratios, validity syntheses --------------------
    worst = [max(ins.subgroup_differences, key=_d) if ins.subgroup_differences else None for ins in instruments]
    ratios: list = [None] * n_ins
    idx = [k for k, s in enumerate(worst) if s is not None]
    if sr_known and idx:
        from vetting.psychometrics import impact as pi

        values = np.atleast_1d(pi.expected_impact(np.array([worst[k].d for k in idx], dtype=float), sr)[1]).tolist()
        for k, value in zip(idx, values):
            ratios[k] = value
    details, sums = _validity(instruments, policy, ctx)

    # Figures that depend on one value of an instrument and on the job, kept per value: the
    # reliability type and figure, the reading grade, the minutes, the cost and currency, the
    # impact ratio with its d and groups. Only non-zero plain numbers (float or int) are looked
    # up: equal ones then give the same words and figures (an int is turned into the same
    # float), while 0.0 and -0.0 are equal keys that print differently, and another kind of
    # number (a numpy scalar, say) would give results of its own type.
    rel_figures: dict = {}
    coverage_figures: dict = {}
    read_figures: dict = {}
    time_figures: dict = {}
    cost_figures: dict = {}
    fair_figures: dict = {}

    def coverage_of(hits):
        # for the required attributes measured ((position, credit) in the job's order): the
        # job-relatedness reason, coverage's value and words, the critical attributes' warning
        got = 0.0
        parts = list(zero_words)
        for i, credit in hits:
            if not credit:
                continue
            attribute, weight, _, words = requirements[i]
            got += weight * credit
            parts[i] = words.get(credit) or f"{attribute} {credit:g}x{weight:g}"
        warning = None
        if critical:
            credits = {required[i]: credit for i, credit in hits}
            missing_critical = [a for a in critical if not credits.get(a)]
            if missing_critical:
                names = ", ".join(f"'{a}'" for a in missing_critical)
                warning = f"critical attribute(s) not measured: {names}"
        value = got / total if total > 0 else 0.0
        out = coverage_figures[hits] = (
            f"measures required attribute(s): {', '.join([required[i] for i, _ in hits])}", value,
            f"{got:g} of {total_txt} weighted points ({'; '.join(parts)})", warning,
        )
        return out

    def reliability_figures(rel_type, rel_value):
        # the figure in words, the reliability gate, the reliability component's value
        rel_txt = f"{rel_value:.2f}"
        if rel_value >= minimum:
            gate = (True, f"{rel_type} reliability {rel_txt} >= policy minimum {min_txt}")
        else:
            gate = (False, f"{rel_type} reliability {rel_txt} < policy minimum {min_txt}")
        x = (rel_value - rel_zero) / rel_span
        out = rel_figures[rel_type, rel_value] = (rel_txt, *gate, (x if x < 1.0 else 1.0) if x > 0.0 else 0.0)
        return out

    def reading_figures(grade):
        # the reading-level gate with both grades known
        if grade <= limit:
            out = (True, f"reading grade {grade:g} <= applicants' grade {limit_txt}")
        else:
            out = (False, f"reading grade {grade:g} > applicants' grade {limit_txt}")
        read_figures[grade] = out
        return out

    def minutes_figures(minutes):
        # the time gate (passed, reason, warning) and practicality's time part (value, words)
        min_words = f"{minutes:g}"
        if budget is None:
            out = (True, f"passes by default: {min_words} min, the job has no time budget",
                   "time not checked: the job has no time budget", None, None)
        else:
            if minutes <= budget:
                gate = (True, f"{min_words} min <= budget {budget_txt} min", None)
            else:
                gate = (False, f"{min_words} min > budget {budget_txt} min", None)
            out = (*gate, _budget_part(minutes, budget, slope), f"{min_words} of {budget_txt} min")
        time_figures[minutes] = out
        return out

    def money_figures(cost, currency):
        # practicality's cost part (value, words)
        part = _budget_part(cost, cost_budget, slope)
        cur = f" {currency}" if currency else ""
        out = cost_figures[cost, currency] = (part, f"cost {cost:g}{cur} of budget {cost_budget_txt}")
        return out

    def fairness_figures(ratio, d, groups):
        # the warning below the floor (or None), the fairness value and words
        ratio_txt = f"{ratio:.2f}"
        warn = (f"expected impact ratio {ratio_txt} is below the policy floor {floor_txt} at selection ratio {sr_txt}"
                if ratio < floor else None)
        out = fair_figures[ratio, d, groups] = (
            warn, (ratio if ratio < 1.0 else 1.0) if ratio > 0.0 else 0.0,
            f"expected impact ratio {ratio_txt} at selection ratio {sr_txt} (d = {d:.2f}, {groups})",
        )
        return out

    out = []
    for ins, sub, ratio, detail, (n_all, total_n, all_small) in zip(instruments, worst, ratios, details, sums):
        warnings = []
        # --- reliability used (gates.choose_reliability) --------------------------------
        records = ins.reliability
        rel_txt = None
        if not records:
            used_rel = ReliabilityUsed(None, None, None, "no reliability figure is recorded")
        else:
            types = tuple([r.type for r in records])
            plan = plans.get(types)
            if plan is None:
                plan = plans[types] = _reliability_plan(types)
            if plan is None:  # no record of a preferred type
                used_rel = choose_reliability(ins)
            else:
                t, cand = plan
                if len(cand) == 1:
                    best = records[cand[0]]
                elif len(cand) == 2:  # min(..., key=_reliability_order): the second only when smaller
                    best, other = records[cand[0]], records[cand[1]]
                    if (-(other.n or 0), other.value) < (-(best.n or 0), best.value):
                        best = other
                else:
                    best = min([records[i] for i in cand], key=_reliability_order)
                others = tuple([r.type for r in records if r is not best]) if len(records) > 1 else ()
                key = (t, len(cand), others)
                suffix = suffixes.get(key)
                if suffix is None:
                    suffix = suffixes[key] = (
                        (_PREFERRED if t == 0 else _NEXT) + (_SEVERAL if len(cand) > 1 else "")
                        + (f"; also recorded: {', '.join(sorted(set(others)))}" if others else "")
                    )
                rel_type, rel_value = best.type, best.value
                rc = rel_figures.get((rel_type, rel_value)) if rel_value and type(rel_value) in _PLAIN else None
                if rc is None:
                    rc = reliability_figures(rel_type, rel_value)
                rel_txt = rc[0]
                n = best.n
                why = f"{rel_type} reliability {rel_txt}" + (f" (N = {n})" if n else " (N not stated)") + suffix
                used_rel = ReliabilityUsed(rel_type, rel_value, n, why, best.source)
        rel_value = used_rel.value
        rel_type = used_rel.type
        if rel_value is not None and rel_txt is None:
            rc = reliability_figures(rel_type, rel_value)
            rel_txt = rc[0]

        # --- gates ----------------------------------------------------------------------
        # every attribute measured, with its best credit (0 for a fit without credit: such an
        # attribute counts for the job-relatedness gate but adds nothing to coverage)
        fits: dict[str, float] = {}
        for m in ins.measures:
            attribute = m.attribute
            credit = fit_credit.get(m.fit, 0.0)
            prev = fits.get(attribute)
            if prev is None or credit > prev:
                fits[attribute] = credit
        hits = [(i, credit) for attribute, credit in fits.items() for i in positions.get(attribute, ())]
        if len(hits) > 1:
            hits.sort()
        hits = tuple(hits)
        cv = coverage_figures.get(hits)
        if cv is None:
            cv = coverage_of(hits)
        if hits:
            g_rel = G("job_relatedness", True, cv[0])
        else:
            g_rel = G("job_relatedness", False, unrelated)
        studies = ins.validity
        if studies:
            g_val = G("validity_evidence", True, f"{len(studies)} validity record(s), total N = {n_all}")
        else:
            g_val = G("validity_evidence", False, "no validity study is recorded")
        if rel_value is None:
            g_rb = G("reliability", False, no_rel_gate)
        else:
            g_rb = G("reliability", rc[1], rc[2])
        grade = ins.reading_grade
        if grade is None or limit is None:
            missing_grade = "the material's reading grade" if grade is None else "the applicants' reading grade"
            if grade is None and limit is None:
                missing_grade = "both reading grades"
            text = f"reading level not checked: {missing_grade} unknown"
            g_read = G("reading_level", True, f"passes by default: {missing_grade} unknown", text)
            warnings.append(W("reading_level_not_checked", text))
        else:
            rd = read_figures.get(grade) if grade and type(grade) in _PLAIN else None
            if rd is None:
                rd = reading_figures(grade)
            g_read = G("reading_level", rd[0], rd[1])
        minutes = ins.minutes
        tm = time_figures.get(minutes) if minutes and type(minutes) in _PLAIN else None
        if tm is None:
            tm = minutes_figures(minutes)
        g_time = G("time", tm[0], tm[1], tm[2])
        if tm[2]:
            warnings.append(W("time_not_checked", tm[2]))
        need = ins.user_qualification
        q = quals.get(need)
        if q is None:
            g = gate_qualification(job, ins)
            q = quals[need] = (g.passed, g.reason, g.warning)
        g_qual = G("qualification", q[0], q[1], q[2])
        if q[2]:
            warnings.append(W("qualification_not_checked", q[2]))
        gates = {"job_relatedness": g_rel, "validity_evidence": g_val, "reliability": g_rb,
                 "reading_level": g_read, "time": g_time, "qualification": g_qual}

        # --- coverage -------------------------------------------------------------------
        if cv[3]:
            warnings.append(W("critical_attribute_not_measured", cv[3]))
        v_cov = cv[1]
        c_cov = C("coverage", v_cov, v_cov, cv[2], cov_map)

        # --- validity -------------------------------------------------------------------
        r = detail.conservative
        if r is None:
            n_ex = len(detail.studies_excluded)
            text = "no relevant criterion-related validity study" + (f" ({n_ex} excluded)" if n_ex else "")
            warnings.append(W("no_relevant_validity", text))
            v_val = None
            c_val = C("validity", None, None, text, val_map)
        else:
            x = r / full_marks
            v_val = (x if x < 1.0 else 1.0) if x > 0.0 else 0.0  # min(1.0, max(0.0, x))
            mean_r = detail.meta.mean_r  # a float: the detail was synthesised above
            raw_text = f"conservative r = {r:.3f} (k = {len(detail.studies_used)}, N = {total_n}"
            raw_text += f", mean r = {mean_r:.3f})"
            if all_small:
                warnings.append(W("validity_small_samples",
                                  f"every relevant validity study has N < {small} (total N = {total_n})"))
            c_val = C("validity", v_val, r, raw_text, val_map)

        # --- reliability ----------------------------------------------------------------
        if rel_value is None:
            v_rb = None
            c_rb = C("reliability", None, None, "no reliability figure recorded", rel_map)
            warnings.append(W("no_reliability", "no reliability figure is recorded"))
        else:
            v_rb = rc[3]
            n = used_rel.n
            c_rb = C("reliability", v_rb, rel_value, f"{rel_type} r = {rel_txt}" + (f" (N = {n})" if n else ""), rel_map)
            if rel_type not in _RETEST:
                warnings.append(W("no_retest_reliability", "no retest or alternate-form reliability is recorded"))

        # --- norms ----------------------------------------------------------------------
        norms = ins.norms
        if not norms:
            v_norm = None
            c_norm = C("norms", None, None, "no norm group recorded", norm_map)
            warnings.append(W("no_norms", "no norm group is recorded"))
        else:
            best_norm = None
            youngest = None
            for nm in norms:
                age = year - nm.year
                if not age > 0:  # max(0, age)
                    age = 0
                if youngest is None or age < youngest:
                    youngest = age
                occupation = nm.occupation
                occ = occupations.get(occupation)
                if occ is None:
                    occ = occupations[occupation] = comp.occupation_match(nm, job, policy, ctx)
                if age > max_age:
                    value = 0.0
                else:
                    x = 1.0 - age / max_age
                    size = nm.n
                    size = sqrt((0 if 0 > size else size) / full_size)
                    value = (((x if x < 1.0 else 1.0) if x > 0.0 else 0.0) + scope_credit.get(nm.scope, 0.0)
                             + (size if size < 1.0 else 1.0) + occ_credit[occ]) / 4.0
                if best_norm is None or (value, nm.n, nm.year) > (v_norm, best_norm.n, best_norm.year):
                    best_norm, v_norm, b_age, b_occ = nm, value, age, occ
            if youngest > max_age:
                warnings.append(W("norms_too_old", too_old))
            words = f"best group '{best_norm.key}': {b_age} years old, {best_norm.scope}, n = {best_norm.n}, occupation {b_occ}"
            if b_age > max_age:
                words += older
            c_norm = C("norms", v_norm, v_norm, words, norm_map)

        # --- fairness -------------------------------------------------------------------
        if sub is None:
            v_fair = None
            c_fair = C("fairness", None, None, "no subgroup difference recorded", fair_map)
            warnings.append(W("no_subgroup_data", "no subgroup difference (d) is recorded; adverse impact cannot be estimated"))
        elif not sr_known:
            c_fair, w, ratio = comp.fairness_component(job, ins, policy)
            v_fair = c_fair.value
            warnings += w
        else:
            d = sub.d
            groups = sub.groups
            fr = fair_figures.get((ratio, d, groups)) if ratio and d and type(d) in _PLAIN else None
            if fr is None:
                fr = fairness_figures(ratio, d, groups)
            if fr[0]:
                warnings.append(W("impact_below_floor", fr[0]))
            v_fair = fr[1]
            c_fair = C("fairness", v_fair, ratio, fr[2], fair_map)

        # --- practicality ---------------------------------------------------------------
        if budget is not None:
            prac, words = [tm[3]], [tm[4]]
        else:
            prac, words = [], []
        if cost_budget is not None:
            cost = ins.cost_per_applicant
            if cost is None:
                warnings.append(W("cost_unknown", "the cost per applicant is not recorded"))
            else:
                currency = ins.currency
                cs = cost_figures.get((cost, currency)) if cost and type(cost) in _PLAIN else None
                if cs is None:
                    cs = money_figures(cost, currency)
                prac.append(cs[0])
                words.append(cs[1])
        if prac:
            v_prac = sum(prac) / len(prac)
            c_prac = C("practicality", v_prac, v_prac, "; ".join(words), prac_map)
        else:
            warnings.append(W("no_budgets", "practicality cannot be scored: no time or cost budget (or no cost) recorded"))
            v_prac = None
            c_prac = C("practicality", None, None, "no budget to compare against", prac_map)

        if v_cov is None or v_val is None or v_rb is None or v_norm is None or v_fair is None or v_prac is None:
            values = (v_cov, v_val, v_rb, v_norm, v_fair, v_prac)
            for i, code, text in missing:
                if values[i] is None:
                    warnings.append(W(code, text))
        # the plain path's sum(), over the same products in the same order
        score = 100.0 * sum((w_cov * (v_cov or 0.0), w_val * (v_val or 0.0), w_rb * (v_rb or 0.0),
                             w_norm * (v_norm or 0.0), w_fair * (v_fair or 0.0), w_prac * (v_prac or 0.0)))
        components = {"coverage": c_cov, "validity": c_val, "reliability": c_rb,
                      "norms": c_norm, "fairness": c_fair, "practicality": c_prac}
        out.append((score, gates, components, warnings, detail, used_rel, ratio))
    return out


def _reliability_plan(types: tuple) -> tuple | None:
    """The preferred tier of these reliability types (gates._reliability_choice) and the
    positions of its records; None when no type is in a preferred tier."""
    tiers = [_TIER.get(t, _NO_TIER) for t in types]
    t = min(tiers)
    if t == _NO_TIER:
        return None
    return t, tuple([i for i, ti in enumerate(tiers) if ti == t])


def _d(s) -> float:
    return s.d
