"""The decision memo end to end: records in a real (SQLite) store -> memo files -> read back.

The Word file is read back with python-docx, the HTML with the standard library's html.parser.
Figures are checked two ways: against the appraisal engine called directly (the memo must show
the engine's figures, formatted the memo's way), and a few against hand calculation from
published formulas (named beside each check).
"""

from __future__ import annotations

import datetime as dt
import io
import os
from html.parser import HTMLParser

import docx
import pytest

from tests.memo.catalogue import ALT, AS_OF, FAILER, HOSTILE_NOTE, JOB, TOP
from vetting.appraisal.planner import plan
from vetting.appraisal.ranking import rank
from vetting.memo import fmt
from vetting.memo.api import MemoOutputError, make_memo, verify
from vetting.memo.build import LEGAL_NOTE, NO_FIT, MemoError
from vetting.records.errors import NotFound

SECTION_TITLES = [
    "1. Decision",
    "2. Purpose and the job",
    "3. Rules",
    "4. Candidates considered",
    "5. Evidence for the chosen instrument",
    "6. Robustness and alternatives",
    "7. Planned use",
    "8. Cautions",
    "9. Evidence gaps still open",
    "10. Record fingerprint and audit trail",
]

#: One phrase per caution the issue names (job-relatedness, adverse impact monitoring,
#: accommodations, qualified users, standardised administration and scoring, score bands,
#: norms' relevance and age) and the statement about law and licensed practice.
CAUTION_PHRASES = [
    "job-related purpose",
    "Monitor adverse impact",
    "accommodations",
    "qualified users",
    "standardised administration and scoring",
    "as a band",
    "norms are relevant and recent",
    "local validation",
    "does not replace advice under local employment law",
]


def _docx_text(path) -> tuple[list[tuple[str, str]], str]:
    d = docx.Document(str(path))
    headings = [(p.style.name, p.text) for p in d.paragraphs if p.style.name.startswith("Heading")]
    parts = [p.text for p in d.paragraphs]
    for t in d.tables:
        for row in t.rows:
            for c in row.cells:
                parts.append(c.text)
    return headings, "\n".join(parts)


class _Html(HTMLParser):
    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags: list[str] = []
        self.headings: list[str] = []
        self.text: list[str] = []
        self._in_h = None

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        if tag in ("h1", "h2", "h3"):
            self._in_h = tag
            self.headings.append("")

    def handle_endtag(self, tag):
        if tag == self._in_h:
            self._in_h = None

    def handle_data(self, data):
        self.text.append(data)
        if self._in_h:
            self.headings[-1] += data


def _engine_figures(store):
    """The engine's own figures, formatted as the memo formats them."""
    job = store.job(JOB)
    instruments = store.instruments()
    ranking = rank(job, instruments, draws=2000, seed=0, as_of=AS_OF, first_ranked_at=job.first_ranked_at or dt.datetime.now(dt.timezone.utc))
    top = ranking.top
    p = plan(job, next(i for i in instruments if i.key == top.instrument), as_of=AS_OF)
    return ranking, top, p


def _expected_strings(ranking, top, p) -> list[str]:
    return [
        fmt.score(top.score),
        fmt.pct(top.p_best),
        fmt.r2(top.validity.conservative),
        fmt.r2(top.validity.meta.mean_r),
        fmt.interval(top.validity.meta.credibility_80),
        fmt.num(p.sem_raw, 2),
        fmt.num(p.cut.raw, 1),
        fmt.band(p.cut_band_raw),
        fmt.pct(p.expected_success_rate),
        fmt.r2(p.impact_ratio),
        fmt.num(ranking.robustness.smallest_flip.to_value, 2),
        str(p.local_validation.n),
    ]


def test_word_memo_has_sections_choice_engine_figures_and_cautions(store, tmp_path):
    out = tmp_path / "memo.docx"
    res = make_memo(store, JOB, fmt="docx", out=out, by="A. Author", as_of=AS_OF)
    assert res.decision == TOP and out.exists()
    headings, text = _docx_text(out)
    assert [t for s, t in headings if s == "Heading 1"] == SECTION_TITLES
    assert "Decision: Steady Dispatch Reasoning 12 (steady-12)" in text
    ranking, top, p = _engine_figures(store)
    for s in _expected_strings(ranking, top, p):
        assert s in text, s
    for phrase in CAUTION_PHRASES:
        assert phrase in text, phrase
    assert LEGAL_NOTE in text
    # the review note is stored as plain text in Word (never interpreted)
    assert res.fingerprint in text
    d = docx.Document(str(out))
    assert len(d.inline_shapes) == 2  # the two charts, as pictures
    assert d.core_properties.author == "A. Author" and d.core_properties.content_status == "draft"


def test_memo_figures_match_published_formulas(store, tmp_path):
    # SEM = SD * sqrt(1 - r_xx) (Lord & Novick, 1968, eq. 3.8.4 - value from memory):
    #   6 * sqrt(1 - .86) = 2.245 -> "2.24"
    # Cut for a selection ratio of 30/300 = .10: z = 1.2816 (upper 10% point of the standard
    # normal, any normal table, e.g. Abramowitz & Stegun 1964, table 26.1), raw = 24 + 6 z = 31.69.
    # 95% band: cut +/- 1.96 SEM = 31.69 +/- 4.40 -> 27.3 to 36.1.
    out = tmp_path / "memo.md"
    make_memo(store, JOB, fmt="md", out=out, by="A. Author", as_of=AS_OF)
    text = out.read_text(encoding="utf-8")
    assert "**SEM (raw points):** 2.24" in text
    assert "**Cut (raw score):** 31.7" in text
    assert "**95% band around the cut (raw):** 27.3 to 36.1" in text
    assert "**Selection ratio:** 0.10" in text


def test_html_memo_is_self_contained_and_escapes_user_markup(store, tmp_path):
    out = tmp_path / "memo.html"
    make_memo(store, JOB, fmt="html", out=out, by="A. Author", as_of=AS_OF, choose=ALT)
    raw = out.read_text(encoding="utf-8")
    h = _Html()
    h.feed(raw)
    assert [x for x in h.headings if x in SECTION_TITLES] == SECTION_TITLES
    text = "".join(h.text)
    # the chosen instrument is the alternative, which carries the hostile review note
    assert "Decision: Brisk Routing Check 7 (brisk-7)" in text
    assert "It ranks 2 of 2 eligible instruments" in text
    assert HOSTILE_NOTE in text  # shown as text...
    assert "script" not in h.tags and "b" not in h.tags  # ...never as markup
    assert "&lt;script&gt;" in raw
    assert "<link" not in raw and "src=" not in raw and "<a " not in raw
    for phrase in CAUTION_PHRASES:
        assert phrase in text, phrase
    assert h.tags.count("svg") == 2


def test_alternatives_are_named_for_the_top_choice(store, tmp_path):
    out = tmp_path / "memo.md"
    make_memo(store, JOB, fmt="md", out=out, as_of=AS_OF)
    text = out.read_text(encoding="utf-8")
    section = text.split("### Alternatives with less expected adverse impact")[1].split("## 7.")[0]
    assert "Brisk Routing Check 7 (brisk-7)" in section and "Alternatives exist" in section


def test_gate_failing_choice_needs_override_and_is_said_plainly(store, tmp_path):
    (tmp_path / "out").mkdir()
    out = tmp_path / "out" / "memo.html"
    with pytest.raises(MemoError, match="fails the gate"):
        make_memo(store, JOB, fmt="html", out=out, choose=FAILER, as_of=AS_OF)
    assert os.listdir(tmp_path / "out") == []
    make_memo(store, JOB, fmt="html", out=out, choose=FAILER, override="Only test in the applicants' language", as_of=AS_OF)
    h = _Html()
    h.feed(out.read_text(encoding="utf-8"))
    text = "".join(h.text)
    assert "Chosen against the rules (override)" in text
    assert "FAILS 1 of the six gates" in text
    assert "Reason given for the override: Only test in the applicants' language" in text


def test_no_instrument_fit_for_use(store, tmp_path):
    job = store.job(JOB)
    job.time_budget_minutes = 10.0  # every instrument takes 30 minutes: all fail the time gate
    store.save_job(job)
    for final in (False, True):
        out = tmp_path / f"memo-{final}.docx"
        res = make_memo(store, JOB, fmt="docx", out=out, final=final, as_of=AS_OF)
        assert res.decision is None
        _, text = _docx_text(out)
        assert f"Decision: {NO_FIT}" in text
        assert "No instrument was chosen, so no cut score is planned." in text
    assert [d.instrument for d in store.decisions(JOB)] == [None]


def test_final_memo_records_the_decision_and_verify_by_fingerprint(store, tmp_path):
    out = tmp_path / "memo.md"
    res = make_memo(store, JOB, fmt="md", out=out, final=True, by="A. Author", as_of=AS_OF)
    decisions = store.decisions(JOB)
    assert len(decisions) == 1
    d = decisions[0]
    assert (d.fingerprint, d.instrument, d.status, d.author) == (res.fingerprint, TOP, "final", "A. Author")
    assert d.memo_path == str(out.resolve())
    assert verify(store, res.fingerprint).matches
    assert verify(store, str(out)).matches


@pytest.mark.parametrize("fmt_", ["md", "html", "docx"])
def test_verify_names_the_changed_record(store, tmp_path, fmt_):
    out = tmp_path / f"memo.{fmt_}"
    make_memo(store, JOB, fmt=fmt_, out=out, as_of=AS_OF)
    assert verify(store, str(out)).matches
    inst = store.instrument(ALT)
    inst.reviews[0].note = "Revised: norms now look dated."
    store.save_instrument(inst)
    result = verify(store, str(out))
    assert not result.matches
    assert result.changed == [f"instrument:{ALT}"] and result.missing == []


def test_verify_names_policy_change_and_deleted_instrument(store, tmp_path):
    out = tmp_path / "memo.html"
    make_memo(store, JOB, fmt="html", out=out, as_of=AS_OF)
    job = store.job(JOB)
    pol = job.policy
    pol.min_reliability = 0.85
    store.set_policy(JOB, pol)
    store.delete_instrument(FAILER)
    result = verify(store, str(out))
    assert result.changed == [f"policy:{JOB}"]
    assert result.missing == [f"instrument:{FAILER}"]


def test_bad_input_leaves_nothing_behind(store, tmp_path):
    tmp_path = tmp_path / "out"
    tmp_path.mkdir()
    with pytest.raises(NotFound):
        make_memo(store, "no-such-job", fmt="md", out=tmp_path / "m.md")
    with pytest.raises(NotFound):
        make_memo(store, JOB, fmt="md", out=tmp_path / "m.md", choose="no-such-test")
    with pytest.raises(MemoOutputError, match="does not exist"):
        make_memo(store, JOB, fmt="md", out=tmp_path / "missing" / "m.md")
    with pytest.raises(MemoOutputError, match="is a folder"):
        make_memo(store, JOB, fmt="md", out=tmp_path)
    with pytest.raises(MemoError, match="only used together with --choose"):
        make_memo(store, JOB, fmt="md", out=tmp_path / "m.md", override="why not")
    assert os.listdir(tmp_path) == []
    assert store.decisions(JOB) == []


def test_draft_leaves_no_decision(store, tmp_path):
    make_memo(store, JOB, fmt="md", out=tmp_path / "m.md", as_of=AS_OF)
    assert store.decisions(JOB) == []


@pytest.mark.parametrize("fmt_", ["md", "html", "docx"])
def test_author_with_comment_and_markup_cannot_break_the_stamp(store, tmp_path, fmt_):
    # the author's name is user text that also goes into the machine-readable stamp; '-->'
    # would end a Markdown/HTML comment early and '"' would end an HTML attribute
    by = 'Ann "Q" --> <script>x</script> & co'
    out = tmp_path / f"memo.{fmt_}"
    res = make_memo(store, JOB, fmt=fmt_, out=out, by=by, as_of=AS_OF)
    from vetting.memo.api import read_stamp_file

    stamp = read_stamp_file(out)
    assert stamp["by"] == by and stamp["fingerprint"] == res.fingerprint
    if fmt_ != "docx":
        raw = out.read_text(encoding="utf-8")
        assert "<script>" not in raw
    assert verify(store, str(out)).matches


def test_saving_records_unchanged_is_not_a_change(store, tmp_path):
    # row versions and evidence row ids change on every save; the evidence does not
    out = tmp_path / "memo.md"
    make_memo(store, JOB, fmt="md", out=out, as_of=AS_OF)
    for key in (TOP, ALT, FAILER):
        store.save_instrument(store.instrument(key))
    store.save_job(store.job(JOB))
    result = verify(store, str(out))
    assert result.matches, (result.changed, result.missing)


def test_verify_by_fingerprint_without_the_memo_file(store, tmp_path):
    out = tmp_path / "memo.html"
    res = make_memo(store, JOB, fmt="html", out=out, final=True, as_of=AS_OF)
    out.unlink()
    result = verify(store, res.fingerprint)
    assert result.matches and any("not available" in n for n in result.notes)
    job = store.job(JOB)
    job.hires_per_year = 40
    store.save_job(job)
    result = verify(store, res.fingerprint)
    assert not result.matches and result.changed
