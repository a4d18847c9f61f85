"""Memo: a preview of the decision memo and its export to Markdown, HTML and Word.

The preview is the memo writer's own Markdown (`vetting.memo`: gather, layout, render), shown
in Textual's Markdown widget with each table and each list drawn by ONE widget (see
`PreviewMarkdown`); exporting calls `vetting.memo.api.make_memo` in a thread worker
(written to a temporary file, then renamed into place) and shows where the file went. The
choice made on the Compare screen is used; without one, the memo takes the top-ranked
eligible instrument, as the command line does.
"""

from __future__ import annotations

import re
from pathlib import Path

from markdown_it import MarkdownIt
from markdown_it.token import Token
from rich import box
from rich.table import Table
from rich.text import Text
from textual import work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, VerticalScroll
from textual.screen import Screen
from textual.widgets import Markdown, ProgressBar, Static
from textual.widgets.markdown import MarkdownBlock
from textual.worker import get_current_worker

from vetting.tui.data import drop_in_steps, items_of
from vetting.tui.widgets.footer import Footer
from vetting.tui.widgets.navbar import NavBar
from vetting.tui.widgets.results_common import (
    CautionLine,
    CautionsScreen,
    PathPrompt,
    as_of,
    chosen_instrument,
    fixed_now,
    store_of,
)

FORMAT_NAMES = {"md": "Markdown", "html": "HTML", "docx": "Word"}


def default_memo_path(job_key: str, day, fmt: str) -> str:
    return str(Path.cwd() / f"memo-{job_key}-{day:%Y-%m-%d}.{fmt}")


#: the preview shows at most this many rows of a table or items of a list; the exported memo
#: has them all (at 10,000 instruments the memo runs to about 100,000 lines, and the preview
#: widget lays out every row it is given: seconds, and over a gigabyte at 1,000 instruments)
PREVIEW_ROWS = 40

_LIST_ITEM = re.compile(r"\s*(?:[-*+]|\d+\.)\s")


def _run_kind(line: str) -> str | None:
    if line.lstrip().startswith("|"):
        return "table"
    if _LIST_ITEM.match(line):
        return "list"
    return None


def preview_markdown(markdown: str, rows: int = PREVIEW_ROWS) -> str:
    """The memo's Markdown for the preview: without its machine-readable stamp (an HTML
    comment), and with every table or list longer than `rows` cut to its first `rows`, followed
    by a line saying how many more the exported memo holds."""
    from vetting.memo.render_md import STAMP_PREFIX

    lines = [line for line in markdown.splitlines() if not line.startswith(STAMP_PREFIX)]
    out: list[str] = []
    i = 0
    while i < len(lines):
        kind = _run_kind(lines[i])
        if kind is None:
            out.append(lines[i])
            i += 1
            continue
        j = i
        while j < len(lines) and _run_kind(lines[j]) == kind:
            j += 1
        keep = rows + (2 if kind == "table" else 0)  # a table's header and rule line
        if j - i > keep:
            out.extend(lines[i : i + keep])
            more = j - i - keep
            noun = ("row" if kind == "table" else "item") + ("s" if more != 1 else "")
            out += ["", f"*… and {more:,} more {noun}: the exported memo (k, h or w) has them all.*"]
        else:
            out.extend(lines[i:j])
        i = j
    return "\n".join(out) + "\n"


# -- the preview's widgets: one per table and one per list -------------------------------------
#
# Textual's Markdown makes a widget of every table cell (and a Horizontal, a bullet and a
# Vertical for every list item): at 10,000 instruments the preview held about 2,300 widgets,
# mounting them held the keys for about half a second, and freeing them after the screen closed
# cost the collector about 400,000 objects. Here a step added to the Markdown parser folds each
# table, and each list whose items are single paragraphs, into one token of its own; the Markdown
# widget hands that token to `unhandled_token` (its documented hook for extra tokens), which
# makes one block drawing a Rich table. Headings, paragraphs, quotes and anything else stay
# Textual's own blocks.

TABLE_TOKEN = "vetting_preview_table"
LIST_TOKEN = "vetting_preview_list"

_INLINE_STYLES = {"strong_open": "bold", "em_open": "italic", "s_open": "strike"}


def inline_text(token: Token | None) -> Text:
    """The text of an inline Markdown token, with its bold, italic and struck-out spans."""
    text = Text()
    if token is None or not token.children:
        return text
    styles: list[str] = []
    for child in token.children:
        kind = child.type
        if kind == "text":
            text.append(" ".join(child.content.split()) if "\n" in child.content else child.content,
                        " ".join(styles) or None)
        elif kind == "code_inline":
            text.append(child.content, " ".join([*styles, "bold"]))
        elif kind == "softbreak":
            text.append(" ")
        elif kind == "hardbreak":
            text.append("\n")
        elif kind in _INLINE_STYLES:
            styles.append(_INLINE_STYLES[kind])
        elif kind.endswith("_close") and kind != "link_close" and styles:
            styles.pop()
    return text


def _closing(tokens: list[Token], start: int) -> int:
    """The index of the token closing the one opened at `start`."""
    opened, closing = tokens[start].type, tokens[start].type.replace("_open", "_close")
    depth = 0
    for j in range(start, len(tokens)):
        if tokens[j].type == opened:
            depth += 1
        elif tokens[j].type == closing:
            depth -= 1
            if depth == 0:
                return j
    return len(tokens) - 1


def _fold_table(tokens: list[Token], start: int, end: int) -> Token:
    headers: list[Text] = []
    right: list[bool] = []
    rows: list[list[Text]] = []
    cell_open: Token | None = None
    for token in tokens[start:end]:
        kind = token.type
        if kind == "tr_open" and token.level == tokens[start].level + 2:
            rows.append([])
        elif kind in ("th_open", "td_open"):
            cell_open = token
        elif kind == "inline" and cell_open is not None:
            if cell_open.type == "th_open":
                headers.append(inline_text(token))
                right.append("right" in str(cell_open.attrs.get("style", "")))
            elif rows:
                rows[-1].append(inline_text(token))
    folded = Token(TABLE_TOKEN, "table", 0, map=tokens[start].map)
    folded.meta = {"headers": headers, "right": right, "rows": [row for row in rows if row]}
    return folded


def _fold_list(tokens: list[Token], start: int, end: int) -> Token | None:
    """One token for a list whose items each hold one paragraph; None for any other list."""
    items: list[tuple[str, Text]] = []
    j = start + 1
    while j < end:
        if not (j + 4 < end and tokens[j].type == "list_item_open" and tokens[j + 1].type == "paragraph_open"
                and tokens[j + 2].type == "inline" and tokens[j + 3].type == "paragraph_close"
                and tokens[j + 4].type == "list_item_close"):
            return None
        items.append((tokens[j].info, inline_text(tokens[j + 2])))
        j += 5
    folded = Token(LIST_TOKEN, "list", 0, map=tokens[start].map)
    folded.meta = {"ordered": tokens[start].type == "ordered_list_open", "items": items}
    return folded


def fold_blocks(state, draw_at=None) -> None:
    """markdown-it core step: each table, and each list of one-paragraph items, becomes one token.

    With `draw_at` (a Rich console and its options at the preview's width), each folded block
    is also drawn here, in the parser's thread (Textual's Markdown parses in a worker thread),
    so that laying out the preview finds it drawn instead of drawing 34 tables at once on the
    interface's thread (about 150 ms at 10,000 instruments)."""
    tokens: list[Token] = state.tokens
    out: list[Token] = []
    i = 0
    while i < len(tokens):
        kind = tokens[i].type
        if kind in ("table_open", "bullet_list_open", "ordered_list_open"):
            end = _closing(tokens, i)
            folded = _fold_table(tokens, i, end) if kind == "table_open" else _fold_list(tokens, i, end)
            if folded is not None:
                folded.level = tokens[i].level
                folded.meta["drawn"] = DrawnOnce(_table_of(folded) if kind == "table_open" else _list_of(folded))
                if draw_at is not None:
                    folded.meta["drawn"].draw(*draw_at)
                out.append(folded)
                i = end + 1
                continue
        out.append(tokens[i])
        i += 1
    state.tokens = out


def preview_parser(draw_at=None) -> MarkdownIt:
    """Textual's own parser settings, with the folding step added at the end."""
    parser = MarkdownIt("gfm-like")
    parser.core.ruler.push("vetting_fold_blocks", lambda state: fold_blocks(state, draw_at))
    return parser


def _table_of(token: Token) -> Table:
    """The Rich table for a folded table token: header row in bold under a rule, numeric
    columns aligned right, long cells wrapped within the pane."""
    meta = token.meta
    # no outer frame and one space beside each rule between columns: a wide table keeps
    # as much of the pane's width for its text as it can (a word too long for its column
    # ends in an ellipsis, as in Textual's own table)
    table = Table(box=box.MINIMAL_HEAVY_HEAD, header_style="bold", border_style="dim", show_edge=False,
                  pad_edge=False, padding=(0, 1), collapse_padding=True, expand=False)
    for header, right in zip(meta["headers"], meta["right"]):
        table.add_column(header, justify="right" if right else "left", overflow="ellipsis")
    for row in meta["rows"]:
        table.add_row(*row)
    return table


def _list_of(token: Token) -> Table:
    """A Rich grid for a folded list token: the bullets (or numbers) in a column of their own,
    so that a long item wraps under its own text."""
    grid = Table.grid(padding=(0, 1), expand=True)
    grid.add_column(no_wrap=True, justify="right")
    grid.add_column(ratio=1)
    for number, (info, text) in enumerate(token.meta["items"], 1):
        bullet = f"{info or number}." if token.meta["ordered"] else "•"
        grid.add_row(Text(bullet, style="bold"), text)
    return grid


class DrawnOnce:
    """A Rich renderable (a table) drawn once for each width and options it is asked for.

    Textual draws a widget's content to learn its height and again to show it, and lays the
    preview out several times while it mounts: at 10,000 instruments the preview's tables were
    drawn about 100 times (0.35 s, in pauses of up to 200 ms). Drawn once, the lines are kept
    (for the last few widths) and given back as they were.
    """

    def __init__(self, renderable) -> None:
        self.renderable = renderable
        self._lines: dict[tuple, list] = {}

    @staticmethod
    def _key(options) -> tuple:
        # not the height: Textual asks with and without it, and crops the lines itself
        return options.max_width, options.min_width, options.justify, options.overflow, options.no_wrap

    def draw(self, console, options) -> list:
        """Draw the lines for these options and keep them (the last few widths)."""
        if len(self._lines) >= 4:
            self._lines.pop(next(iter(self._lines)))
        lines = console.render_lines(self.renderable, options.update(height=None), pad=False, new_lines=False)
        self._lines[self._key(options)] = lines
        return lines

    def __rich_measure__(self, console, options):
        from rich.measure import Measurement

        return Measurement.get(console, options, self.renderable)

    def __rich_console__(self, console, options):
        from rich.segment import Segment

        lines = self._lines.get(self._key(options))
        if lines is None:
            lines = self.draw(console, options)
        new_line = Segment.line()
        for line in lines:
            yield from line
            yield new_line


class PreviewTable(MarkdownBlock):
    """A whole Markdown table in one widget: a Rich table, header row in bold under a rule,
    numeric columns aligned right, long cells wrapped within the pane."""

    DEFAULT_CSS = """
    PreviewTable {
        width: 1fr;
        height: auto;
        margin-bottom: 1;
    }
    """

    def __init__(self, markdown: Markdown, token: Token) -> None:
        super().__init__(markdown, token)
        self.rows = token.meta["rows"]
        self.drawn = token.meta["drawn"]
        self.table = self.drawn.renderable
        self.update(self.drawn)


class PreviewList(MarkdownBlock):
    """A whole list of one-paragraph items in one widget: the bullets (or numbers) in a column
    of their own, so that a long item wraps under its own text."""

    DEFAULT_CSS = """
    PreviewList {
        width: 1fr;
        height: auto;
        margin: 0 0 1 0;
    }
    """

    def __init__(self, markdown: Markdown, token: Token) -> None:
        super().__init__(markdown, token)
        self.items = [text for _info, text in token.meta["items"]]
        self.drawn = token.meta["drawn"]
        self.update(self.drawn)


# PreviewTable and PreviewList do not inherit the blocks' component classes (em, strong, s,
# code_inline: how Markdown styles inline spans): their cells carry their own bold and italic, and
# Textual makes and styles a stand-in node for each such name on each block. (DOMNode takes
# `inherit_component_classes=False` as a class keyword, but Widget does not pass it on, so the
# flag it sets is set here.)
PreviewTable._inherit_component_classes = False
PreviewList._inherit_component_classes = False


class PreviewMarkdown(Markdown):
    """Textual's Markdown widget with each table and each simple list as one widget."""

    def __init__(self, markdown: str | None = None, **kwargs) -> None:
        super().__init__(markdown, parser_factory=self._parser, **kwargs)

    def _parser(self) -> MarkdownIt:
        # called by Markdown.update on the interface's thread; the parse then runs in a thread
        # and draws the folded blocks at the width they will be laid out at (see fold_blocks)
        width = self.content_region.width
        if width <= 0:
            return preview_parser()
        options = self.app.console_options.update_width(width).update(highlight=False)
        return preview_parser((self.app.console, options))

    def unhandled_token(self, token: Token) -> MarkdownBlock | None:
        if token.type == TABLE_TOKEN:
            return PreviewTable(self, token)
        if token.type == LIST_TOKEN:
            return PreviewList(self, token)
        return super().unhandled_token(token)


class PreviewScroll(VerticalScroll):
    """The preview's scrolling pane: Textual's VerticalScroll, restyling only itself when it
    gains or loses focus.

    Textual restyles a widget and every widget inside it on each focus change; the preview
    holds several thousand (Textual's Markdown makes a widget of each table cell), so leaving
    the screen, or opening the export prompt, took over a second at 10,000 instruments. Only
    the pane's own look depends on its focus (`MemoScreen #preview:focus`); nothing inside it
    has a style that depends on it.
    """

    def watch_has_focus(self, _has_focus: bool) -> None:
        self.app.stylesheet.update_nodes([self], animate=True)


class MemoScreen(Screen):
    """Preview the memo; export it as Markdown (k), HTML (h) or Word (w)."""

    screen_name = "memo"
    CSS_PATH = "memo.tcss"
    AUTO_FOCUS = "#preview"

    BINDINGS = [
        Binding("w", "export('docx')", "Word", id="memo.docx", tooltip="Write the memo as a Word file"),
        Binding("h", "export('html')", "HTML", id="memo.html", tooltip="Write the memo as one HTML file"),
        Binding("k", "export('md')", "Markdown", id="memo.md", tooltip="Write the memo as Markdown"),
        Binding("f", "toggle_final", "Draft/final", id="memo.final",
                tooltip="A final memo is recorded as a decision in the database"),
        Binding("r", "refresh_preview", "Refresh", id="memo.refresh", tooltip="Build the preview again"),
        Binding("c", "cautions", "Cautions", id="memo.cautions", tooltip="Every caution for these results"),
    ]

    def __init__(self, store_url: str, job_key: str | None = None) -> None:
        super().__init__()
        self.store_url = store_url
        self.job_key = job_key
        self.final = False
        self.markdown = ""
        self.written: list[Path] = []
        self.error: str | None = None

    def compose(self) -> ComposeResult:
        yield NavBar("memo")
        yield Static(f"Memo · {self.job_key or 'no job'}", id="heading", classes="title-bar")
        yield Static("", id="state", classes="status-line")
        yield Static("Planned use in the memo: the job's own selection ratio (hires ÷ applicants); "
                     "cuts tried on Plan are not carried over.", id="plan-note", classes="status-line")
        with Horizontal(id="working"):
            yield Static("Reading the records…", id="working-text")  # the preview's first step
            yield ProgressBar(total=3, show_eta=False, id="progress")
        with PreviewScroll(id="preview"):
            yield PreviewMarkdown("", id="memo-md")
        yield Static("", id="written", classes="status-line")
        yield CautionLine()
        yield Footer()

    def on_mount(self) -> None:
        self._show_state()
        # built once the screen is painted (a worker started here competes with the first paint)
        self.call_after_refresh(self.build_preview)

    # -- state -------------------------------------------------------------------------------

    @property
    def choice(self) -> str | None:
        return chosen_instrument(self.app, self.job_key)

    def _show_state(self) -> None:
        text = Text(no_wrap=True, overflow="ellipsis")
        text.append("Choice ", style="bold")
        text.append(f"▶ {self.choice} (chosen on Compare)" if self.choice else "top-ranked eligible (none chosen)")
        text.append(" · Status ", style="bold")
        if self.final:
            text.append("FINAL: recorded as a decision on export", style="bold reverse")
        else:
            text.append("draft (f: final)")
        self.query_one("#state", Static).update(text)

    def _working(self, step: int, words: str) -> None:
        self.query_one("#working").display = True
        self.query_one("#working-text", Static).update(words)
        self.query_one(ProgressBar).update(total=3, progress=step)

    def _done_working(self) -> None:
        self.query_one(ProgressBar).update(progress=3)
        self.query_one("#working").display = False

    # -- preview -----------------------------------------------------------------------------

    @work(thread=True, exclusive=True, group="memo-preview")
    def build_preview(self) -> None:
        from vetting.memo import render_md
        from vetting.memo.build import gather, layout
        from vetting.records.gcpause import gc_pause

        worker = get_current_worker()
        call = self.app.call_from_thread
        call(self._working, 0, "Reading the records…")
        try:
            store = store_of(self, self.store_url)
            call(self._working, 1, "Ranking and planning for the memo…")
            # the collector is paused while the memo is put together: only its text outlives
            # this block, and a full collection here (over a second at 10,000 instruments)
            # would hold the interface's keys meanwhile (see vetting.records.gcpause)
            with gc_pause():
                data = gather(store, self.job_key, choose=self.choice, status="final" if self.final else "draft",
                              as_of=as_of(self), now=fixed_now(self))
                call(self._working, 2, "Laying out…")
                markdown = render_md.render(layout(data))
                held = items_of(data)
                del data  # its containers go quickly: their items are held
                drop_in_steps(held)
        except Exception as exc:
            if not worker.is_cancelled:
                call(self._preview_failed, exc)
            return
        if not worker.is_cancelled:
            call(self._previewed, preview_markdown(markdown))

    def _preview_failed(self, exc: Exception) -> None:
        self._done_working()
        self.error = str(exc)
        self.query_one("#memo-md", Markdown).update(f"**✗ No memo can be made yet:** {exc}")
        self.notify(str(exc), title="Memo", severity="error", timeout=10)

    def _previewed(self, markdown: str) -> None:
        self.error = None
        self.markdown = markdown
        self.query_one("#memo-md", Markdown).update(markdown)
        self._done_working()

    # -- export ------------------------------------------------------------------------------

    def action_export(self, fmt: str) -> None:
        if self.job_key is None:
            return
        default = default_memo_path(self.job_key, as_of(self), fmt)
        question = f"Write the {FORMAT_NAMES[fmt]} memo ({'FINAL, recorded' if self.final else 'draft'}) to:"

        def answered(path: str | None) -> None:
            if path:
                self.export(fmt, path)

        self.app.push_screen(PathPrompt(question, default), answered)

    @work(thread=True, exclusive=True, group="memo-export")
    def export(self, fmt: str, path: str) -> None:
        from vetting.memo.api import make_memo

        call = self.app.call_from_thread
        call(self._working, 1, f"Writing the {FORMAT_NAMES[fmt]} memo…")
        try:
            store = store_of(self, self.store_url)
            result = make_memo(store, self.job_key, fmt=fmt, out=path, choose=self.choice, final=self.final,
                               as_of=as_of(self), now=fixed_now(self))
        except Exception as exc:  # the memo writer's message names the path and the rule
            call(self._export_failed, fmt, exc)
            return
        call(self._exported, result)

    def _export_failed(self, fmt: str, exc: Exception) -> None:
        self._done_working()
        message = str(exc).replace("--out ", "")
        self.query_one("#written", Static).update(Text(f"✗ {FORMAT_NAMES[fmt]} memo not written: {message}",
                                                      style="bold"))
        self.notify(message, title="Not written", severity="error", timeout=12)

    def _exported(self, result) -> None:
        self._done_working()
        self.written.append(result.path)
        status = "final, recorded as a decision" if result.status == "final" else "draft"
        self.query_one("#written", Static).update(
            Text(f"✓ {FORMAT_NAMES[result.fmt]} memo ({status}) written to {result.path}"))
        self.notify(f"{result.path}", title=f"{FORMAT_NAMES[result.fmt]} memo written", timeout=10)

    # -- other keys --------------------------------------------------------------------------

    def action_toggle_final(self) -> None:
        self.final = not self.final
        self._show_state()
        if self.final:
            self.notify("Exports will be FINAL memos, each recorded as a decision with its fingerprint. "
                        "Press f again for drafts.", title="Final", severity="warning", timeout=8)
        self.build_preview()

    def action_refresh_preview(self) -> None:
        self.build_preview()

    def action_cautions(self) -> None:
        from vetting.appraisal.types import CAUTIONS
        from vetting.memo.build import MEMO_CAUTIONS

        self.app.push_screen(CautionsScreen(tuple(CAUTIONS) + tuple(MEMO_CAUTIONS)))
