"""The jobs list and job editor: creating a job with requirements, policy weights checked as
typed, saving makes policy versions, and locking freezes a version on record.

Policy rules (weights non-negative and not all 0; locking fixes a version with a time) are
the project's stated rules (issue 4; common practice, no published source)."""

from __future__ import annotations

from textual.widgets import DataTable, TabbedContent

from vetting.records.domain import Attribute, Requirement
from vetting.records.store import Store
from vetting.tui.screens.job import JobEditor, JobsScreen
from vetting.tui.widgets.confirm import Confirm
from vetting.tui.widgets.form import RecordBlock, RecordList, RuleField


async def _type_into(pilot, field: RuleField, text: str) -> None:
    field.edit()
    await pilot.pause()
    field.input.value = ""
    if text:
        await pilot.press(*text)
    await pilot.pause()


def _thirty_requirements(url: str, *, varied: bool) -> list[str]:
    """Give the seeded job 'claims-clerk' 30 requirements (new attributes skill-00..29); with
    `varied`, importance 1-5 in turn and every seventh critical. Returns the attribute keys."""
    attrs = [f"skill-{i:02d}" for i in range(30)]
    with Store.open(url) as store:
        for key in attrs:
            store.save_attribute(Attribute(key=key, name=key))
        job = store.job("claims-clerk")
        job.requirements = [
            Requirement(attribute=a, importance=1 + i % 5, critical=i % 7 == 0) if varied else Requirement(attribute=a)
            for i, a in enumerate(attrs)
        ]
        store.save_job(job)
    return attrs


async def _open_job(app, pilot, settle, key: str = "claims-clerk"):
    """Open the job editor on a stored job once the app has settled; returns the editor."""
    await settle(pilot)
    app.open_job(key)
    await settle(pilot)
    return app.screen


async def _open_requirements(app, pilot, settle):
    """Open the job editor on 'claims-clerk' and show its requirements (Ctrl+O)."""
    editor = await _open_job(app, pilot, settle)
    await pilot.press("ctrl+o")  # requirements
    await settle(pilot)
    return editor, editor.query_one("#list-requirements", RecordList)


async def test_jobs_list_and_current_job(seeded_url, app_for, settle):
    app = app_for(seeded_url)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        await pilot.press("f3")
        await settle(pilot)
        screen = app.screen
        assert isinstance(screen, JobsScreen)
        table = screen.query_one(DataTable)
        assert table.row_count == 1
        row = [str(c) for c in table.get_row_at(0)]
        assert row == ["Claims clerk", "2 attr", "v1 open"]
        assert app.current_job == "claims-clerk"
        await pilot.press("enter")
        await settle(pilot)
        assert isinstance(app.screen, JobEditor)
        assert app.screen.original.key == "claims-clerk"


async def test_new_job_with_three_attributes(db_url, app_for, settle):
    app = app_for(db_url)
    async with app.run_test(size=(100, 30)) as pilot:
        await settle(pilot)
        await pilot.press("f3")
        await settle(pilot)
        await pilot.press("ctrl+n")
        await settle(pilot)
        editor = app.screen
        assert isinstance(editor, JobEditor)
        profile = editor.query_one(".job-profile", RecordBlock).fields
        await _type_into(pilot, profile["key"], "records-officer")
        await _type_into(pilot, profile["title"], "Records officer")
        await _type_into(pilot, profile["applicants_per_year"], "40")
        await _type_into(pilot, profile["hires_per_year"], "50")
        # cross-field rule from import: hires may not exceed applicants
        assert "must not exceed applicants_per_year" in profile["hires_per_year"].error
        await _type_into(pilot, profile["hires_per_year"], "4")
        assert profile["hires_per_year"].error is None
        await pilot.press("ctrl+o")
        await settle(pilot)
        reqs = editor.query_one("#list-requirements", RecordList)
        await _type_into(pilot, reqs.blocks[0].fields["attribute"], "filing-accuracy")
        assert "new attribute" in reqs.blocks[0].fields["attribute"].note
        for name in ("reading-speed", "tact"):
            await pilot.press("ctrl+n")
            await settle(pilot)
            await _type_into(pilot, reqs.blocks[-1].fields["attribute"], name)
        await _type_into(pilot, reqs.blocks[0].fields["importance"], "7")
        assert "from 1 to 5" in reqs.blocks[0].fields["importance"].error
        await _type_into(pilot, reqs.blocks[0].fields["importance"], "5")
        await _type_into(pilot, reqs.blocks[0].fields["critical"], "yes")
        await pilot.press("f9")
        await settle(pilot)
        assert "Saved" in str(editor.query_one("#banner").render())
        assert app.current_job == "records-officer"
    with Store.open(db_url) as store:
        job = store.job("records-officer")
        assert [(r.attribute, r.importance, r.critical) for r in job.requirements] == [
            ("filing-accuracy", 5, True), ("reading-speed", 3, False), ("tact", 3, False)
        ]
        assert job.hires_per_year == 4 and job.applicants_per_year == 40
        assert {"filing-accuracy", "reading-speed", "tact"} <= store.attribute_keys()
        assert job.policy.version == 1


async def test_weights_all_zero_are_refused(seeded_url, app_for, settle):
    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        editor = await _open_job(app, pilot, settle)
        editor.query_one("#sections", TabbedContent).active = "policy"
        await settle(pilot)
        weights = editor.query_one(".policy-weights", RecordBlock).fields
        await _type_into(pilot, weights["coverage"], "-1")
        assert "from 0" in weights["coverage"].error
        for field in weights.values():
            await _type_into(pilot, field, "0")
        problems = [f.error for f in weights.values() if f.error]
        assert any("must not all be 0" in p for p in problems)
        await pilot.press("f9")
        await settle(pilot)
        assert str(editor.query_one("#banner").render()).startswith("✗ Not saved")
    with Store.open(seeded_url) as store:
        assert len(store.policy_versions("claims-clerk")) == 1


async def test_policy_change_makes_a_version_and_lock_freezes_it(seeded_url, app_for, settle):
    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        editor = await _open_job(app, pilot, settle)
        editor.query_one("#sections", TabbedContent).active = "policy"
        await settle(pilot)
        # lock version 1 first
        await pilot.press("ctrl+k")
        await settle(pilot)
        assert isinstance(app.screen, Confirm)
        await pilot.press("y")
        await settle(pilot)
        assert "Locked policy v1" in str(editor.query_one("#banner").render())
        assert "locked" in str(editor.query_one("#policy-state").render())
        # locking again is refused with a reason
        await pilot.press("ctrl+k")
        await settle(pilot)
        assert app.screen is editor
        # a changed rule after the lock makes version 2; version 1 stays locked on record
        rules_block = editor.query_one(".policy-rules", RecordBlock).fields
        await _type_into(pilot, rules_block["min_reliability"], "0.85")
        await pilot.press("f9")
        await settle(pilot)
        assert "Saved" in str(editor.query_one("#banner").render())
    with Store.open(seeded_url) as store:
        versions = store.policy_versions("claims-clerk")
        assert [v.version for v in versions] == [1, 2]
        assert versions[0].locked and not versions[1].locked
        assert versions[1].min_reliability == 0.85
        assert store.job("claims-clerk").policy.version == 2


async def test_job_editor_asks_before_leaving(seeded_url, app_for, settle):
    app = app_for(seeded_url)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        await pilot.press("f3")
        await settle(pilot)
        await pilot.press("enter")
        await settle(pilot)
        editor = app.screen
        profile = editor.query_one(".job-profile", RecordBlock).fields
        await _type_into(pilot, profile["title"], "Claims clerk II")
        await pilot.press("f2")
        await settle(pilot)
        assert isinstance(app.screen, Confirm)
        await pilot.press("y")
        await settle(pilot)
        assert app.screen.__class__.__name__ == "CatalogueScreen"
    with Store.open(seeded_url) as store:
        assert store.job("claims-clerk").title == "Claims clerk"


async def test_delete_job_asks_first(seeded_url, app_for, settle):
    app = app_for(seeded_url)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        await pilot.press("f3")
        await settle(pilot)
        await pilot.press("ctrl+y")
        await settle(pilot)
        assert isinstance(app.screen, Confirm)
        await pilot.press("y")
        await settle(pilot)
        assert app.screen.jobs == []
    with Store.open(seeded_url) as store:
        assert store.job_keys() == []


async def test_lock_key_works_while_typing_in_a_field(seeded_url, app_for, settle):
    """Ctrl+K locks the policy even when a text field has focus (a text field would otherwise
    take it as 'delete to the end of the line' and silently erase what was typed)."""
    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        editor = await _open_job(app, pilot, settle)
        title = editor.query_one(".job-profile", RecordBlock).fields["title"]
        title.edit()
        await pilot.pause()
        title.input.cursor_position = 0
        await pilot.press("ctrl+k")
        await settle(pilot)
        assert isinstance(app.screen, Confirm)
        await pilot.press("y")
        await settle(pilot)
        assert title.input.value == "Claims clerk"
    with Store.open(seeded_url) as store:
        assert store.policy_versions("claims-clerk")[0].locked


async def test_sections_never_shown_keep_what_is_stored(seeded_url, app_for, settle):
    """A stored job builds its requirements and policy only when they are first shown (a job
    may need dozens of attributes). Saving after changing the title alone keeps the stored
    requirements and policy exactly (no new policy version); shown afterwards, they hold the
    stored values and count as unchanged."""
    with Store.open(seeded_url) as store:
        before = store.job("claims-clerk")
    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        editor = await _open_job(app, pilot, settle)
        assert not editor.built("requirements") and not editor.built("policy")
        title = editor.query_one(".job-profile", RecordBlock).fields["title"]
        await _type_into(pilot, title, "Claims clerk II")
        await pilot.press("f9")
        await settle(pilot)
        assert "Saved" in str(editor.query_one("#banner").render())
        await pilot.press("ctrl+o")
        await settle(pilot)
        reqs = editor.query_one("#list-requirements", RecordList)
        assert [b.fields["attribute"].text for b in reqs.blocks] == [r.attribute for r in before.requirements]
        await pilot.press("ctrl+o")
        await settle(pilot)
        assert "v1 open" in str(editor.query_one("#policy-state").render())
        assert not editor.is_dirty()
    with Store.open(seeded_url) as store:
        after = store.job("claims-clerk")
        assert after.title == "Claims clerk II"
        assert [(r.attribute, r.importance, r.critical) for r in after.requirements] == [
            (r.attribute, r.importance, r.critical) for r in before.requirements
        ]
        assert after.policy.version == before.policy.version == 1
        assert len(store.policy_versions("claims-clerk")) == 1


async def test_a_long_list_builds_its_blocks_as_they_are_needed(seeded_url, app_for, settle):
    """A job needing 30 attributes: showing its requirements mounts only the blocks that fill
    about a screen; the next ones are mounted when the cursor reaches the last blocks or the
    list is scrolled to its end. The pending ones count as stored (nothing unsaved), a record
    added meanwhile goes after all 30, and saving writes every requirement in order."""
    attrs = _thirty_requirements(seeded_url, varied=True)
    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        editor, reqs = await _open_requirements(app, pilot, settle)
        first = len(reqs.blocks)
        assert 0 < first < 30 and first + len(reqs.pending) == 30
        assert not editor.is_dirty()
        # the cursor in the last block built: the next ones are built
        reqs.blocks[-1].fields["critical"].edit()
        await settle(pilot)
        assert first < len(reqs.blocks) < 30
        # scrolled to the end: the rest, step by step
        scroller = reqs.parent
        for _ in range(30):
            if not reqs.pending:
                break
            scroller.scroll_end(animate=False)
            await settle(pilot)
        assert not reqs.pending
        assert [b.fields["attribute"].text for b in reqs.blocks] == attrs
        assert str(reqs.blocks[-1].query_one(".block-title").render()) == "Requirement 30"
        assert not editor.is_dirty()
        await pilot.press("escape")
        await settle(pilot)
        assert not isinstance(app.screen, JobEditor)  # nothing unsaved: no question

        editor, reqs = await _open_requirements(app, pilot, settle)
        assert reqs.pending
        await pilot.press("ctrl+n")  # while blocks are pending: the new one goes last
        await settle(pilot)
        assert not reqs.pending and len(reqs.blocks) == 31
        assert [b.fields["attribute"].text for b in reqs.blocks[:30]] == attrs
        await _type_into(pilot, reqs.blocks[-1].fields["attribute"], "skill-new")
        assert "new attribute" in reqs.blocks[-1].fields["attribute"].note
        await pilot.press("f9")
        await settle(pilot)
        assert "Saved" in str(editor.query_one("#banner").render())
    with Store.open(seeded_url) as store:
        saved = store.job("claims-clerk")
        assert [r.attribute for r in saved.requirements] == attrs + ["skill-new"]
        assert [(r.importance, r.critical) for r in saved.requirements[:30]] == [
            (1 + i % 5, i % 7 == 0) for i in range(30)
        ]


async def test_saving_checks_the_records_not_yet_built(seeded_url, app_for, settle):
    """Saving mounts and checks every record of a long list, also those never scrolled to: a
    pending record naming an attribute already listed (put there by hand, since the store
    refuses such a job) is found and refused like a typed one."""
    _thirty_requirements(seeded_url, varied=False)
    app = app_for(seeded_url)
    async with app.run_test(size=(100, 30)) as pilot:
        editor, reqs = await _open_requirements(app, pilot, settle)
        assert reqs.pending
        reqs.pending[-1]["attribute"] = "skill-00"  # as if stored twice: refused on saving
        await pilot.press("f9")
        await settle(pilot)
        assert not reqs.pending
        banner = str(editor.query_one("#banner").render())
        assert banner.startswith("✗ Not saved") and "'skill-00' is listed twice" in banner
