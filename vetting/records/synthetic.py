"""Synthetic catalogues of any size, for benchmarks and scale tests.

`generate_catalogue(n_instruments, seed=...)` returns a domain `Catalogue` that obeys catalogue
format 1 (every key unique and well formed, every value inside its allowed range, retest
intervals only on retest coefficients, percentile tables increasing in both columns, sample
copies received on or after the request...). The same seed always gives the same catalogue.

Everything here is invented: attribute, instrument, publisher and job names are built from
neutral word lists plus a number, so nothing can be mistaken for a real product. The evidence
is drawn from ranges typical of published employment tests (reliabilities mostly .70-.95,
observed validities mostly .10-.45, norm groups of hundreds to thousands), so that rankings
made from it are varied: some instruments pass every gate, some fail one for a clear reason
(short evidence, an old norm group, a low coefficient, a long testing time).
"""

from __future__ import annotations

import datetime as dt
import random

from vetting.records.domain import (
    ATTRIBUTE_KINDS,
    CHECK_RESULTS,
    CORRECTIONS,
    CRITERIA,
    DESIGNS,
    LOWER_IS_BETTER_CRITERIA,
    MODES,
    QUALIFICATIONS,
    RELIABILITY_TYPES,
    SCOPES,
    STANCES,
    Attribute,
    Catalogue,
    Instrument,
    Job,
    Measure,
    NormGroup,
    PercentilePoint,
    Policy,
    Reliability,
    Requirement,
    Review,
    SampleCheck,
    SampleCopy,
    SubgroupDifference,
    ValidityStudy,
)

_QUALITIES = (
    "spatial", "verbal", "numerical", "clerical", "mechanical", "abstract", "situational",
    "procedural", "tactile", "auditory", "written", "spoken", "sequential", "diagnostic",
    "planning", "service", "safety", "team", "quality", "record",
)
_NOUNS = (
    "reasoning", "accuracy", "judgement", "recall", "fluency", "checking", "estimation",
    "orientation", "vigilance", "knowledge", "speed", "care", "drive", "steadiness", "focus",
)
_TITLE_WORDS = (
    "Aster", "Birch", "Cobalt", "Delta", "Ember", "Fjord", "Garnet", "Harbor", "Indigo",
    "Juniper", "Kestrel", "Lumen", "Meridian", "Nimbus", "Onyx", "Pylon", "Quarry", "Ridge",
    "Sable", "Tundra", "Umber", "Vale", "Willow", "Xenon", "Yarrow", "Zephyr",
)
_FORMS = ("Screen", "Battery", "Inventory", "Work Sample", "Check", "Scale", "Exercise")
_JOB_WORDS = (
    "operator", "clerk", "technician", "adviser", "inspector", "coordinator", "assistant",
    "planner", "dispatcher", "agent", "fitter", "analyst", "supervisor", "driver",
)
_JOB_AREAS = (
    "plant", "claims", "field", "contact-centre", "warehouse", "records", "lab", "fleet",
    "billing", "site", "service", "stores",
)
_ACCOMMODATIONS = ("extended-time", "large-print", "screen-reader", "rest-breaks", "braille")
_LANGUAGES = ("en", "es", "fr", "de", "pt", "nl", "pl")
_CHECK_ITEMS = (
    "instructions-clear", "items-job-related", "scoring-key-present", "manual-complete",
    "accessible-format", "technical-report-present",
)
_GROUP_LABELS = ("group A vs group B", "group C vs group B", "older vs younger", "group D vs group B")
_CURRENCY = "USD"

#: How many attributes the pool holds unless asked otherwise (jobs need up to 40 requirements).
DEFAULT_ATTRIBUTES = 60


def default_job_count(n_instruments: int) -> int:
    """Jobs to go with n instruments: one per 25 instruments, at least 2, at most 400."""
    return max(2, min(400, n_instruments // 25))


def generate_catalogue(
    n_instruments: int,
    *,
    n_jobs: int | None = None,
    n_attributes: int = DEFAULT_ATTRIBUTES,
    seed: int = 0,
) -> Catalogue:
    """A seeded, valid catalogue with `n_instruments` instruments carrying full evidence,
    `n_jobs` jobs (default: `default_job_count`) with 5-40 requirements each, and a pool of
    `n_attributes` attributes (at least 5)."""
    if n_instruments < 0:
        raise ValueError("n_instruments must be >= 0")
    if n_attributes < 5:
        raise ValueError("n_attributes must be >= 5 (jobs need at least 5 requirements)")
    rng = random.Random(seed)
    attributes = _attributes(n_attributes)
    keys = [a.key for a in attributes]
    instruments = [_instrument(rng, i, keys) for i in range(n_instruments)]
    jobs_wanted = default_job_count(n_instruments) if n_jobs is None else n_jobs
    jobs = [_job(rng, j, keys) for j in range(jobs_wanted)]
    return Catalogue(attributes=attributes, instruments=instruments, jobs=jobs)


# ---------------------------------------------------------------------------


def _attributes(count: int) -> list[Attribute]:
    out = []
    for i in range(count):
        quality = _QUALITIES[i % len(_QUALITIES)]
        noun = _NOUNS[(i // len(_QUALITIES) + i) % len(_NOUNS)]
        out.append(
            Attribute(
                key=f"{quality}-{noun}-{i:03d}",
                name=f"{quality.capitalize()} {noun} {i}",
                kind=ATTRIBUTE_KINDS[i % len(ATTRIBUTE_KINDS)],
            )
        )
    return out


def _date(rng: random.Random, first_year: int, last_year: int) -> dt.date:
    start = dt.date(first_year, 1, 1).toordinal()
    end = dt.date(last_year, 12, 31).toordinal()
    return dt.date.fromordinal(rng.randint(start, end))


def _instrument(rng: random.Random, i: int, attribute_keys: list[str]) -> Instrument:
    word = _TITLE_WORDS[i % len(_TITLE_WORDS)]
    form = rng.choice(_FORMS)
    measured = rng.sample(attribute_keys, rng.randint(1, 3))
    measures = [Measure(attribute=a, fit="primary" if k == 0 else "secondary") for k, a in enumerate(measured)]
    year = rng.randint(1992, 2025)

    reliability = []
    for _ in range(rng.randint(1, 3)):
        kind = rng.choice(RELIABILITY_TYPES)
        reliability.append(
            Reliability(
                type=kind,
                value=round(rng.uniform(0.62, 0.95), 2),
                n=rng.randint(40, 3000),
                interval_days=rng.randint(7, 120) if kind == "retest" else None,
                sample=f"synthetic sample {rng.randint(1, 999)}",
                source=f"Technical report {year}",
            )
        )

    validity = []
    for _ in range(rng.randint(0, 4)):
        criterion = rng.choice(CRITERIA)
        r = round(rng.uniform(0.02, 0.48), 2)
        if criterion in LOWER_IS_BETTER_CRITERIA:
            r = -r
        validity.append(
            ValidityStudy(
                criterion=criterion,
                r=r,
                n=rng.randint(30, 1500),
                design=rng.choice(DESIGNS),
                corrected=rng.choice(CORRECTIONS),
                job_family=rng.choice(_JOB_AREAS),
                sample=f"synthetic study {rng.randint(1, 999)}",
                source=f"Validation report {rng.randint(year, 2026)}",
            )
        )

    norms = []
    for k in range(rng.randint(1, 3)):
        mean = round(rng.uniform(15, 60), 1)
        sd = round(rng.uniform(3, 12), 1)
        table = []
        if rng.random() < 0.7:
            # raw scores increase with the percentile (z values of 10/25/50/75/90 percentiles)
            for pct, z in ((10, -1.2816), (25, -0.6745), (50, 0.0), (75, 0.6745), (90, 1.2816)):
                table.append(PercentilePoint(percentile=float(pct), raw=round(mean + z * sd, 1)))
        norms.append(
            NormGroup(
                key=f"norm-{k + 1}",
                group=f"synthetic applicants {k + 1}",
                n=rng.randint(80, 5000),
                year=rng.randint(max(1990, year - 5), 2026),
                scope=rng.choice(SCOPES),
                mean=mean,
                sd=sd,
                occupation=rng.choice(_JOB_AREAS) if rng.random() < 0.5 else None,
                table=table,
            )
        )

    subgroups = [
        SubgroupDifference(
            groups=rng.choice(_GROUP_LABELS),
            d=round(rng.uniform(-0.2, 1.0), 2),
            n=rng.randint(100, 4000),
            source=f"Fairness report {rng.randint(year, 2026)}",
        )
        for _ in range(rng.randint(0, 2))
    ]

    reviews = [
        Review(
            date=_date(rng, 2018, 2026),
            by=f"reviewer-{rng.randint(1, 40)}",
            note=f"Synthetic review note {rng.randint(1, 10**6)}.",
            stance=rng.choice(STANCES),
            source=f"review file {rng.randint(1, 500)}",
        )
        for _ in range(rng.randint(0, 2))
    ]

    sample_copy = None
    if rng.random() < 0.6:
        requested = _date(rng, 2024, 2026)
        received = requested + dt.timedelta(days=rng.randint(0, 30)) if rng.random() < 0.8 else None
        sample_copy = SampleCopy(
            requested=requested,
            received=received,
            checked_by=f"reviewer-{rng.randint(1, 40)}" if received else None,
            checks=[
                SampleCheck(item=item, result=rng.choice(CHECK_RESULTS), note=None)
                for item in rng.sample(_CHECK_ITEMS, rng.randint(1, 4))
            ]
            if received
            else [],
        )

    return Instrument(
        key=f"inst-{i:06d}",
        title=f"{word} {form} {i}",
        measures=measures,
        minutes=float(rng.choice((8, 10, 12, 15, 20, 25, 30, 40, 45, 60, 75, 90))),
        publisher=f"Synthetic Press {rng.randint(1, 60)}",
        edition=f"{rng.randint(1, 5)}",
        year=year,
        mode=sorted(rng.sample(MODES, rng.randint(1, 3)), key=MODES.index),
        reading_grade=round(rng.uniform(4, 14), 1),
        cost_per_applicant=round(rng.uniform(0, 60), 2),
        currency=_CURRENCY,
        user_qualification=rng.choice(QUALIFICATIONS),
        accommodations=sorted(rng.sample(_ACCOMMODATIONS, rng.randint(0, 3))),
        languages=sorted(rng.sample(_LANGUAGES, rng.randint(1, 3))),
        reliability=reliability,
        validity=validity,
        norms=norms,
        subgroup_differences=subgroups,
        reviews=reviews,
        sample_copy=sample_copy,
    )


def _job(rng: random.Random, j: int, attribute_keys: list[str]) -> Job:
    area = _JOB_AREAS[j % len(_JOB_AREAS)]
    word = _JOB_WORDS[(j // len(_JOB_AREAS)) % len(_JOB_WORDS)]
    n_req = rng.randint(5, min(40, len(attribute_keys)))
    requirements = [
        Requirement(attribute=a, importance=rng.randint(1, 5), critical=rng.random() < 0.2)
        for a in rng.sample(attribute_keys, n_req)
    ]
    applicants = rng.randint(20, 5000)
    hires = rng.randint(1, max(1, applicants // 4))
    policy = Policy()
    if rng.random() < 0.3:
        policy = Policy(min_reliability=round(rng.choice((0.70, 0.75, 0.80, 0.85)), 2), max_norm_age_years=rng.choice((10, 15, 20)))
    return Job(
        key=f"job-{j:04d}",
        title=f"{area.replace('-', ' ').capitalize()} {word} {j}",
        requirements=requirements,
        analysis_source=f"Synthetic job analysis {rng.randint(2019, 2026)}",
        applicant_reading_grade=float(rng.randint(6, 14)),
        time_budget_minutes=float(rng.choice((30, 45, 60, 90, 120))),
        budget_per_applicant=float(rng.choice((20, 40, 60, 100))),
        staff_qualification=rng.choice(QUALIFICATIONS),
        applicants_per_year=applicants,
        hires_per_year=hires,
        base_rate=round(rng.uniform(0.2, 0.8), 2),
        criterion_sd=float(rng.randint(4000, 30000)),
        tenure_years=float(rng.randint(1, 10)),
        policy=policy,
    )
