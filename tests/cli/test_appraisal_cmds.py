"""The appraisal commands through vetting.cli.main.run on a temporary SQLite database."""

from __future__ import annotations

import json

import pytest

from vetting.cli.main import run
from vetting.records.domain import Attribute, Catalogue, Policy
from vetting.records.store import Store

from tests.appraisal.factories import instrument, job

GATES = {"job_relatedness", "validity_evidence", "reliability", "reading_level", "time", "qualification"}
COMPONENTS = {"coverage", "validity", "reliability", "norms", "fairness", "practicality"}


@pytest.fixture
def db(tmp_path):
    url = f"sqlite:///{tmp_path / 'v.db'}"
    cat = Catalogue(
        attributes=[Attribute("numeracy", "Numeracy", "ability"), Attribute("verbal", "Verbal reasoning", "ability")],
        instruments=[
            instrument("alpha"),
            instrument("slow", minutes=120),
            instrument("thin", reliability=[], subgroup_differences=[], sample_copy=None),
        ],
        jobs=[job(), job(key="empty", title="Nothing yet", requirements=[]),
              job(key="zero", title="Zero weights", policy=Policy(weights={k: 0.0 for k in Policy().weights}))],
    )
    with Store.open(url) as store:
        store.import_catalogue(cat)
    return url


def _run(capsys, db, *argv):
    status = run(["--db", db, *argv])
    out = capsys.readouterr()
    return status, out.out, out.err


def test_rank_json_keys_and_order(db, capsys):
    status, out, _ = _run(capsys, db, "rank", "clerk", "--json", "--draws", "200")
    assert status == 0
    data = json.loads(out)
    assert data["job"] == "clerk" and data["policy_version"] == 1 and data["policy_locked"] is False
    assert data["locked_before_first_ranking"] is False
    res = data["results"]
    assert [r["instrument"] for r in res] == ["alpha", "slow", "thin"]
    assert [r["rank"] for r in res] == [1, None, None]
    assert [r["eligible"] for r in res] == [True, False, False]
    for r in res:
        assert set(r["gates"]) == GATES and set(r["components"]) == COMPONENTS
        assert 0 <= r["score"] <= 100 and 0 <= r["p_best"] <= 1
        assert all(isinstance(w, str) for w in r["warnings"])
    assert res[0]["p_best"] == 1.0
    assert res[1]["gates"]["time"] is False and res[2]["gates"]["reliability"] is False
    assert res[2]["components"]["reliability"] is None and "no_subgroup_data" in res[2]["warnings"]


def test_rank_records_first_ranking_and_lock_timing(db, capsys):
    assert _run(capsys, db, "policy", "lock", "clerk")[0] == 0
    status, out, _ = _run(capsys, db, "rank", "clerk", "--json", "--draws", "50")
    data = json.loads(out)
    assert data["policy_locked"] is True and data["locked_before_first_ranking"] is True
    assert data["first_ranked_at"] is not None
    # a later rule change makes version 2; locking it now comes after the first ranking
    assert _run(capsys, db, "policy", "set", "clerk", "--weight", "coverage=40")[0] == 0
    assert _run(capsys, db, "policy", "lock", "clerk")[0] == 0
    data2 = json.loads(_run(capsys, db, "rank", "clerk", "--json", "--draws", "50")[1])
    assert data2["policy_version"] == 2 and data2["policy_locked"] is True
    assert data2["locked_before_first_ranking"] is False
    assert data2["first_ranked_at"] == data["first_ranked_at"]  # set once


def test_rank_human_output_shows_text_symbols_and_cautions(db, capsys):
    status, out, _ = _run(capsys, db, "rank", "clerk", "--draws", "50")
    assert status == 0
    assert "all 6 PASS" in out and "FAIL time" in out and "NOT locked" in out
    assert "adverse impact" in out and "local employment law" in out and "accommodations" in out


def test_rank_bad_input_exit_2(db, capsys):
    status, _, err = _run(capsys, db, "rank", "empty")
    assert status == 2 and "no required attributes" in err
    status, _, err = _run(capsys, db, "rank", "zero")
    assert status == 2 and "sum to 0" in err
    status, _, err = _run(capsys, db, "rank", "no-such-job")
    assert status == 2 and "no-such-job" in err
    # nothing was written for the rejected jobs
    with Store.open(db) as store:
        assert store.job("empty").first_ranked_at is None and store.job("zero").first_ranked_at is None


def test_plan_json_keys(db, capsys):
    status, out, _ = _run(capsys, db, "plan", "clerk", "alpha", "--json")
    assert status == 0
    p = json.loads(out)
    for key in ("selection_ratio", "validity_used", "cut", "expected_success_rate", "mean_criterion_z",
                "utility_per_year", "impact_ratio", "sem_raw", "cut_band_raw"):
        assert key in p
    assert set(p["cut"]) >= {"z", "raw", "percentile", "t", "stanine"}
    assert p["selection_ratio"] == pytest.approx(0.1)
    assert len(p["cut_band_raw"]) == 2 and p["cut_band_raw"][0] < p["cut"]["raw"] < p["cut_band_raw"][1]
    status, out, _ = _run(capsys, db, "plan", "clerk", "alpha", "--selection-ratio", "0.3", "--norm", "gen", "--json")
    assert json.loads(out)["selection_ratio"] == pytest.approx(0.3)
    status, out, _ = _run(capsys, db, "plan", "clerk", "alpha")
    assert status == 0 and "stanine" in out and "Cautions" in out


def test_plan_bad_input(db, capsys):
    assert _run(capsys, db, "plan", "clerk", "alpha", "--selection-ratio", "0")[0] == 2
    status, _, err = _run(capsys, db, "plan", "clerk", "alpha", "--norm", "nope")
    assert status == 2 and "nope" in err
    assert _run(capsys, db, "plan", "clerk", "ghost")[0] == 2


def test_gaps_and_alternatives(db, capsys):
    status, out, _ = _run(capsys, db, "gaps", "thin", "--json")
    data = json.loads(out)
    assert status == 0 and {"no_reliability", "no_subgroup_data", "no_sample_copy_checked"} <= {g["code"] for g in data["gaps"]}
    assert "Nowhere Testing Co-op" in data["letter"]
    status, out, _ = _run(capsys, db, "gaps", "thin", "--job", "clerk")
    assert status == 0 and "Request letter" in out
    status, out, _ = _run(capsys, db, "alternatives", "clerk", "--json")
    data = json.loads(out)
    assert status == 0 and data["top"] == "alpha" and data["alternatives"] == []
    assert "section 3B" in data["rule"]


def test_policy_set_show_lock(db, capsys):
    status, out, _ = _run(capsys, db, "policy", "set", "clerk", "--weight", "coverage=40", "--min-reliability", "0.85", "--json")
    data = json.loads(out)
    assert status == 0 and data["changed"] and data["policy"]["version"] == 2
    assert data["policy"]["weights"]["coverage"] == 40 and data["policy"]["min_reliability"] == 0.85
    status, out, _ = _run(capsys, db, "policy", "show", "clerk", "--json")
    shown = json.loads(out)
    assert [v["version"] for v in shown["versions"]] == [1, 2] and shown["versions"][0]["weights"]["coverage"] == 30
    assert _run(capsys, db, "policy", "lock", "clerk")[0] == 0
    status, _, err = _run(capsys, db, "policy", "lock", "clerk")
    assert status == 2 and "already locked" in err


@pytest.mark.parametrize("argv, message", [
    (["--weight", "speed=3"], "unknown weight name"),
    (["--weight", "coverage=-1"], "must not be negative"),
    (["--weight", "coverage"], "NAME=VALUE"),
    (["--min-reliability", "1.5"], "min_reliability"),
    ([], "nothing to change"),
])
def test_policy_set_bad_input_leaves_database_unchanged(db, capsys, argv, message):
    status, _, err = _run(capsys, db, "policy", "set", "clerk", *argv)
    assert status == 2 and message in err
    with Store.open(db) as store:
        assert [p.version for p in store.policy_versions("clerk")] == [1]


def test_policy_weights_summing_to_zero_rejected(db, capsys):
    argv = [x for n in sorted(COMPONENTS) for x in ("--weight", f"{n}=0")]
    status, _, err = _run(capsys, db, "policy", "set", "clerk", *argv)
    assert status == 2 and "sum to 0" in err
