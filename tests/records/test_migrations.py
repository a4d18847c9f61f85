"""Schema migrations: a database made by the first revision opens under the current code with
nothing lost, and the migrations describe exactly the tables the models declare."""

from __future__ import annotations

import datetime as dt
import shutil
from pathlib import Path

import pytest
from alembic import command
from alembic.autogenerate import compare_metadata
from alembic.runtime.migration import MigrationContext
from sqlalchemy import text

from vetting.records import engine as engines
from vetting.records import models
from vetting.records.store import Store

DATA = Path(__file__).parent / "data"
#: A SQLite database written at revision 0001 by `build_rev1_database` below and kept in the
#: repository, so later revisions must keep upgrading it without loss.
STORED_REV1 = DATA / "vetting-rev0001.db"

# Rows written with plain SQL against the revision-0001 tables (not through today's models).
REV1_ROWS = [
    "INSERT INTO attribute (id, key, name, kind) VALUES (1, 'valve-sense', 'Valve sense', 'ability')",
    "INSERT INTO attribute (id, key, name, kind) VALUES (2, 'calm-hands', 'Calm hands', 'personality')",
    "INSERT INTO instrument (id, key, title, publisher, edition, year, minutes, reading_grade, cost_per_applicant,"
    " currency, user_qualification, mode, accommodations, languages, row_version, created_at, updated_at, updated_by)"
    " VALUES (1, 'old-valve-test', 'Old Valve Test', 'Invented House', '2nd', 2015, 25.0, 6.5, 12.5, 'USD',"
    " 'open', '[\"paper\"]', '[\"large-print\"]', '[\"en\"]', 3, '2025-01-02 03:04:05', '2025-02-03 04:05:06', 'old-ana')",
    "INSERT INTO measure (id, instrument_id, position, attribute_key, fit) VALUES (1, 1, 0, 'valve-sense', 'primary')",
    "INSERT INTO reliability (id, instrument_id, position, type, value, n, interval_days, sample, source)"
    " VALUES (1, 1, 0, 'retest', 0.83, 150, 30, 'trainees', 'old manual')",
    "INSERT INTO validity_study (id, instrument_id, position, criterion, r, n, design, corrected, job_family,"
    " sample, source) VALUES (1, 1, 0, 'training', 0.29, 180, 'predictive', 'none', 'fitters', NULL, NULL)",
    "INSERT INTO norm_group (id, instrument_id, position, key, group_label, n, year, scope, occupation, mean, sd)"
    " VALUES (1, 1, 0, 'nat-2015', 'Applicants', 700, 2015, 'national', NULL, 20.0, 4.0)",
    "INSERT INTO norm_point (id, norm_group_id, position, percentile, raw) VALUES (1, 1, 0, 25.0, 17.0)",
    "INSERT INTO norm_point (id, norm_group_id, position, percentile, raw) VALUES (2, 1, 1, 75.0, 23.0)",
    "INSERT INTO subgroup_difference (id, instrument_id, position, groups, d, n, source)"
    " VALUES (1, 1, 0, 'B vs A', 0.3, 500, NULL)",
    "INSERT INTO review (id, instrument_id, position, review_date, reviewed_by, note, stance, source)"
    " VALUES (1, 1, 0, '2024-06-30', 'Old reviewer', 'Dated but sound.', 'mixed', NULL)",
    "INSERT INTO sample_copy (id, instrument_id, requested, received, checked_by)"
    " VALUES (1, 1, '2024-05-01', '2024-05-09', 'Old checker')",
    "INSERT INTO sample_check (id, sample_copy_id, position, item, result, note)"
    " VALUES (1, 1, 0, 'instructions-clear', 'pass', NULL)",
    "INSERT INTO job (id, key, title, analysis_source, applicant_reading_grade, time_budget_minutes,"
    " budget_per_applicant, staff_qualification, applicants_per_year, hires_per_year, base_rate, criterion_sd,"
    " tenure_years, first_ranked_at, row_version, created_at, updated_at, updated_by) VALUES (1, 'old-fitter',"
    " 'Old fitter', NULL, 8.0, 40.0, 30.0, 'open', 100, 10, 0.5, 9000.0, 2.0, '2025-03-01 10:00:00', 2,"
    " '2025-01-01 00:00:00', '2025-01-05 00:00:00', 'old-ben')",
    "INSERT INTO requirement (id, job_id, position, attribute_key, importance, critical)"
    " VALUES (1, 1, 0, 'valve-sense', 4, 1)",
    "INSERT INTO requirement (id, job_id, position, attribute_key, importance, critical)"
    " VALUES (2, 1, 1, 'calm-hands', 2, 0)",
    "INSERT INTO policy_version (id, job_id, version, min_reliability, max_norm_age_years, impact_ratio_floor,"
    " weights, relevant_criteria, relevant_job_families, created_at, created_by, locked_at, locked_by) VALUES"
    " (1, 1, 1, 0.8, 15, 0.8, '{\"coverage\": 50, \"validity\": 50}', '[]', '[]', '2025-01-01 00:00:00',"
    " 'old-ben', '2025-01-02 00:00:00', 'old-ben')",
    "INSERT INTO decision (id, job_key, instrument_key, status, author, fingerprint, created_at,"
    " override_reason, memo_path, memo_format) VALUES (1, 'old-fitter', 'old-valve-test', 'final', 'old-ben',"
    " 'abc123', '2025-03-02 09:00:00', NULL, 'memo.md', 'md')",
    "INSERT INTO audit_event (id, at, who, action, entity, key, before, after) VALUES"
    " (1, '2025-01-01 00:00:00', 'old-ben', 'create', 'job', 'old-fitter', NULL, '{\"title\": \"Old fitter\"}')",
]


def build_rev1_database(path: Path) -> None:
    """Create a SQLite database at revision 0001 holding REV1_ROWS."""
    eng = engines.make_engine(f"sqlite:///{path}")
    try:
        engines.upgrade(eng, "0001")
        with eng.begin() as conn:
            for sql in REV1_ROWS:
                conn.execute(text(sql))
        with eng.connect() as conn:
            conn.exec_driver_sql("PRAGMA wal_checkpoint(TRUNCATE)")
    finally:
        eng.dispose()
    with __import__("sqlite3").connect(path) as raw:
        raw.execute("PRAGMA journal_mode=DELETE")


def _assert_rev1_records(store: Store) -> None:
    UTC = dt.UTC
    inst = store.instrument("old-valve-test")
    assert inst.title == "Old Valve Test" and inst.row_version == 3
    assert (inst.mode, inst.accommodations, inst.languages) == (["paper"], ["large-print"], ["en"])
    assert (inst.minutes, inst.reading_grade, inst.cost_per_applicant) == (25.0, 6.5, 12.5)
    assert inst.reliability[0].interval_days == 30 and inst.reliability[0].value == 0.83
    assert inst.validity[0].r == 0.29 and inst.validity[0].job_family == "fitters"
    assert [(p.percentile, p.raw) for p in inst.norms[0].table] == [(25.0, 17.0), (75.0, 23.0)]
    assert inst.subgroup_differences[0].d == 0.3
    assert inst.reviews[0].date == dt.date(2024, 6, 30)
    assert inst.sample_copy.received == dt.date(2024, 5, 9)
    assert inst.sample_copy.checks[0].item == "instructions-clear"
    job = store.job("old-fitter")
    assert job.row_version == 2 and job.first_ranked_at == dt.datetime(2025, 3, 1, 10, 0, tzinfo=UTC)
    assert [(r.attribute, r.importance, r.critical) for r in job.requirements] == [
        ("valve-sense", 4, True),
        ("calm-hands", 2, False),
    ]
    assert job.policy.version == 1 and job.policy.weights == {"coverage": 50, "validity": 50}
    assert job.policy.locked_at == dt.datetime(2025, 1, 2, tzinfo=UTC)
    [decision] = store.decisions("old-fitter")
    assert (decision.fingerprint, decision.memo_format) == ("abc123", "md")
    [event] = store.audit_events(job="old-fitter")
    assert event.who == "old-ben" and event.after == {"title": "Old fitter"}
    assert [a.key for a in store.attributes()] == ["valve-sense", "calm-hands"]


def test_stored_first_revision_database_opens_under_current_code_with_nothing_lost(tmp_path):
    copy = tmp_path / "old.db"
    shutil.copyfile(STORED_REV1, copy)
    with Store.open(f"sqlite:///{copy}") as store:
        _assert_rev1_records(store)
        assert engines.current_revision(store._engine) == engines.head_revision()
        # and the upgraded database takes new work
        store.mark_ranked("old-fitter")
        store.set_policy("old-fitter", store.job("old-fitter").policy.__class__())
        assert store.job("old-fitter").policy.version == 2


def test_a_database_built_at_the_first_revision_today_also_upgrades(tmp_path):
    path = tmp_path / "rev1.db"
    build_rev1_database(path)
    with Store.open(f"sqlite:///{path}") as store:
        _assert_rev1_records(store)


def test_migrations_match_the_models(db_url):
    """Autogenerate finds nothing to add, drop or change after `upgrade head`."""
    with Store.open(db_url) as store:
        with store._engine.connect() as conn:
            diff = compare_metadata(MigrationContext.configure(conn, opts={"compare_type": True}), models.metadata)
    assert diff == []


def test_downgrade_to_nothing_and_back(sqlite_url):
    eng = engines.make_engine(sqlite_url)
    try:
        engines.upgrade(eng)
        cfg = engines.alembic_config()
        with eng.begin() as conn:
            cfg.attributes["connection"] = conn
            command.downgrade(cfg, "base")
        assert engines.current_revision(eng) is None
        engines.upgrade(eng)
        assert engines.current_revision(eng) == engines.head_revision()
    finally:
        eng.dispose()


def test_a_database_from_a_newer_vetting_is_refused_clearly(sqlite_url):
    eng = engines.make_engine(sqlite_url)
    engines.upgrade(eng)
    with eng.begin() as conn:
        conn.exec_driver_sql("UPDATE alembic_version SET version_num = 'ffffffffffff'")
    eng.dispose()
    from vetting.records.errors import DatabaseUnavailable

    with pytest.raises(DatabaseUnavailable, match="ffffffffffff.*newer version"):
        Store.open(sqlite_url)


if __name__ == "__main__":  # regenerate the stored database (only ever for a NEW revision's file)
    DATA.mkdir(exist_ok=True)
    if STORED_REV1.exists():
        raise SystemExit(f"{STORED_REV1} exists; stored databases are never regenerated")
    build_rev1_database(STORED_REV1)
    print(f"wrote {STORED_REV1}")


def test_many_stores_opening_a_new_database_at_once_all_succeed(db_url):
    """Four threads open the same brand-new database together: the schema is created once."""
    import threading

    errors = []

    def opener():
        try:
            with Store.open(db_url) as s:
                s.instrument_keys()
        except Exception as exc:  # pragma: no cover - the failure being tested
            errors.append(repr(exc))

    threads = [threading.Thread(target=opener) for _ in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert errors == []
    with Store.open(db_url) as s:
        assert engines.current_revision(s._engine) == engines.head_revision()


def test_an_old_backup_restores_into_a_new_database_and_stays_untouched(db_url, tmp_path):
    """`restore` upgrades a temporary copy of an older backup, never the backup file itself."""
    backup = tmp_path / "old-backup.db"
    shutil.copyfile(STORED_REV1, backup)
    before = backup.read_bytes()
    with Store.open(db_url) as store:
        copied = store.restore(backup)
        assert copied["instrument"] == 1 and copied["norm_point"] == 2
        _assert_rev1_records(store)
    assert backup.read_bytes() == before
