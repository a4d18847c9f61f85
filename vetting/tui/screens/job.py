"""Jobs: the list of job profiles, and the job editor (profile, required attributes, and the
scoring policy with its versions and lock)."""

from __future__ import annotations

from typing import Any

from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import DataTable, Static

from vetting.records.domain import WEIGHT_NAMES, Attribute, Job, Policy, Requirement
from vetting.tui.widgets.editor import EditorScreen
from vetting.tui.widgets.footer import Footer
from vetting.tui.widgets.navbar import NavBar
from vetting.tui.widgets.form import FieldSpec, RecordBlock, RecordList, RuleField, text_of

NO_VALUE = "—"


def policy_state(policy: Policy) -> str:
    """'v2 locked 2026-11-30' / 'v1 open' / 'not saved'."""
    if policy.version is None:
        return "not saved"
    if policy.locked_at is not None:
        return f"v{policy.version} locked {policy.locked_at:%Y-%m-%d %H:%M} UTC"
    return f"v{policy.version} open"


class JobsScreen(Screen):
    """All job profiles. The highlighted job is the one the results screens work on."""

    screen_name = "jobs"
    AUTO_FOCUS = "#jobs"
    DEFAULT_CSS = """
    JobsScreen #jobs { height: 1fr; }
    """
    BINDINGS = [
        Binding("ctrl+n", "new_job", "New job", id="jobs.new", tooltip="Create a job profile"),
        Binding("enter", "open_job", "Edit", id="jobs.open", tooltip="Edit the highlighted job"),
        Binding("ctrl+l", "reload", "Reload", id="jobs.reload", tooltip="Read the jobs again"),
        Binding("ctrl+y", "delete_job", "Delete", id="jobs.delete",
                tooltip="Delete the highlighted job (asks first; kept in the audit trail)"),
    ]

    def __init__(self) -> None:
        super().__init__()
        self.jobs: list[Job] = []

    def compose(self) -> ComposeResult:
        yield NavBar("jobs")
        yield Static("Jobs", classes="title-bar")
        yield DataTable(id="jobs", cursor_type="row", zebra_stripes=True)
        yield Static("loading…", id="status", classes="status-line")
        yield Footer()

    def on_mount(self) -> None:
        table = self.query_one(DataTable)
        title_width = max(20, min(70, self.app.size.width - (8 + 2) - (30 + 2) - 6))
        table.add_column("Title", key="title", width=title_width)
        table.add_column("Needs", key="needs", width=8)
        table.add_column("Policy", key="policy", width=30)
        self.load()

    @work(thread=True, exclusive=True, group="jobs-load")
    def load(self) -> None:
        try:
            jobs = self.app.data.jobs()
        except Exception as exc:
            self.app.call_from_thread(self._status, f"✗ Could not read the jobs: {exc}")
            return
        self.app.call_from_thread(self._loaded, jobs)

    def _status(self, text: str) -> None:
        self.query_one("#status", Static).update(text)

    def _loaded(self, jobs: list[Job]) -> None:
        self.jobs = sorted(jobs, key=lambda j: j.title.lower())
        table = self.query_one(DataTable)
        table.clear()
        for job in self.jobs:
            table.add_row(job.title, f"{len(job.requirements)} attr", policy_state(job.policy), key=job.key)
        current = self.app.current_job
        keys = [j.key for j in self.jobs]
        if current in keys:
            table.move_cursor(row=keys.index(current), animate=False)
        elif keys:
            self.app.current_job = keys[0]
        self._show_current()

    def _show_current(self) -> None:
        if not self.jobs:
            self._status("No jobs yet. Press ctrl+n to create one.")
            return
        self._status(f"Current job: {self.app.current_job} (F4-F7 work on it)")

    @on(DataTable.RowHighlighted)
    def _highlighted(self, event: DataTable.RowHighlighted) -> None:
        if event.row_key is not None and event.row_key.value:
            self.app.current_job = str(event.row_key.value)
            self._show_current()

    @on(DataTable.RowSelected)
    def _selected(self, event: DataTable.RowSelected) -> None:
        event.stop()
        self.app.open_job(str(event.row_key.value))

    def action_open_job(self) -> None:
        if self.app.current_job:
            self.app.open_job(self.app.current_job)

    def action_new_job(self) -> None:
        self.app.open_job(None)

    def action_reload(self) -> None:
        self.load()

    def action_delete_job(self) -> None:
        key = self.app.current_job
        if not key or key not in {j.key for j in self.jobs}:
            self.notify("No job is highlighted.", severity="warning")
            return
        from vetting.tui.widgets.confirm import Confirm

        def answered(yes: bool | None) -> None:
            if yes:
                self._delete(key)

        self.app.push_screen(
            Confirm(f"Delete job {key} with its requirements and policy versions?\n"
                    "The audit trail keeps a copy of what was deleted.", yes="Delete (y)", no="Keep (n)"),
            answered,
        )

    @work(thread=True, group="jobs-delete")
    def _delete(self, key: str) -> None:
        from vetting.records.errors import RecordsError

        try:
            self.app.data.delete_job(key)
        except RecordsError as exc:
            self.app.call_from_thread(self.notify, str(exc), title="Not deleted", severity="error")
            return
        self.app.call_from_thread(self._deleted, key)

    def _deleted(self, key: str) -> None:
        if self.app.current_job == key:
            self.app.current_job = None
        self.notify(f"Deleted job {key}.")
        self.load()

    def record_saved(self, key: str) -> None:
        self.app.current_job = key
        self.load()


JOB = [
    FieldSpec("job", n)
    for n in (
        "key", "title", "analysis_source", "applicant_reading_grade", "time_budget_minutes",
        "budget_per_applicant", "staff_qualification", "applicants_per_year", "hires_per_year",
        "base_rate", "criterion_sd", "tenure_years",
    )
]
REQUIREMENT = [FieldSpec("requirement", n) for n in ("attribute", "importance", "critical")]
POLICY = [
    FieldSpec("policy", n)
    for n in ("min_reliability", "max_norm_age_years", "impact_ratio_floor", "relevant_criteria",
              "relevant_job_families")
]
WEIGHTS = [FieldSpec("policy", n, label=f"weight: {n}", kind="weight") for n in WEIGHT_NAMES]


def _texts(obj: Any, specs: list[FieldSpec]) -> dict[str, str]:
    return {s.name: text_of(getattr(obj, s.name, None)) for s in specs}


class JobEditor(EditorScreen):
    """Edit one job profile and its scoring policy (key None: a new job)."""

    CSS_PATH = ["../widgets/form.tcss", "../widgets/editor.tcss"]
    kind_label = "Job"
    nav_place = "jobs"
    BINDINGS = [
        # priority: a text field would otherwise take ctrl+k (delete to the end of the line)
        Binding("ctrl+k", "lock_policy", "Lock policy", id="job.lock", priority=True,
                tooltip="Freeze the current policy version before looking at results"),
    ]

    def begin(self, key: str | None) -> None:
        super().begin(key)
        self.record_label = f"job {key}" if key else "the new job"
        self.known_attributes: set[str] = set()
        self.versions: list[Policy] = []

    def lazy(self) -> bool:
        """A stored job builds its requirements and policy when they are first shown (a job
        may need dozens of attributes); a section never shown keeps what is stored. A new job
        builds them all: its one blank requirement and its policy are checked before saving."""
        return self.original is not None

    def load_record(self) -> Job | None:
        data = self.app.data
        self.known_attributes = {a.key for a in data.attributes()}
        if self.key is None:
            return None
        job = data.job(self.key)
        self.versions = data.policy_versions(self.key)
        return job

    def sections(self) -> list[tuple[str, str, Any]]:
        job: Job | None = self.original
        locked = ["key"] if job is not None else []
        policy = job.policy if job is not None else Policy()
        requirements = [_texts(r, REQUIREMENT) for r in job.requirements] if job else [
            {"importance": "3", "critical": "no"}
        ]
        weights = {s.name: text_of(float(policy.weights.get(s.name, 0.0))) for s in WEIGHTS}
        return [
            ("profile", "Job", lambda: [
                Static("Fields marked * are required.", classes="section-note"),
                RecordBlock("job", JOB, _texts(job, JOB) if job else {}, locked=locked, classes="job-profile"),
            ]),
            ("requirements", "Requirements", lambda: [
                Static("Importance 1 (minor) to 5 (essential); critical: yes when a test must cover it. "
                       "Attributes not yet known are added when you save.", classes="section-note"),
                RecordList("requirement", REQUIREMENT, requirements, noun="Requirement", id="list-requirements"),
            ]),
            ("policy", "Policy", lambda: [
                Static(self._versions_text(), id="policy-state", classes="section-note", markup=False),
                RecordBlock("policy", POLICY, _texts(policy, POLICY), classes="policy-rules"),
                RecordBlock("weights", WEIGHTS, weights, title="Weights (relative; not all 0)",
                            classes="policy-weights"),
            ]),
        ]

    def _versions_text(self) -> str:
        job: Job | None = self.original
        if job is None:
            return "Policy: defaults (common practice). Saved with the job as version 1."
        lines = [f"Current policy: {policy_state(job.policy)}."]
        if job.policy.locked:
            lines.append("It is locked: saving changed rules makes a new version; the locked one stays on record.")
        else:
            lines.append("Lock it (ctrl+k) before looking at any ranking, so the rules are fixed first.")
        if len(self.versions) > 1:
            lines.append("Versions: " + "; ".join(policy_state(v) for v in self.versions))
        if job.first_ranked_at is not None:
            lines.append(f"First ranked {job.first_ranked_at:%Y-%m-%d %H:%M} UTC.")
        return "\n".join(lines)

    def _show_versions(self) -> None:
        if self.built("policy"):  # otherwise written when the section is built
            self.query_one("#policy-state", Static).update(self._versions_text())

    def pane_built(self, pane_id: str) -> None:
        if pane_id == "requirements":
            self._note_new_attributes()

    def on_rule_field_changed(self, event: RuleField.Changed) -> None:
        if event.field.spec.entity == "requirement" and event.field.spec.name == "attribute":
            self._note_new_attributes()

    def _note_new_attributes(self) -> None:
        if not self.built("requirements"):
            return
        for block in self.query_one("#list-requirements", RecordList).blocks:
            field = block.fields["attribute"]
            text = field.text.strip()
            field.note = "a new attribute: added when you save" if text and text not in self.known_attributes \
                and not field.own_error else None
            field.show()

    def extra_problems(self) -> list[tuple[RuleField, str]]:
        out: list[tuple[RuleField, str]] = []
        if not self.built("requirements"):  # never shown: the stored requirements stay
            if self.original is not None and not self.original.requirements:
                field = self.query_one(".job-profile", RecordBlock).fields["title"]
                out.append((field, "— the job needs at least one required attribute (Requirements, ctrl+n)"))
            return out
        blocks = self.query_one("#list-requirements", RecordList).blocks
        if not blocks:
            field = self.query_one(".job-profile", RecordBlock).fields["title"]
            out.append((field, "— the job needs at least one required attribute (Requirements, ctrl+n)"))
        seen: set[str] = set()
        for block in blocks:
            field = block.fields["attribute"]
            if field.text.strip() in seen:
                out.append((field, f"{field.text.strip()!r} is listed twice"))
            seen.add(field.text.strip())
        return out

    def build_record(self) -> Job:
        profile = self.query_one(".job-profile", RecordBlock).values()
        base = self.original.policy if self.original is not None else Policy()
        key = profile["key"] if self.original is None else self.original.key
        fields = {k: v for k, v in profile.items() if k != "key" and v is not None}
        # a section never shown keeps what is stored (only a stored job has such sections)
        if self.built("requirements"):
            requirements = [
                Requirement(
                    attribute=r["attribute"],
                    importance=r.get("importance") if r.get("importance") is not None else 3,
                    critical=bool(r.get("critical") or False),
                )
                for r in self.query_one("#list-requirements", RecordList).values()
            ]
        else:
            requirements = list(self.original.requirements)
        if not self.built("policy"):
            return Job(
                key=key,
                requirements=requirements,
                policy=base,
                first_ranked_at=self.original.first_ranked_at,
                row_version=self.original.row_version,
                **fields,
            )
        rules_values = self.query_one(".policy-rules", RecordBlock).values()
        weights = self.query_one(".policy-weights", RecordBlock).values()
        policy = Policy(
            min_reliability=_or(rules_values.get("min_reliability"), Policy.min_reliability),
            max_norm_age_years=_or(rules_values.get("max_norm_age_years"), Policy.max_norm_age_years),
            impact_ratio_floor=_or(rules_values.get("impact_ratio_floor"), Policy.impact_ratio_floor),
            weights={name: float(weights.get(name, 0.0)) for name in WEIGHT_NAMES},
            relevant_criteria=list(rules_values.get("relevant_criteria") or []),
            relevant_job_families=list(rules_values.get("relevant_job_families") or []),
            version=base.version,
            locked_at=base.locked_at,
            created_at=base.created_at,
        )
        return Job(
            key=key,
            requirements=requirements,
            policy=policy,
            first_ranked_at=self.original.first_ranked_at if self.original is not None else None,
            row_version=self.original.row_version if self.original is not None else None,
            **fields,
        )

    def store_record(self, record: Job) -> Job:
        data = self.app.data
        for req in record.requirements:
            if req.attribute not in self.known_attributes:
                data.save_attribute(Attribute(key=req.attribute, name=req.attribute.replace("-", " ").capitalize()))
                self.known_attributes.add(req.attribute)
        saved = data.save_job(record)
        self.versions = data.policy_versions(saved.key)
        return saved

    def after_saved(self, saved: Job) -> None:
        self.record_label = f"job {saved.key}"
        self.query_one(".job-profile", RecordBlock).fields["key"].locked = True
        self._show_versions()
        self._note_new_attributes()
        self.app.current_job = saved.key
        for screen in self.app.screen_stack:
            refresh = getattr(screen, "record_saved", None)
            if refresh is not None and screen is not self:
                refresh(saved.key)

    # -- locking -----------------------------------------------------------------------------

    def action_lock_policy(self) -> None:
        if not self.ready:
            return
        if self.original is None:
            self.notify("Save the job first (F9); then lock its policy.", severity="warning")
            return
        if self.is_dirty():
            self.notify("There are unsaved changes: save them (F9) before locking.", severity="warning")
            return
        if self.original.policy.locked:
            self.notify(f"Policy {policy_state(self.original.policy)} is already locked.", severity="warning")
            return
        from vetting.tui.widgets.confirm import Confirm

        version = self.original.policy.version
        question = (
            f"Lock policy version {version} of job {self.original.key}?\n"
            "It is then fixed on record with the time; later changes make a new version."
        )
        self.app.push_screen(Confirm(question, yes="Lock (y)", no="Cancel (n)"), self._lock_answered)

    def _lock_answered(self, lock: bool | None) -> None:
        if lock:
            self._lock(self.original.key)

    @work(thread=True, exclusive=True, group="policy-lock")
    def _lock(self, key: str) -> None:
        from vetting.records.errors import RecordsError

        try:
            policy = self.app.data.lock_policy(key)
            versions = self.app.data.policy_versions(key)
            job = self.app.data.job(key)
        except RecordsError as exc:
            self.app.call_from_thread(self.banner, f"✗ Not locked: {exc}", error=True)
            return
        self.app.call_from_thread(self._locked, policy, versions, job)

    def _locked(self, policy: Policy, versions: list[Policy], job: Job) -> None:
        self.original = job
        self.versions = versions
        self._show_versions()
        self.banner(f"✓ Locked policy {policy_state(policy)}.", ok=True)
        for screen in self.app.screen_stack:
            refresh = getattr(screen, "record_saved", None)
            if refresh is not None and screen is not self:
                refresh(job.key)


def _or(value: Any, default: Any) -> Any:
    return default if value is None else value
