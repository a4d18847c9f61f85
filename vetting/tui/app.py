"""The terminal workspace: the app shell, its global keys, navigation and command palette.

`make_app(url)` builds the app for a database URL (tests inject a temporary SQLite URL and a
fixed date); `run_app(url)` runs it and returns an exit status.

Screens are reached by name with `VettingApp.go(name)`:

* "catalogue" (the landing screen), "jobs", "help" live in this package;
* "compare", "plan", "gaps", "memo" are results screens written separately. Each is looked up
  lazily as ``vetting.tui.screens.<name>.<Name>Screen`` (CompareScreen, PlanScreen, GapsScreen,
  MemoScreen), constructed as ``Screen(store_url: str, job_key: str | None = None)``. Until a
  module exists the key says so instead of failing.
"""

from __future__ import annotations

import datetime as dt
import gc
import importlib
import time
from collections.abc import Callable, Iterable
from functools import partial

from textual import events, work
from textual.app import App, SystemCommand
from textual.binding import Binding
from textual.command import DiscoveryHit, Hit, Hits, Provider
from textual.screen import Screen
from textual.worker import active_worker
from textual.worker_manager import WorkerManager

from vetting.records import gcpause
from vetting.tui.data import Data

#: Results screens provided by other modules: name -> (module, class name).
RESULT_SCREENS: dict[str, tuple[str, str]] = {
    "compare": ("vetting.tui.screens.compare", "CompareScreen"),
    "plan": ("vetting.tui.screens.plan", "PlanScreen"),
    "gaps": ("vetting.tui.screens.gaps", "GapsScreen"),
    "memo": ("vetting.tui.screens.memo", "MemoScreen"),
}

#: Every screen name reachable with `go`, in the order of their keys.
SCREEN_NAMES = ("catalogue", "jobs", *RESULT_SCREENS, "help")

#: the garbage collector's full collections while the interface runs (see
#: VettingApp._defer_full_collections): never automatic; when the interface has had no key or
#: click and no busy worker for IDLE_SECONDS and the younger generation has been collected
#: FULL_COLLECTION_AFTER times since the last full collection (Python's own default: 10)
FULL_COLLECTION_NEVER = 1_000_000_000
FULL_COLLECTION_AFTER = 25
#: ... and while a results screen or an editor is open (see VettingApp._collect_when_idle)
FULL_COLLECTION_AFTER_OPEN = 200
IDLE_SECONDS = 5.0
IDLE_CHECK_SECONDS = 1.0
#: the instrument editor is built ahead once no key has been pressed for this long (on the catalogue)
PREBUILD_QUIET_SECONDS = 0.5

#: the stylesheets of the screens in this package and the results screens (see CSS_PATH)
SCREEN_STYLESHEETS = (
    "screens/catalogue.tcss",
    "screens/compare.tcss",
    "screens/plan.tcss",
    "screens/gaps.tcss",
    "screens/memo.tcss",
)

#: modules the results screens and their workers import on first use, imported in a thread
#: once the catalogue is loaded (see VettingApp.freeze_long_lived)
WARM_MODULES = (
    *(module for module, _ in RESULT_SCREENS.values()),
    "vetting.appraisal.service",
    "vetting.appraisal",
    "vetting.memo.build",
    "vetting.memo.render_md",
    "vetting.memo.api",
)

DARK_THEME = "textual-dark"
LIGHT_THEME = "textual-light"


def result_screen_class(name: str) -> type[Screen] | None:
    """The results screen class for `name`, or None when its module is not there yet."""
    module_name, class_name = RESULT_SCREENS[name]
    try:
        module = importlib.import_module(module_name)
    except ModuleNotFoundError as exc:
        if exc.name == module_name:
            return None
        raise
    return getattr(module, class_name, None)


class ActionsProvider(Provider):
    """Lists every action: the app's keys and those of the screen the palette was opened on.

    Built from the bindings themselves, so the palette and the keys cannot drift apart.
    """

    def _commands(self) -> list[tuple[str, str, Callable[[], object]]]:
        app = self.app
        found: list[tuple[str, str, Callable[[], object]]] = []
        seen: set[str] = set()
        screen = self.screen
        for owner, bindings in ((screen, type(screen).BINDINGS), (app, type(app).BINDINGS)):
            for binding in bindings:
                if not isinstance(binding, Binding) or not binding.description:
                    continue
                if binding.action in seen or binding.action.startswith("command_palette"):
                    continue
                seen.add(binding.action)
                key = app.get_key_display(binding)
                title = binding.description
                help_text = f"key {key}" + (f" - {binding.tooltip}" if binding.tooltip else "")
                found.append((title, help_text, partial(owner.run_action, binding.action)))
        return found

    async def discover(self) -> Hits:
        for title, help_text, command in self._commands():
            yield DiscoveryHit(title, command, help=help_text)

    async def search(self, query: str) -> Hits:
        matcher = self.matcher(query)
        for title, help_text, command in self._commands():
            score = matcher.match(title)
            if score > 0:
                yield Hit(score, matcher.highlight(title), command, text=title, help=help_text)


class _ReleasingWorkers(WorkerManager):
    """Textual's worker manager, whose thread workers let go of themselves when they end.

    A thread worker runs in a thread of the event loop's pool and marks itself as that thread's
    current worker (a context variable of the thread, which outlives the work). The pool's
    threads are kept, so each held on to the last worker it ran, and through it the screen that
    started it, with every widget and row: a closed Compare or Memo screen stayed in memory
    until its thread ran other work, and every full garbage collection scanned it meanwhile
    (about 250,000 objects for a closed memo preview). Here the mark is cleared when the work
    returns; the work itself runs exactly as before.
    """

    def _new_worker(self, work, node, **kwargs):
        if kwargs.get("thread") and callable(work) and not _is_async(work):
            work = _releasing(work)
        return super()._new_worker(work, node, **kwargs)


def _is_async(work) -> bool:
    import inspect

    return inspect.iscoroutinefunction(work) or inspect.iscoroutinefunction(getattr(work, "func", None)) \
        or inspect.isawaitable(work)


def _releasing(work):
    def run():
        try:
            return work()
        finally:
            active_worker.set(None)  # the thread no longer holds the worker (nor its screen)

    run.__name__ = getattr(work, "__name__", "") or getattr(getattr(work, "func", None), "__name__", "")
    return run


class VettingApp(App[int]):
    """The vetting workspace."""

    TITLE = "vetting"
    SUB_TITLE = "choose and defend employment tests"
    #: the screens' own stylesheets are read here, at start, while no widget exists yet: read
    #: when a screen first opened, each one made Textual parse every stylesheet again and apply
    #: it to every widget on screen, inside the key's response (the same files and rules either
    #: way; a screen finds its file already read and adds nothing)
    CSS_PATH = ["app.tcss", *SCREEN_STYLESHEETS]
    COMMANDS = App.COMMANDS | {ActionsProvider}

    BINDINGS = [
        Binding("f1", "go('help')", "Keys", show=False, id="go.help", tooltip="Every key on every screen"),
        Binding("f2", "go('catalogue')", "Catalogue", show=False, id="go.catalogue", tooltip="All instruments"),
        Binding("f3", "go('jobs')", "Jobs", show=False, id="go.jobs", tooltip="Job profiles and policies"),
        Binding("f4", "go('compare')", "Compare", show=False, id="go.compare", tooltip="Ranking for the current job"),
        Binding("f5", "go('plan')", "Plan", show=False, id="go.plan", tooltip="Cut-score planner"),
        Binding("f6", "go('gaps')", "Gaps", show=False, id="go.gaps", tooltip="Evidence still missing"),
        Binding("f7", "go('memo')", "Memo", show=False, id="go.memo", tooltip="Decision memo and export"),
        Binding("f8", "flip_theme", "Light/dark", show=False, id="app.theme", tooltip="Switch light and dark colours"),
        Binding("ctrl+q", "leave_app", "Quit", id="app.quit", priority=True, tooltip="Quit (asks if unsaved)"),
    ]

    def __init__(
        self, url: str, *, today: dt.date | None = None, data: Data | None = None, cursor_blink: bool = True
    ) -> None:
        super().__init__()
        self._workers = _ReleasingWorkers(self)
        self.url = url
        #: False keeps text cursors steady (tests and screenshots)
        self.cursor_blink = cursor_blink
        self.today = today
        self.data = data or Data(url, today=today)
        #: the job the results screens work on (set by the Jobs screen)
        self.current_job: str | None = None
        self.theme = DARK_THEME
        self._heap_frozen = False
        self._warm_started = False
        #: a screen was opened since the last full collection on the catalogue
        self._screen_closed = False
        self._default_job_started = False
        #: the instrument editor is to be built ahead at the next quiet moment (set after the warm-up)
        self._prebuild_wanted = False

    # -- lifecycle ---------------------------------------------------------------------------

    def on_mount(self) -> None:
        from vetting.tui.screens.catalogue import CatalogueScreen

        self._defer_full_collections()
        self.push_screen(CatalogueScreen())

    def pick_default_job(self) -> None:
        """Start finding the first job (once). The catalogue calls this when its first rows are
        on screen: reading every job (400 at 10,000 instruments) alongside the first page made
        the first usable screen wait for it."""
        if not self._default_job_started:
            self._default_job_started = True
            self._pick_default_job()

    @work(thread=True, exclusive=True, group="default-job")
    def _pick_default_job(self) -> None:
        """Make the first job (in the Jobs screen's order) current, so F4-F7 work at once."""
        try:
            jobs = self.data.jobs()
        except Exception:  # the Jobs screen reports database problems when it is opened
            return
        if jobs:
            first = min(jobs, key=lambda j: j.title.lower()).key
            self.call_from_thread(self._default_job, first)

    def _default_job(self, key: str) -> None:
        if self.current_job is None:
            self.current_job = key

    def freeze_long_lived(self) -> None:
        """Exempt what is loaded by now from the cyclic garbage collector's full scans.

        Called once, when the catalogue is first read in full. By then the heap holds about
        200,000 long-lived objects (the libraries' modules, functions and types, and one row per
        instrument); without this, every full collection rescans all of them (about 0.15 s here),
        and building one screen's widgets allocates enough to start one, so opening the editor
        or another screen stalled for that long. Frozen objects are still freed by reference
        counting when dropped (a reloaded catalogue's old rows hold no cycles); only cyclic
        garbage among them would stay, so this is done once, not after every load (and later
        only after a full collection with nothing but the catalogue open, see
        `_collect_when_idle`). The freeze waits for `_warm_up`, so the modules the results
        screens use are frozen with the rest.
        """
        if not self._heap_frozen and not self._warm_started:
            self._warm_started = True
            self._warm_up()

    @work(thread=True, exclusive=True, group="warm-up")
    def _warm_up(self) -> None:
        """Import what the results screens use on first use, then freeze the heap.

        Off the interface thread, while the user reads the catalogue: imported inside the F4-F7
        key's response, these modules (the screens, Textual's Markdown and its parser, the
        engine's ranking and the memo writer) cost tens of milliseconds there, and what they
        leave on the heap was never frozen, so every later full collection scanned it again.
        """
        for name in WARM_MODULES:
            try:
                importlib.import_module(name)
            except Exception:  # a missing or broken module reports itself when its key is used
                pass
        self.call_from_thread(self._warmed_up)

    def _warmed_up(self) -> None:
        self._prebuild_wanted = True
        self._prebuild_when_quiet()
        self._freeze()

    def _freeze(self) -> None:
        if not self._heap_frozen:
            self._heap_frozen = True
            gc.freeze()
            # with everything frozen this scans next to nothing, and it starts the count of
            # young collections (see _collect_when_idle) afresh: what came before is frozen
            gc.collect()

    def _defer_full_collections(self) -> None:
        """Full garbage collections wait until the interface is idle (restored on exit).

        A full collection scans every object not frozen: with a results screen open at 10,000
        instruments that is several hundred thousand (the ranking, the table's rows), about
        0.3-1 s on a busy 2-core machine, and Python starts one whenever the heap has grown by
        a quarter, in whichever thread happens to allocate: a worker's as often as the
        interface's. The collector holds the interpreter lock meanwhile, so keys froze. The
        young generations are still collected as usual (a few milliseconds each); the full
        collection runs from `_collect_when_idle`, after a pause in the typing with no worker
        busy, so garbage (closed screens) is still freed.
        """
        self._gc_threshold = gc.get_threshold()
        gc.set_threshold(self._gc_threshold[0], self._gc_threshold[1], FULL_COLLECTION_NEVER)
        # with full collections deferred, the engine's bulk work (loading, ranking) need not
        # switch the collector off: a pause ended with one long young collection, in the worker,
        # holding the interpreter lock (the keys stalled for about 0.15 s after a ranking)
        gcpause.set_pausing(False)
        self._last_input = time.monotonic()
        self._last_busy = self._last_input
        #: since when only the catalogue has been shown (None: something else is open)
        self._rest_since: float | None = None
        self.set_interval(IDLE_CHECK_SECONDS, self._collect_when_idle, name="idle-collector")

    def at_rest(self) -> bool:
        """Only the catalogue is shown: no results screen, editor or dialog is open."""
        from vetting.tui.screens.catalogue import CatalogueScreen

        try:
            return len(self.screen_stack) <= 2 and isinstance(self.screen, CatalogueScreen)
        except Exception:  # no screen (starting or closing)
            return False

    def _collect_when_idle(self) -> None:
        """The full collection, when it holds no key up and frees what closed screens left.

        It runs when the interface has had no key or click, and no worker has been busy, for
        IDLE_SECONDS, so not just after a screen has done its work (the memo preview used to
        be followed by a collection of over a million objects while the user read it). Where a
        results screen or an editor is open, it waits for FULL_COLLECTION_AFTER_OPEN young
        collections (much garbage): that screen's widgets are alive anyway, and what it leaves
        is freed on the catalogue, where a collection follows each closed screen (closing one
        makes garbage without allocating, so the young count does not show it). On the
        catalogue, what survives the collection is the
        catalogue itself and the libraries: it is frozen too (see `freeze_long_lived`), so the
        next collection scans only what is new since, mostly the next closed screen's garbage.
        That waits until the catalogue alone has been shown for IDLE_SECONDS, so a screen that
        has just closed is garbage by then, not frozen with the rest.
        """
        self._prebuild_when_quiet()
        now = time.monotonic()
        rest = self.at_rest()
        if not rest:
            self._rest_since = None
            self._screen_closed = True  # garbage once it closes, which allocates nothing
        elif self._rest_since is None:
            self._rest_since = now
        if any(worker.is_running for worker in self.workers):
            self._last_busy = now
            return
        if not gc.isenabled() or now - max(self._last_input, self._last_busy) < IDLE_SECONDS:
            return
        young = gc.get_count()[2]
        if rest:
            if young < FULL_COLLECTION_AFTER and not self._screen_closed:
                return
            if now - self._rest_since < IDLE_SECONDS:
                return  # a screen just closed may still be on its way out: never freeze it
        elif young < FULL_COLLECTION_AFTER_OPEN:
            return
        gc.collect()
        if rest:
            self._screen_closed = False
            if self._heap_frozen:
                gc.freeze()

    async def on_event(self, event: events.Event) -> None:
        if isinstance(event, (events.Key, events.MouseDown)):
            self._last_input = time.monotonic()
        await super().on_event(event)

    def _restore_collector(self) -> None:
        threshold = getattr(self, "_gc_threshold", None)
        if threshold is not None:
            gc.set_threshold(*threshold)
            gcpause.set_pausing(True)
        if self._heap_frozen:  # hand the frozen objects back to the collector
            gc.unfreeze()
            self._heap_frozen = False

    def on_descendant_focus(self, event: events.DescendantFocus) -> None:
        if not self.cursor_blink and hasattr(event.widget, "cursor_blink"):
            event.widget.cursor_blink = False

    def on_unmount(self) -> None:
        self.data.close()
        self._restore_collector()

    def get_system_commands(self, screen: Screen) -> Iterable[SystemCommand]:
        # Our own Quit asks before dropping unsaved changes and our own Keys screen lists every
        # key, so Textual's versions of those two are left out; its other extras stay.
        for command in super().get_system_commands(screen):
            if command.title.lower() in {"quit", "keys"}:
                continue
            yield command

    # -- leaving with unsaved work -----------------------------------------------------------

    def unsaved_screens(self) -> list[Screen]:
        return [s for s in self.screen_stack if getattr(s, "is_dirty", lambda: False)()]

    def after_confirming(self, then: Callable[[], object]) -> None:
        """Run `then` now, or after the user agrees to drop unsaved changes."""
        dirty = self.unsaved_screens()
        if not dirty:
            then()
            return
        from vetting.tui.widgets.confirm import Confirm

        names = ", ".join(getattr(s, "record_label", "this record") for s in dirty)
        question = f"Unsaved changes in {names}.\nLeave without saving them?"

        def answered(leave: bool | None) -> None:
            if leave:
                for screen in dirty:
                    getattr(screen, "discard", lambda: None)()
                then()

        self.push_screen(Confirm(question, yes="Leave (y)", no="Stay (n)"), answered)

    def action_leave_app(self) -> None:
        if isinstance(self.screen, _modal_types()):
            return
        self.after_confirming(lambda: self.exit(0))

    # -- navigation --------------------------------------------------------------------------

    def action_go(self, name: str) -> None:
        self.go(name)

    def go(self, name: str, **kwargs: object) -> None:
        """Show the screen called `name` (asks first if an editor holds unsaved changes)."""
        if name not in SCREEN_NAMES:
            raise ValueError(f"unknown screen {name!r}")
        self._screen_closed = True  # leaves garbage behind when it closes (see _collect_when_idle)
        if isinstance(self.screen, _modal_types()):
            return
        if getattr(self.screen, "screen_name", None) == name and not kwargs:
            return
        if name == "help":  # help sits on top of whatever is open; nothing is lost
            from vetting.tui.screens.help import HelpScreen

            # built once and kept (the keys do not change while the app runs)
            if not self.is_screen_installed("help"):
                self.install_screen(HelpScreen(), "help")
            self.push_screen("help")
            return
        if name == "catalogue":
            self.after_confirming(self._to_catalogue)
            return
        screen = self._build(name, **kwargs)
        if screen is None:
            return
        self.after_confirming(partial(self._show_base, screen))

    def _build(self, name: str, **kwargs: object) -> Screen | None:
        if name == "jobs":
            from vetting.tui.screens.job import JobsScreen

            return JobsScreen()
        cls = result_screen_class(name)
        if cls is None:
            self.notify(f"The {name} screen is not installed in this build.", title=name.title(), severity="warning")
            return None
        job = kwargs.get("job_key", self.current_job)
        if job is None:
            self.notify("Choose a job first: F3 Jobs, highlight the job, then this key again.", title=name.title(), severity="warning")
            return None
        screen = cls(self.url, job)
        screen.screen_name = name  # type: ignore[attr-defined]
        return screen

    def _to_catalogue(self) -> None:
        """Drop everything above the catalogue (the bottom screen of ours)."""
        while len(self.screen_stack) > 2:
            self.pop_screen()

    def _show_base(self, screen: Screen) -> None:
        """Drop everything above the catalogue, then show `screen` on top of it."""
        self._to_catalogue()
        self.push_screen(screen)

    def open_instrument(self, key: str | None) -> None:
        """Open the instrument editor on `key` (None: a new instrument)."""
        from vetting.tui.screens.instrument import InstrumentEditor

        self._open_editor(InstrumentEditor, key)

    def open_job(self, key: str | None) -> None:
        from vetting.tui.screens.job import JobEditor

        self._open_editor(JobEditor, key)

    def _open_editor(self, cls: type, key: str | None) -> None:
        """Show an editor of kind `cls` on `key`. One editor of each kind is kept once built
        (installed, so closing it does not take it apart) and refilled for the next record:
        building a form of dozens of fields took longer than a key should."""
        self._screen_closed = True
        name = _editor_name(cls)
        if self.is_screen_installed(name):
            editor = self.get_screen(name)
            if editor.can_reuse():  # type: ignore[attr-defined]
                editor.reuse(key, partial(self.push_screen, editor))  # type: ignore[attr-defined]
            else:  # this kind is open already, lower down, or still being built: another one
                self.push_screen(cls(key))
            return
        editor = cls(key)
        self.install_screen(editor, name)
        self.push_screen(editor)

    def _prebuild_when_quiet(self) -> None:
        """Build the editor ahead (once, see `prebuild_editors`) when the catalogue alone is
        shown and no key has been pressed for PREBUILD_QUIET_SECONDS: never in a burst of typing."""
        if not self._prebuild_wanted or not self.at_rest():
            return
        if time.monotonic() - self._last_input < PREBUILD_QUIET_SECONDS:
            return  # the idle check (every IDLE_CHECK_SECONDS) tries again
        self._prebuild_wanted = False
        self.prebuild_editors()

    def prebuild_editors(self) -> None:
        """Build the instrument editor's form ahead of use, unseen, while the user reads the
        catalogue (called once, at rest, after the warm-up imports): the first instrument opened
        then only refills it (see `_open_editor`). The editor is pushed and popped in the same
        turn, so it is never drawn and takes no key; it builds its form, for a new record, in
        its own turns afterwards. (The job editor's first section is small: built ahead, its
        first showing took as long as building it when first opened, so it is built then.)"""
        if not self.at_rest():
            return  # something else is open: the editor is built when first used
        from vetting.tui.screens.instrument import InstrumentEditor

        name = _editor_name(InstrumentEditor)
        if self.is_screen_installed(name):
            return
        editor = InstrumentEditor(None)
        editor.unseen = True
        self.install_screen(editor, name)
        self.push_screen(editor)
        self.pop_screen()

    # -- looks -------------------------------------------------------------------------------

    def action_flip_theme(self) -> None:
        self.theme = LIGHT_THEME if self.theme == DARK_THEME else DARK_THEME


def _editor_name(cls: type) -> str:
    """The name the kept editor of kind `cls` is installed under."""
    return f"editor:{cls.__name__}"


def _modal_types() -> tuple[type, ...]:
    from textual.command import CommandPalette
    from textual.screen import ModalScreen

    return (ModalScreen, CommandPalette)


def make_app(url: str, *, today: dt.date | None = None, cursor_blink: bool = True) -> VettingApp:
    """Build the app for the database at `url`.

    Tests pass a temporary SQLite URL, a fixed `today` (figures such as norm age depend on
    it) and `cursor_blink=False` so screenshots are stable.
    """
    return VettingApp(url, today=today, cursor_blink=cursor_blink)


def run_app(url: str) -> int:
    """Run the workspace on the database at `url`; returns the exit status."""
    app = make_app(url)
    result = app.run()
    if app.return_code not in (None, 0):
        return int(app.return_code)
    return int(result or 0)
