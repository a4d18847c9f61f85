"""What the instrument and job editors share: loading in a worker, sections, add/remove
entries, checking before saving, unsaved-change tracking and the result banner.

An editor's form is built once and used again: the app keeps one editor of each kind
(`VettingApp.open_instrument`, `open_job`), and opening the next record refills the fields of
its first section in place (`reuse`) instead of building them anew; the other sections are
emptied when the editor closes and built again, from the new record, when first shown."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from textual import work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical, VerticalScroll
from textual.screen import Screen
from textual.widget import AwaitMount
from textual.widgets import Static, TabbedContent, TabPane

from vetting.tui.widgets.footer import Footer
from vetting.tui.widgets.form import RecordBlock, RecordList, RuleField, block_of
from vetting.tui.widgets.navbar import NavBar


class EditorScreen(Screen):
    """Base class: subclasses build `sections()` and turn the form into a domain object."""

    #: paths are relative to the subclass's file; subclasses in screens/ list
    #: "../widgets/form.tcss" and "../widgets/editor.tcss" first
    CSS_PATH = None
    AUTO_FOCUS = None
    #: build a section's fields only when it is first shown (keeps opening fast)
    LAZY = True
    #: a reused editor waiting for its record longer than this is shown with "loading…"
    SHOW_LOADING_AFTER = 0.15

    BINDINGS = [
        Binding("f9", "save", "Save", id="editor.save", tooltip="Check every field and save"),
        Binding("ctrl+n", "add_entry", "Add entry", id="editor.add", tooltip="Add a record to this section"),
        Binding("ctrl+y", "remove_entry", "Remove entry", id="editor.remove",
                tooltip="Remove the record holding the cursor"),
        Binding("ctrl+o", "next_section", "Next section", id="editor.next", tooltip="Show the next section"),
        Binding("ctrl+t", "previous_section", "Prev section", show=False, id="editor.previous",
                tooltip="Show the previous section"),
        Binding("escape", "leave", "Back", id="editor.back", tooltip="Close the editor (asks if unsaved)"),
    ]

    #: shown in "unsaved changes in ..." questions
    record_label = "this record"
    kind_label = "Record"
    #: which place of the navigation line this editor belongs to
    nav_place = "catalogue"

    def __init__(self, key: str | None) -> None:
        super().__init__()
        self._builders: dict[str, Any] = {}
        #: counts the records opened in this editor (a late read of an earlier one is dropped)
        self._opening = 0
        #: shows this reused editor once its record is in the form (None: shown already)
        self._pending_show: Callable[[], None] | None = None
        #: built ahead of use, not shown (VettingApp.prebuild_editors): its first section only
        self.unseen = False
        self.begin(key)

    def begin(self, key: str | None) -> None:
        """Start on the record `key` (None: a new one); subclasses reset their own state too."""
        self.key = key
        self.original: Any = None
        #: the form as loaded, per built section (sections are built when first shown)
        self._initial_by_pane: dict[str, tuple] = {}
        self.ready = False
        self.saving = False

    def reuse(self, key: str | None, show: Callable[[], object]) -> None:
        """Open the record `key` in this editor, already built for an earlier record and not
        shown now. The record is read first and the form refilled before `show` is called (it
        shows this screen), so the first paint holds the new record; a read slower than
        SHOW_LOADING_AFTER shows the screen with "loading…" until it is done. Should the user
        go elsewhere before then, the editor is not shown."""
        self.begin(key)
        self.unseen = False
        self._opening += 1
        opening = self._opening
        opener = self.app.screen
        self.query_one("#heading", Static).update(self._heading())
        self.banner("")
        self._show_loading(True)

        def show_now() -> None:
            if self._pending_show is not None and opening == self._opening:
                self._pending_show = None
                if self.app.screen is opener:
                    show()

        self._pending_show = show_now
        self.set_timer(self.SHOW_LOADING_AFTER, show_now)
        self._load(opening)

    # -- layout ------------------------------------------------------------------------------

    def compose(self) -> ComposeResult:
        yield NavBar(self.nav_place)
        yield Static(self._heading(), id="heading", classes="title-bar", markup=False)
        yield Static("", id="banner", classes="form-banner", markup=False)
        yield Vertical(Static("loading…", id="loading", classes="hint"), id="body")
        # the key line comes with the form (_show_record): drawn while the record loads, it was
        # drawn again, in another state or order, as soon as the form arrived

    def _heading(self) -> str:
        name = self.key or "new"
        return f"{self.kind_label}: {name}"

    def lazy(self) -> bool:
        """Whether sections are built when first shown (subclasses may decide per record)."""
        return self.LAZY

    def sections(self) -> list[tuple[str, str, Any]]:
        """[(pane id, pane title, function returning the section's widgets)]."""
        raise NotImplementedError

    def load_record(self) -> Any:
        """Runs in a worker thread: read what the form needs. Returns the record or None."""
        raise NotImplementedError

    def on_mount(self) -> None:
        self._load(self._opening)

    @work(thread=True, exclusive=True, group="editor-load")
    def _load(self, opening: int) -> None:
        try:
            record = self.load_record()
        except Exception as exc:
            self.app.call_from_thread(self._loaded, opening, None, exc)
            return
        self.app.call_from_thread(self._loaded, opening, record, None)

    async def _loaded(self, opening: int, record: Any, failure: Exception | None) -> None:
        if opening != self._opening:
            return  # another record was opened since this one was asked for
        if failure is not None:
            self._load_failed(failure)
        else:
            await self._show_record(record)
        if self._pending_show is not None:
            self._pending_show()  # a reused editor: shown now, its record in place

    def _load_failed(self, exc: Exception) -> None:
        self._mount_footer()
        self.banner(f"✗ Could not open {self.record_label}: {exc}", error=True)
        self.query_one("#loading").display = False
        for tabs in self.query("#sections"):
            tabs.display = False

    def _mount_footer(self) -> AwaitMount | None:
        if self.query(Footer):
            return None
        return self.mount(Footer())

    def _show_loading(self, loading: bool) -> None:
        self.query_one("#loading").display = loading
        for tabs in self.query("#sections"):
            tabs.display = not loading

    async def _show_record(self, record: Any) -> None:
        self.original = record
        if self.query("#sections"):
            await self._refill()
            return
        body = self.query_one("#body", Vertical)
        # Every section's tab and (empty) pane, and the first section's fields, are put together
        # first and mounted at once: one layout pass instead of one per section. A section not
        # built yet is an empty pane (its scrolling area comes with its fields).
        tabs = TabbedContent(id="sections")
        self._builders = {}
        built: list[str] = []
        lazy = self.lazy() or self.unseen
        for index, (pane_id, title, builder) in enumerate(self.sections()):
            self._builders[pane_id] = builder
            if index == 0 or not lazy:
                self._initial_by_pane[pane_id] = ()  # building
                built.append(pane_id)
                tabs.compose_add_child(TabPane(title, self._section(builder()), id=pane_id))
            else:
                tabs.compose_add_child(TabPane(title, id=pane_id))
        # no layout or paint of the half-mounted form while it is put in place
        with self.app.batch_update():
            self.query_one("#loading").display = False
            await body.mount(tabs)
            self.ready = True
            # the cursor goes to the first field before the form is first painted (focusing
            # after that paint cost a second layout and paint), then the key line is built
            # for the form as it will be used
            await self._after_show()
            footer = self._mount_footer()
            if footer is not None:
                await footer
        for pane_id in built:
            self._remember(pane_id)
        if self.unseen:
            await self._park()

    async def _refill(self) -> None:
        """Show the record just read in the form built for an earlier one: the first section's
        fields take the new values in place (built anew only if its shape differs, e.g. a
        list); the other sections were emptied when the editor closed and are built again
        when first shown (or now, when this record builds every section at once)."""
        tabs = self.query_one("#sections", TabbedContent)
        sections = self.sections()
        self._builders = {pane_id: builder for pane_id, _, builder in sections}
        first = sections[0][0]
        built: list[str] = [first]
        with self.app.batch_update():
            await self._empty_sections(keep=first)
            pane = tabs.get_pane(first)
            self._initial_by_pane[first] = ()  # building
            fresh = self._builders[first]()  # not mounted: its contents, or itself if need be
            if not self._refill_pane(pane, fresh):
                await pane.remove_children()
                await pane.mount(self._section(fresh))
            if not self.lazy():
                for pane_id in list(self._builders)[1:]:
                    await self.build_pane(pane_id)
                    built.append(pane_id)
            tabs.active = first
            self._show_loading(False)
            self.ready = True
            await self._after_show()
        for pane_id in built:
            self._remember(pane_id)

    @staticmethod
    def _refill_pane(pane: TabPane, fresh: list[Any]) -> bool:
        """Give the section's widgets the contents of `fresh` (the section built for the new
        record, not mounted) when both have the same shape: notes and single-record blocks of
        the same fields. Returns False (nothing changed) otherwise."""
        scrolls = list(pane.query_children(VerticalScroll))
        if len(scrolls) != 1:
            return False
        old = list(scrolls[0].children)
        if len(old) != len(fresh):
            return False
        for have, new in zip(old, fresh):
            if type(have) is not type(new):
                return False
            if isinstance(new, RecordBlock):
                if not have.same_shape(new):
                    return False
            elif type(new) is not Static:
                return False
        for have, new in zip(old, fresh):
            if isinstance(new, RecordBlock):
                have.refill(new.texts, locked=new.locked)
            else:
                if have.content != new.content:
                    have.update(new.content)
        scrolls[0].scroll_home(animate=False)
        return True

    async def _empty_sections(self, keep: str) -> None:
        """Drop the fields of every built section but `keep` (built again when first shown)."""
        tabs = self.query_one("#sections", TabbedContent)
        for pane in tabs.query(TabPane):
            if pane.id != keep and pane.children:
                await pane.remove_children()

    def can_reuse(self) -> bool:
        """Whether this editor can open another record: built (its frame at least) and not
        open now."""
        return bool(self.query("#heading")) and self not in self.app.screen_stack

    async def on_screen_suspend(self) -> None:
        # closed (not just covered by a question or the help): make ready for the next record
        if self not in self.app.screen_stack:
            await self._park()

    async def _park(self) -> None:
        """Put the form in the state the next record opens in, now, while nothing of it is
        shown: the sections other than the first emptied (built again from the next record),
        the first section's tab active, the cursor in its first field and the key line drawn
        for it; so opening the next record moves no tab underline and rebuilds no key line."""
        if not self.query("#sections"):
            return
        tabs = self.query_one("#sections", TabbedContent)
        first = tabs.query(TabPane).first().id
        if not first:
            return
        await self._empty_sections(keep=first)
        tabs.active = first
        await self.focus_first_input()
        for footer in self.query(Footer):
            footer.call_later(footer.rebuild_now)  # (the footer builds its keys in its own turn)

    @staticmethod
    def _section(children: list[Any]) -> VerticalScroll:
        return VerticalScroll(*children, classes="section")

    async def build_pane(self, pane_id: str) -> None:
        """Mount a section's fields (done the first time the section is shown)."""
        if pane_id in self._initial_by_pane:
            return
        self._initial_by_pane[pane_id] = ()  # building
        tabs = self.query_one("#sections", TabbedContent)
        await tabs.get_pane(pane_id).mount(self._section(self._builders[pane_id]()))
        self._remember(pane_id)

    def _remember(self, pane_id: str) -> None:
        self._initial_by_pane[pane_id] = self.pane_snapshot(pane_id)
        self.pane_built(pane_id)

    def pane_built(self, pane_id: str) -> None:
        """Hook: a section's widgets were just mounted (called again when a long list in it
        has mounted its last blocks)."""

    def on_record_list_completed(self, event: RecordList.Completed) -> None:
        pane = event.record_list
        while pane is not None and not isinstance(pane, TabPane):
            pane = pane.parent  # type: ignore[assignment]
        if pane is not None and pane.id:
            self.pane_built(pane.id)

    def built(self, pane_id: str) -> bool:
        return pane_id in self._initial_by_pane

    async def on_tabbed_content_tab_activated(self, event: TabbedContent.TabActivated) -> None:
        pane_id = event.pane.id
        if pane_id and self.ready and not self.built(pane_id):
            await self.build_pane(pane_id)
            self.call_after_refresh(self.focus_first_input)

    async def _after_show(self) -> None:
        await self.focus_first_input()
        self.refresh_bindings()

    def _neighbour(self, step: int) -> str | None:
        """The section `step` places from the one shown (wrapping round), or None."""
        tabs = self.query_one("#sections", TabbedContent)
        ids = [pane.id for pane in tabs.query(TabPane) if pane.id]
        if not ids:
            return None
        index = ids.index(tabs.active) if tabs.active in ids else 0
        return ids[(index + step) % len(ids)]

    def focus_first_input(self) -> AwaitMount:
        """The cursor to the first field of the section shown that is not locked; awaiting the
        result waits until that field's input is mounted (see RuleField.edit)."""
        pane = self.current_pane()
        if pane is not None:
            for field in pane.query(RuleField):
                if not field.locked:
                    # at once (Widget.focus waits for the next turn of the loop, often after a
                    # paint, and the focus change then costs a second layout and paint)
                    return field.edit()
        return AwaitMount(self, [])

    def current_pane(self) -> TabPane | None:
        try:
            tabs = self.query_one("#sections", TabbedContent)
        except Exception:
            return None
        if not tabs.active:
            return None
        return tabs.get_pane(tabs.active)

    # -- state -------------------------------------------------------------------------------

    def containers(self, pane_id: str | None = None) -> list[RecordBlock | RecordList]:
        """The top-level record blocks and lists (of one section, or of every built one)."""
        root = self
        if pane_id is not None:
            root = self.query_one("#sections", TabbedContent).get_pane(pane_id)
        return [
            w for w in root.query("RecordBlock, RecordList")
            if not isinstance(w.parent, RecordList) and block_of(w.parent) is None
        ]

    def pane_snapshot(self, pane_id: str) -> tuple:
        return tuple(c.snapshot() for c in self.containers(pane_id))

    def snapshot(self) -> dict[str, tuple]:
        return {p: self.pane_snapshot(p) for p in self._initial_by_pane}

    def is_dirty(self) -> bool:
        if not self.ready:
            return False
        return any(self.pane_snapshot(p) != initial for p, initial in self._initial_by_pane.items())

    def discard(self) -> None:
        """Forget unsaved changes (the user chose to leave without saving)."""
        self.mark_clean()

    def mark_clean(self) -> None:
        if self.ready:
            self._initial_by_pane = self.snapshot()

    def problems(self) -> list[tuple[RuleField, str]]:
        out: list[tuple[RuleField, str]] = []
        for container in self.containers():
            out.extend(container.problems())
        return out

    def banner(self, text: str, *, error: bool = False, ok: bool = False) -> None:
        banner = self.query_one("#banner", Static)
        banner.update(text)
        banner.set_class(error, "-error")
        banner.set_class(ok and not error, "-ok")

    # -- keys --------------------------------------------------------------------------------

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        if action in {"save", "add_entry", "remove_entry", "next_section", "previous_section"} and not self.ready:
            return None
        # "Add entry" is not greyed in a section of one record (pressed there, it says why
        # nothing is added): greying it when the section changed rebuilt the key line, a
        # layout and paint of their own after the section's
        return True

    def _current_list(self) -> RecordList | None:
        pane = self.current_pane()
        if pane is None:
            return None
        lists = list(pane.query(RecordList))
        return lists[-1] if lists else None

    async def action_add_entry(self) -> None:
        if not self.ready:
            return
        target = self._current_list()
        focused_block = block_of(self.focused)
        if focused_block is not None and isinstance(focused_block.parent, RecordList):
            target = focused_block.parent
        if target is None:
            self.notify("This section holds one record; there is nothing to add.", severity="warning")
            return
        block = await target.add_record()
        self.call_after_refresh(self._focus_block, block)

    def _focus_block(self, block: RecordBlock) -> None:
        fields = list(block.query(RuleField))
        if fields:
            fields[0].edit()
            block.scroll_visible()

    async def action_remove_entry(self) -> None:
        if not self.ready:
            return
        block = block_of(self.focused)
        if block is None or not isinstance(block.parent, RecordList):
            self.notify("Put the cursor in a record of a list first (this one cannot be removed).",
                        severity="warning")
            return
        owner = block.parent
        await owner.remove_block(block)
        remaining = owner.blocks
        if remaining:
            self._focus_block(remaining[-1])
        self.notify(f"Removed one {owner.noun} record (not saved yet: F9 saves).")

    async def action_next_section(self) -> None:
        await self._step_section(1)

    async def action_previous_section(self) -> None:
        await self._step_section(-1)

    async def _step_section(self, step: int) -> None:
        if not self.ready:
            return
        tabs = self.query_one("#sections", TabbedContent)
        target = self._neighbour(step)
        if target is None:
            return
        # build the section while it is still hidden, then show it with the cursor in its first
        # field: one layout and paint (showing the empty section first cost another)
        with self.app.batch_update():
            await self.build_pane(target)
            tabs.active = target
            await self.focus_first_input()

    def action_leave(self) -> None:
        self.app.after_confirming(self._close)

    def _close(self) -> None:
        if self.app.screen is self:
            self.app.pop_screen()

    # -- saving ------------------------------------------------------------------------------

    def show_problem(self, field: RuleField, message: str, count: int) -> None:
        pane = field
        while pane is not None and not isinstance(pane, TabPane):
            pane = pane.parent  # type: ignore[assignment]
        if pane is not None:
            self.query_one("#sections", TabbedContent).active = pane.id
        more = f" (and {count - 1} more)" if count > 1 else ""
        section = pane._title if pane is not None else ""  # type: ignore[attr-defined]
        self.banner(f"✗ Not saved: {section} › {field.spec.title} {message}{more}", error=True)
        self.call_after_refresh(field.edit)

    async def action_save(self) -> None:
        if self.saving or not self.ready:
            return
        self.saving = True
        try:
            # a long list may still be mounting its last blocks: every record is checked
            for record_list in self.query(RecordList):
                await record_list.complete()
        finally:
            self.saving = False
        problems = self.problems()
        extra = self.extra_problems()
        if problems:
            field, message = problems[0]
            self.show_problem(field, message, len(problems) + len(extra))
            return
        if extra:
            field, message = extra[0]
            self.show_problem(field, message, len(extra))
            return
        record = self.build_record()
        self.saving = True
        self.banner("saving…")
        self._save(record)

    def extra_problems(self) -> list[tuple[RuleField, str]]:
        """Rules across records (e.g. a norm key used twice); subclasses add theirs."""
        return []

    def build_record(self) -> Any:
        raise NotImplementedError

    def store_record(self, record: Any) -> Any:
        """Runs in a worker thread: save and return the stored record."""
        raise NotImplementedError

    @work(thread=True, exclusive=True, group="editor-save")
    def _save(self, record: Any) -> None:
        from vetting.records.errors import ConcurrentEdit, RecordsError

        try:
            saved = self.store_record(record)
        except ConcurrentEdit as exc:
            self.app.call_from_thread(self._save_conflict, exc)
            return
        except RecordsError as exc:
            self.app.call_from_thread(self._save_failed, str(exc))
            return
        except Exception as exc:  # unexpected: keep the form, say what happened
            self.app.call_from_thread(self._save_failed, f"{type(exc).__name__}: {exc}")
            return
        self.app.call_from_thread(self._saved, saved)

    def _save_conflict(self, exc: Exception) -> None:
        self.saving = False
        who = getattr(exc, "who", None) or "someone else"
        when = getattr(exc, "when", None)
        at = f" at {when}" if when else ""
        self.banner(
            f"✗ Not saved: {who} changed {self.record_label}{at}, after you opened it. "
            "Nothing was overwritten and your edits are still here. "
            "Note them, leave (Escape), reopen to see their version, then re-enter yours.",
            error=True,
        )
        self.notify(f"{who} saved a newer version{at}.", title="Not saved", severity="error", timeout=10)

    def _save_failed(self, message: str) -> None:
        self.saving = False
        self.banner(f"✗ Not saved: {message}", error=True)

    def _saved(self, saved: Any) -> None:
        self.saving = False
        self.original = saved
        self.key = saved.key
        self.after_saved(saved)
        self.mark_clean()
        self.query_one("#heading", Static).update(self._heading())
        self.banner(f"✓ Saved {self.record_label} (version {getattr(saved, 'row_version', '?')}).", ok=True)
        self.notify(f"Saved {saved.key}.")

    def after_saved(self, saved: Any) -> None:
        """Subclasses lock the key field, refresh other screens, etc."""
