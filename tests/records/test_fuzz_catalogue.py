"""Property and fuzz tests for catalogue import (issue 7 item 6; issue 2 round trip).

* Generated catalogues (any valid combination of format-1 fields, hypothesis): writing and
  reading back gives identical domain objects; import -> export -> re-import gives identical
  records in a real database.
* Mutated catalogues (lines dropped, duplicated, values swapped for hostile tokens, bytes
  flipped, files cut short): the reader never raises anything but CatalogueError, every problem
  names the file and a line, and an import through the command line leaves the database
  exactly as it was whenever the file is refused.

Catalogues fuzzed per run (for docs/reliability.md): see FUZZ_BUDGET below.
"""

from __future__ import annotations

import datetime as dt

import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from vetting.records import domain as d
from vetting.records.catalogue import dump_catalogue, parse_catalogue
from vetting.records.errors import CatalogueError

#: max_examples of each property below; their sum is the number of catalogues fuzzed per run.
FUZZ_BUDGET = {
    "generated_round_trip": 200,
    "mutated_text": 200,
    "mutated_bytes": 100,
    "store_round_trip": 25,
    "cli_mutated_import": 25,
}

COMMON = dict(deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
NAME = "fuzz/catalogue.yaml"

# ---------------------------------------------------------------------------
# Strategies: valid catalogues
# ---------------------------------------------------------------------------

_text_chars = st.characters(
    blacklist_categories=("Cc", "Cs", "Zl", "Zp"),  # control characters are refused by the rules
    blacklist_characters="\x85",
) | st.sampled_from(["\t", "\n", " ", "#", ":", "-", "'", '"', "&", "*", "!", "%", "@", "`"])
texts = st.text(_text_chars, min_size=1, max_size=30).filter(lambda s: s.strip() != "")
opt_text = st.none() | texts
keys = st.from_regex(r"[a-z0-9][a-z0-9-]{0,11}", fullmatch=True)
this_year = dt.date.today().year


def finite(lo=None, hi=None, *, exclude_lo=False, exclude_hi=False):
    return st.floats(
        min_value=lo, max_value=hi, exclude_min=exclude_lo, exclude_max=exclude_hi,
        allow_nan=False, allow_infinity=False,
    ).map(lambda x: x + 0.0)  # -0.0 -> 0.0 (they compare equal anyway)


years = st.integers(1900, this_year + 1)
dates = st.dates(dt.date(1900, 1, 1), dt.date(2100, 12, 31))


def unique_list(strategy, **kw):
    return st.lists(strategy, unique=True, **kw)


@st.composite
def reliability(draw):
    kind = draw(st.sampled_from(d.RELIABILITY_TYPES))
    return d.Reliability(
        type=kind,
        value=draw(finite(0, 1, exclude_lo=True, exclude_hi=True)),
        n=draw(st.none() | st.integers(2, 10**6)),
        interval_days=draw(st.none() | st.integers(1, 3650)) if kind == "retest" else None,
        sample=draw(opt_text),
        source=draw(opt_text),
    )


validity = st.builds(
    d.ValidityStudy,
    criterion=st.sampled_from(d.CRITERIA),
    r=finite(-1, 1, exclude_lo=True, exclude_hi=True),
    n=st.integers(3, 10**6),
    design=st.sampled_from(d.DESIGNS),
    corrected=st.sampled_from(d.CORRECTIONS),
    job_family=opt_text,
    sample=opt_text,
    source=opt_text,
)


@st.composite
def percentile_table(draw):
    ps = sorted(draw(unique_list(finite(0, 100, exclude_lo=True, exclude_hi=True), max_size=5)))
    raws = sorted(draw(unique_list(finite(-1e6, 1e6), min_size=len(ps), max_size=len(ps))))
    assume(len(set(ps)) == len(ps) and len(set(raws)) == len(raws))
    return [d.PercentilePoint(p, r) for p, r in zip(ps, raws)]


@st.composite
def norms(draw):
    out = []
    for key in draw(unique_list(keys, max_size=3)):
        out.append(
            d.NormGroup(
                key=key, group=draw(texts), n=draw(st.integers(2, 10**6)), year=draw(years),
                scope=draw(st.sampled_from(d.SCOPES)), mean=draw(finite(-1e6, 1e6)),
                sd=draw(finite(0, 1e6, exclude_lo=True)), occupation=draw(opt_text),
                table=draw(percentile_table()),
            )
        )
    return out


@st.composite
def sample_copy(draw):
    requested = draw(st.none() | dates)
    received = draw(st.none() | dates)
    if requested and received and received < requested:
        requested, received = received, requested
    checks = draw(st.lists(st.builds(d.SampleCheck, item=texts, result=st.sampled_from(d.CHECK_RESULTS),
                                     note=opt_text), max_size=3))
    return d.SampleCopy(requested=requested, received=received, checked_by=draw(opt_text), checks=checks)


@st.composite
def instrument(draw, key, attribute_keys):
    return d.Instrument(
        key=key,
        title=draw(texts),
        measures=[d.Measure(a, draw(st.sampled_from(d.FITS)))
                  for a in draw(unique_list(st.sampled_from(attribute_keys), min_size=1, max_size=3))],
        minutes=draw(finite(0, 1440, exclude_lo=True)),
        publisher=draw(opt_text),
        edition=draw(opt_text),
        year=draw(st.none() | years),
        mode=draw(unique_list(st.sampled_from(d.MODES), max_size=3)),
        reading_grade=draw(st.none() | finite(0, 20)),
        cost_per_applicant=draw(st.none() | finite(0, 1e6)),
        currency=draw(st.none() | st.from_regex(r"[A-Z]{3}", fullmatch=True)),
        user_qualification=draw(st.none() | st.sampled_from(d.QUALIFICATIONS)),
        accommodations=draw(unique_list(texts.filter(lambda s: len(s) <= 200), max_size=3)),
        languages=draw(unique_list(st.from_regex(r"[a-z]{2,3}(-[A-Z]{2})?", fullmatch=True), max_size=3)),
        reliability=draw(st.lists(reliability(), max_size=3)),
        validity=draw(st.lists(validity, max_size=3)),
        norms=draw(norms()),
        subgroup_differences=draw(st.lists(st.builds(
            d.SubgroupDifference, groups=texts, d=finite(-5, 5, exclude_lo=True, exclude_hi=True),
            n=st.none() | st.integers(2, 10**6), source=opt_text), max_size=2)),
        reviews=draw(st.lists(st.builds(d.Review, date=dates, by=texts, note=texts,
                                        stance=st.sampled_from(d.STANCES), source=opt_text), max_size=2)),
        sample_copy=draw(st.none() | sample_copy()),
    )


@st.composite
def policy(draw):
    weights = {name: draw(finite(0, 1000)) for name in d.WEIGHT_NAMES}
    assume(sum(weights.values()) > 0)
    return d.Policy(
        min_reliability=draw(finite(0, 1, exclude_lo=True, exclude_hi=True)),
        max_norm_age_years=draw(st.integers(1, 100)),
        impact_ratio_floor=draw(finite(0, 1, exclude_lo=True)),
        weights=weights,
        relevant_criteria=draw(unique_list(st.sampled_from(d.CRITERIA), max_size=3)),
        relevant_job_families=draw(unique_list(texts.filter(lambda s: len(s) <= 200), max_size=2)),
    )


@st.composite
def job(draw, key, attribute_keys):
    hires = draw(st.none() | st.integers(1, 10**5))
    applicants = draw(st.none() | st.integers(hires or 1, 10**6))
    return d.Job(
        key=key,
        title=draw(texts),
        requirements=[d.Requirement(a, draw(st.integers(1, 5)), draw(st.booleans()))
                      for a in draw(unique_list(st.sampled_from(attribute_keys), min_size=1, max_size=4))],
        analysis_source=draw(opt_text),
        applicant_reading_grade=draw(st.none() | finite(0, 20)),
        time_budget_minutes=draw(st.none() | finite(0, 1440, exclude_lo=True)),
        budget_per_applicant=draw(st.none() | finite(0, 1e6)),
        staff_qualification=draw(st.none() | st.sampled_from(d.QUALIFICATIONS)),
        applicants_per_year=applicants,
        hires_per_year=hires,
        base_rate=draw(st.none() | finite(0, 1, exclude_lo=True, exclude_hi=True)),
        criterion_sd=draw(st.none() | finite(0, 1e7, exclude_lo=True)),
        tenure_years=draw(st.none() | finite(0, 60, exclude_lo=True)),
        policy=draw(policy()),
    )


@st.composite
def catalogues(draw, max_instruments=3, max_jobs=2):
    attribute_keys = draw(unique_list(keys, min_size=1, max_size=5))
    attributes = [d.Attribute(k, draw(texts), draw(st.sampled_from(d.ATTRIBUTE_KINDS))) for k in attribute_keys]
    inst = [draw(instrument(k, attribute_keys)) for k in draw(unique_list(keys, max_size=max_instruments))]
    jobs = [draw(job(k, attribute_keys)) for k in draw(unique_list(keys, max_size=max_jobs))]
    return d.Catalogue(attributes=attributes, instruments=inst, jobs=jobs)


# ---------------------------------------------------------------------------
# Round trip of generated catalogues
# ---------------------------------------------------------------------------


@settings(max_examples=FUZZ_BUDGET["generated_round_trip"], **COMMON)
@given(catalogues())
def test_generated_catalogue_round_trips_identically(cat):
    text = dump_catalogue(cat)
    again = parse_catalogue(text, NAME)
    assert again == cat
    assert dump_catalogue(again) == text


# ---------------------------------------------------------------------------
# Mutated catalogues: never a traceback, always a named problem
# ---------------------------------------------------------------------------

HOSTILE = [
    "yes", "no", "~", "-1", "0", "1e999", ".nan", "-.inf", "[", "]", "{", "}", "&a", "*a", "!!python/object:os.system",
    "!!binary aGk=", "2026-02-30", "'", '"', ":", "- ", "? ", "<<: {}", "\t", "%YAML 1.1", "---", "...", "@", "`",
    "9" * 400, "0x1F", "1_000", "1:30", "true", "\\x00", '"\\x01"', '"\\u2028"', "key: key: key",
]


@st.composite
def mutated_text(draw):
    base = dump_catalogue(draw(catalogues(max_instruments=2, max_jobs=1)))
    lines = base.splitlines(keepends=True)
    for _ in range(draw(st.integers(1, 4))):
        if not lines:
            break
        i = draw(st.integers(0, len(lines) - 1))
        op = draw(st.sampled_from(["drop", "dup", "swap_value", "insert", "indent", "cut", "chars"]))
        line = lines[i]
        if op == "drop":
            del lines[i]
        elif op == "dup":
            lines.insert(i, line)
        elif op == "swap_value" and ":" in line:
            head = line.split(":", 1)[0]
            lines[i] = f"{head}: {draw(st.sampled_from(HOSTILE) | texts)}\n"
        elif op == "insert":
            lines.insert(i, " " * draw(st.integers(0, 8)) + draw(st.sampled_from(HOSTILE)) + "\n")
        elif op == "indent":
            lines[i] = " " * draw(st.integers(1, 3)) + line
        elif op == "cut":
            lines = lines[:i]
        else:
            pos = draw(st.integers(0, len(line)))
            lines[i] = line[:pos] + draw(st.text(min_size=1, max_size=5)) + line[pos:]
    return "".join(lines)


def _check_outcome(data) -> d.Catalogue | None:
    """Parse; the only allowed failure is CatalogueError naming the file and a line."""
    try:
        return parse_catalogue(data, NAME)
    except CatalogueError as exc:
        assert exc.problems
        for problem in exc.problems:
            rendered = str(problem)
            assert rendered.startswith(f"{NAME}:{problem.line}: "), rendered
            assert problem.line is not None and problem.line >= 1, rendered
            assert problem.message.strip(), rendered
        return None


@settings(max_examples=FUZZ_BUDGET["mutated_text"], **COMMON)
@given(mutated_text())
def test_mutated_catalogue_is_accepted_or_refused_with_named_problems(text):
    cat = _check_outcome(text)
    if cat is not None:  # accepted: it must be a faithful, writable catalogue
        assert parse_catalogue(dump_catalogue(cat), NAME) == cat


@settings(max_examples=FUZZ_BUDGET["mutated_bytes"], **COMMON)
@given(st.data())
def test_mutated_bytes_never_crash(data):
    raw = bytearray(dump_catalogue(data.draw(catalogues(max_instruments=1, max_jobs=1))).encode())
    for _ in range(data.draw(st.integers(1, 6))):
        pos = data.draw(st.integers(0, len(raw) - 1))
        raw[pos] = data.draw(st.integers(0, 255))
    _check_outcome(bytes(raw))


# ---------------------------------------------------------------------------
# Through a real database
# ---------------------------------------------------------------------------


@pytest.fixture(scope="module")
def shared_url(tmp_path_factory):
    return f"sqlite:///{tmp_path_factory.mktemp('fuzzdb') / 'fuzz.db'}"


@settings(max_examples=FUZZ_BUDGET["store_round_trip"], **COMMON)
@given(catalogues(max_instruments=2, max_jobs=2))
def test_import_export_reimport_is_identical(shared_url, cat):
    from vetting.records.store import Store

    with Store.open(shared_url) as store:
        store.import_catalogue(cat, replace=True, source="fuzz")
        exported = store.export_catalogue(
            instruments=[i.key for i in cat.instruments], jobs=[j.key for j in cat.jobs]
        )
    assert exported.instruments == cat.instruments
    assert exported.jobs == cat.jobs
    used = {m.attribute for i in cat.instruments for m in i.measures} | {
        r.attribute for j in cat.jobs for r in j.requirements
    }
    assert sorted(exported.attributes, key=lambda a: a.key) == sorted(
        (a for a in cat.attributes if a.key in used), key=lambda a: a.key
    )
    # and the exported file reads back to the same records
    assert parse_catalogue(dump_catalogue(exported), NAME) == exported


@settings(max_examples=FUZZ_BUDGET["cli_mutated_import"], **COMMON)
@given(mutated_text())
def test_refused_import_leaves_the_database_exactly_as_it_was(shared_url, tmp_path_factory, text):
    from vetting.cli.main import run
    from vetting.records.store import Store

    folder = tmp_path_factory.mktemp("cli")
    path = folder / "mutated.yaml"
    path.write_text(text, encoding="utf-8")
    with Store.open(shared_url) as store:
        before = dump_catalogue(store.export_catalogue())
        events_before = len(store.audit_events())
    status = run(["--db", shared_url, "import", "--replace", str(path)])
    with Store.open(shared_url) as store:
        after = dump_catalogue(store.export_catalogue())
        events_after = len(store.audit_events())
    if status == 0:
        assert parse_catalogue(text, NAME) is not None
    else:
        assert status == 2
        assert after == before and events_after == events_before
