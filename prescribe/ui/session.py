"""The clinic app's state and actions, with no widgets: unit-testable in plain Python.

A :class:`ClinicSession` holds one person's record, their screening, the planner
options the clinician chose, the program built from them and the messages to show.
The sections of :mod:`prescribe.ui.app` read it and call its methods; nothing here
imports ipywidgets or bqplot.

Expected problems never raise out of the session: bad input becomes per-field
messages (``problems``), an unsafe request becomes ``refusal`` (the planner's own
reason) and a stale save becomes ``notice``.  Anything else is raised for the view
to show in its error area.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass, field
from datetime import date
from typing import Any

from ..catalogue import IMPACT_LEVEL_LABELS
from ..cautions import with_standard
from ..errors import ConflictError, InputError, NotFoundError, PlanRequestRefused, PrescribeError, ProgramPaused
from ..records import PatientRecord, parse_record
from ..settings import current_clinician, hub_login, require_role
from ..stimulus import week_stages, weekly_osteogenic_index

#: Our impact scale (PRODUCT.md): level -> "level - label", from the catalogue's labels.
IMPACT_LABELS: dict[int, str] = {level: f"{level} - {label}" for level, label in IMPACT_LEVEL_LABELS.items()}


# The engines load on first use, not when the page opens (the intake form needs none of
# them); ClinicSession.load_engines loads them in the background once the page is shown.
def _planner():
    from .. import planning
    return planning


def _safety():
    from .. import safety
    return safety


def _tables():
    from .. import tables
    return tables


def _screening():
    from .. import screening
    return screening


def _catalogue():
    from .. import catalogue
    return catalogue


def _handout():
    from .. import handout
    return handout


def _store():
    from .. import store
    return store


@dataclass
class ChartSeries:
    """Per-week numbers the program charts draw (plain lists, one item a week)."""

    week: list[int]
    impacts_per_session: list[int]
    impact_level: list[int]
    osteogenic_index: list[float]
    weak_window: list[bool]
    #: Minutes a session of level 0-1 impact work (walking-type), where impacts do not apply.
    impact_minutes: list[float] = field(default_factory=list)


class ClinicSession:
    """One person's visit: record -> screening -> program -> handout -> store."""

    def __init__(self, store_url: str | None = None, clinician: str = ""):
        self.store_url = store_url
        #: Under JupyterHub the clinician is the login and cannot be changed here.
        self.login = hub_login()
        self.clinician = self.login or clinician
        self._store = None
        self._store_lock = threading.Lock()
        self.reset()

    # -- state ------------------------------------------------------------
    def reset(self) -> None:
        """Start a new person: forget everything but the store and the clinician."""
        self.record: PatientRecord | None = None
        self.problems: dict[str, str] = {}
        self.screening = None
        self.options: dict[str, Any] = {}
        self.swaps: list[tuple[str, str]] = []
        self.plan = None
        self.refusal: str | None = None
        self.notice: str | None = None
        self.program_note: str | None = None  # what a rebuild changed that the clinician should know
        self.saved_version: int | None = None
        #: The stored record version this record was opened at (None: a new person).
        self.record_version: int | None = None
        self.clearance: tuple[str, str] | None = None  # (who, when) a clinician cleared a referred person
        #: The first day of week 1 (YYYY-MM-DD) chosen for the program; None: today, as on the command line.
        self.start_date: str | None = None
        #: The stored program version on the page when it is not the latest (an earlier version reopened).
        self.opened_version: int | None = None
        self._saved_fingerprint: str | None = None  # what the store holds of this person, to tell unsaved work

    def _fingerprint(self) -> str | None:
        """The person's record and program as they would be saved (the build time left out)."""
        if self.record is None:
            return None
        import json
        plan = None
        if self.plan is not None:
            plan = self.plan.model_dump(mode="json")
            plan.pop("created", None)
        return json.dumps([self.record.model_dump(mode="json"), plan], sort_keys=True, default=str)

    @property
    def unsaved(self) -> bool:
        """True when the record or the program on the page differs from what the store holds
        for this person (a new person not saved yet, a change since the last save or open, an
        earlier version reopened and not saved again)."""
        return self.record is not None and self._fingerprint() != self._saved_fingerprint

    @property
    def cautions(self) -> list[str]:
        """The standard cautions plus those of the screening and the plan."""
        extra: list[str] = []
        if self.screening is not None:
            extra += list(self.screening.cautions)
        if self.plan is not None:
            extra += list(self.plan.cautions)
        return with_standard(extra)

    # -- intake and screening ----------------------------------------------
    def submit(self, data: dict) -> bool:
        """Validate the record, screen it and build the first program.

        Returns False (and fills ``problems``, one message per field) when the record is
        not valid; nothing else changes then.
        """
        try:
            record = parse_record(data)
        except InputError as err:
            self.problems = {p.field: p.message for p in err.problems}
            return False
        self.problems = {}
        if self.record is None or self.record.patient_id != record.patient_id:
            self.options, self.swaps, self.saved_version, self.clearance = {}, [], None, None
            self.record_version = None
            self.start_date = None
        self.record = record
        self.screening = _screening().screen(record, cleared=self.clearance is not None)
        self.plan = None
        self.build()
        return True

    # -- the program ----------------------------------------------------------
    def build(self, **changes: Any) -> bool:
        """Rebuild the program with ``changes`` to the planner options.

        A request the planner refuses leaves the current program and options as they
        were and sets ``refusal`` to the planner's reason.
        """
        if self.record is None:
            self.refusal = "Enter and check the person's details first."
            return False
        build_plan, plan_options = _planner().build_plan, _planner().PlanOptions
        replace, assert_safe = _planner().replace_exercise, _safety().assert_safe
        # None means "the planner's choice": the option is dropped, not passed on.
        options = {k: v for k, v in {**self.options, **changes}.items() if v is not None}
        applied: list[tuple[str, str]] = []

        template, template_note = self._kept_template()

        def make():
            plan = build_plan(self.record, self.screening, plan_options(**options), template=template,
                              cleared=self.clearance is not None)
            for old, new in self.swaps:
                # A swap applies while the exercise it replaced is still chosen by the planner and the
                # replacement is not (a swap never merges two exercises of the program into one).
                used = {e.exercise_id for w in plan.weeks for s in w.sessions for e in s.exercises}
                if old in used and new not in used:
                    plan = replace(plan, old, new)
                    applied.append((old, new))
            plan = self._cleared(plan)
            # Week N runs from start_date + 7(N-1) days (PRODUCT.md): today unless the clinician chose.
            plan = plan.model_copy(update={"start_date": self.start_date or date.today().isoformat()})
            # The one safety check (docs/safety.md): a refusal keeps the old program.
            assert_safe(plan, self.screening, door="app", record=self.record)
            return plan
        plan = self._attempt(make)
        if plan is None:
            return False
        dropped = [old for old, new in self.swaps if (old, new) not in applied]
        self.program_note = ("The swap made for " + ", ".join(dropped) + " no longer applies: the new program "
                             "no longer uses it, or already has its replacement." if dropped else None)
        if template_note:
            self.program_note = template_note + (" " + self.program_note if self.program_note else "")
        self.options, self.plan, self.swaps = options, plan, applied
        return True

    def set_start_date(self, value: date | str | None) -> bool:
        """Choose the first day of week 1 and rebuild the program with it (None: today).

        A value that is not a date sets ``refusal`` naming it and changes nothing.
        """
        if value is None or value == "":
            chosen = None
        else:
            try:
                chosen = value.isoformat() if isinstance(value, date) else date.fromisoformat(str(value)).isoformat()
            except ValueError:
                self.refusal = f"Start date must be a date such as 2026-12-07, not {str(value)!r}."
                return False
        before = self.start_date
        self.start_date = chosen
        if self.record is not None and not self.build():
            self.start_date = before
            return False
        return True

    def session_choices(self, kind: str) -> list[int]:
        """The sessions a week the planner accepts for ``kind`` (impact, resistance, balance)."""
        from ..planning.options import OPTION_RANGES  # not the planner: this runs while the page opens

        low, high = OPTION_RANGES[f"{kind}_sessions_per_week"]
        return list(range(low, high + 1))

    def swap(self, old_id: str, new_id: str) -> bool:
        """Put exercise ``new_id`` in place of ``old_id`` everywhere in the program."""
        if self.plan is None:
            self.refusal = "Build a program first."
            return False
        from .program_model import already_in_program  # a swap never merges two exercises silently
        from .wording import exercise_names
        merge = already_in_program(self.plan, old_id, new_id, exercise_names())
        if merge:
            self.refusal = merge
            return False
        replace, assert_safe = _planner().replace_exercise, _safety().assert_safe

        def make():
            # The week the person is in (a running program): a harder swap in weeks 3-5 of a
            # window is refused by the safety check (rule weak_window).
            plan = replace(self.plan, old_id, new_id, week=self._running_week())
            assert_safe(plan, self.screening, door="app", record=self.record)
            return plan
        plan = self._attempt(make)
        if plan is None:
            return False
        self.swaps.append((old_id, new_id))
        self.plan = plan
        return True

    def _running_week(self) -> int | None:
        """The program week of today for a program that has begun and not ended, else None."""
        start = getattr(self.plan, "start_date", None)
        if not start:
            return None
        from ..plan_schema import program_week
        week = program_week(start)
        return week if 1 <= week <= len(self.plan.weeks) else None

    def _kept_template(self):
        """The clinic template of the open program, kept when it is rebuilt: (Template or None, note).

        A program built from an approved clinic version is rebuilt from the same version;
        one whose version has since been retired (or is gone) is rebuilt from the planner's
        default choice, and the note says so.
        """
        tpl = getattr(self.plan, "template", None) if self.plan is not None else None
        if tpl is None or tpl.origin != "clinic" or not tpl.version:
            return None, None
        ref = f"{tpl.name}@{tpl.version}"
        try:
            from ..clinic.template_library import resolve
            return resolve(ref, self.store, purpose="plan").template(), None
        except (InputError, PrescribeError) as exc:
            return None, (f"The program was built from template {ref}, which can no longer build programs "
                          f"({exc}); it was rebuilt from the planner's default template.")

    def _attempt(self, make):
        """``make()``'s plan, or None with ``refusal`` set in plain words (the program is kept)."""
        try:
            plan = make()
        except PlanRequestRefused as exc:  # UnsafeProgram too
            self.refusal = self.plain_refusal(exc)
            return None
        except InputError as exc:
            self.refusal = str(exc)
            return None
        self.refusal = None
        return plan

    def plain_refusal(self, exc: PlanRequestRefused) -> str:
        """A refusal in plain words: what is wrong, what is allowed, and that nothing changed."""
        kept = " The previous program is kept and nothing was saved."
        violations = getattr(exc, "violations", None)
        if violations:
            # A swap is refused first of all for changing the kind of movement: say that first.
            v = next((x for x in violations if x.rule == "swap_same_kind"), violations[0])
            more = len(violations) - 1
            first = v.message.split(" ", 1)[0]
            text = v.message if "_" in first else v.message[0].upper() + v.message[1:]
            return (f"Refused: {text}. Allowed: {v.allowed}."
                    + (f" ({more} more problem{'s' if more != 1 else ''} of the same change.)" if more else "")
                    + f" (safety rule: {self._rule_title(v.rule)})" + kept)
        if exc.field == "start_level" and self.screening is not None:
            cap = self.screening.max_impact_level
            label = IMPACT_LEVEL_LABELS[cap]
            if exc.value is not None and exc.value > cap:
                return f"Refused: Start level {exc.value} is above what the screening allows ({cap}, {label})." + kept
            return f"Refused: Start level {exc.value} is above what the program's template allows: {exc.reason}." + kept
        return f"Refused: {exc.reason}." + kept

    @staticmethod
    def _rule_title(rule_id: str) -> str:
        """A safety rule by its title, as the clinician reads it (the id stays in the store and logs)."""
        rule = next((r for r in _safety().RULES if r.rule_id == rule_id), None)
        return rule.title if rule is not None else rule_id.replace("_", " ")

    # -- clearance of a referred person -------------------------------------------
    @property
    def is_draft(self) -> bool:
        """True while the program is a draft: the screening refers the person and no clearance is recorded."""
        return self.plan is not None and _safety().is_draft(self.plan)

    def clear(self, clinician: str) -> bool:
        """Record that ``clinician`` has cleared this person for the program (who and when).

        The clearance stays with the person's program through later changes in this visit.
        Bad input (an empty name) sets ``refusal`` and changes nothing.
        """
        if self.plan is None:
            self.refusal = "Build a program first."
            return False
        try:
            plan = _safety().record_clearance(self.plan, clinician)
        except InputError as exc:
            self.refusal = f"Not cleared: {exc}"
            return False
        self.clearance = (plan.cleared_by, plan.cleared_at)
        self.plan, self.refusal = plan, None
        if self.screening is not None and any(f.until_cleared for f in self.screening.flags):
            # What waited for the clearance is lifted: screen again with it and rebuild.
            self.screening = _screening().screen(self.record, cleared=True)
            self.build()
        return True

    def _cleared(self, plan):
        """``plan`` with this visit's recorded clearance, if any."""
        if self.clearance is None:
            return plan
        return _safety().record_clearance(plan, *self.clearance)

    def exclude(self, exercise_id: str) -> bool:
        """Leave ``exercise_id`` out of the program (the planner picks what replaces it)."""
        excluded = list(self.options.get("exclude", []))
        if exercise_id not in excluded:
            excluded.append(exercise_id)
        return self.build(exclude=excluded)

    def plan_exercises(self) -> list[tuple[str, str]]:
        """(exercise_id, name) of every exercise in the program, first appearance order."""
        seen: dict[str, str] = {}
        for week in (self.plan.weeks if self.plan else []):
            for session in week.sessions:
                for ex in session.exercises:
                    seen.setdefault(ex.exercise_id, ex.name)
        return list(seen.items())

    def swap_candidates(self, exercise_id: str) -> list[tuple[str, str]]:
        """(exercise_id, name) of catalogue entries of the same category, within the impact cap."""
        if self.plan is None or self.screening is None:
            return []
        catalogue = _catalogue().default_catalogue()
        current = catalogue.get(exercise_id)
        cap = self.screening.max_impact_level
        avoid = set(self.screening.avoid)
        out = []
        for entry in catalogue.all():
            if entry.exercise_id == exercise_id or getattr(entry, "category", None) != current.category:
                continue
            if getattr(entry, "impact_level", 0) > cap or avoid & set(getattr(entry, "patterns", []) or []):
                continue
            out.append((entry.exercise_id, entry.name))
        return out

    def chart_series(self) -> ChartSeries:
        """The per-week numbers of the program (empty lists before a program exists)."""
        weeks = sorted(self.plan.weeks, key=lambda w: w.week) if self.plan else []
        return ChartSeries(
            week=[w.week for w in weeks],
            impacts_per_session=[w.impacts_per_session for w in weeks],
            impact_level=[w.impact_level for w in weeks],
            osteogenic_index=[weekly_osteogenic_index(w) for w in weeks],
            weak_window=[st.weak for st in week_stages(weeks)],
            impact_minutes=[float(max((x.minutes or 0.0 for s in w.sessions for x in s.exercises
                                       if x.category == "impact" and x.impact_level <= 1), default=0.0))
                            for w in weeks],
        )

    @staticmethod
    def load_engines() -> None:
        """Import the screening, planning and safety engines and read the rules (slow once), so the
        first check is quick."""
        _screening().default_engine()
        _planner().build_plan, _safety().assert_safe  # noqa: B018 - the lazy package loads on first use

    def week_rows(self) -> list[dict]:
        """One row a week for the program table."""
        if self.plan is None:
            return []
        return _tables().weekly_summary(self.plan).to_dict(orient="records")

    def dose_figures(self) -> dict[str, float]:
        """Headline dose figures of the program (for the line under the charts)."""
        s = self.chart_series()
        if not s.week:
            return {}
        return {"weeks": len(s.week), "highest_impact_level": max(s.impact_level),
                "most_impacts_per_session": max(s.impacts_per_session),
                "total_osteogenic_index": round(sum(s.osteogenic_index), 1),
                "last_week_osteogenic_index": round(s.osteogenic_index[-1], 1)}

    # -- handout ----------------------------------------------------------------
    def handout(self, fmt: str = "html", audience: str = "both", paper: str = "a4",
                large_print: bool = False, language: str = "en") -> bytes:
        """The handout of the current program as HTML (UTF-8 bytes) or PDF bytes.

        ``large_print`` gives the large-print edition of the person's pages; ``language`` the
        language of the person's pages (prescribe.languages.LANGUAGES).
        """
        if self.plan is None:
            raise InputError.single("program", None, "a built program (check the person's details first)")
        # A handout is a door too: the program is checked before anything is printed.
        _safety().assert_safe(self.plan, self.screening, door="handout", record=self.record)
        sensor = self.latest_sensor_summary()  # the clinician's page shows it when there is one
        if fmt == "pdf":
            return _handout().render_pdf(self.plan, audience=audience, paper=paper, sensor_summary=sensor,
                                         large_print=large_print, language=language)
        html = _handout().render_html(self.plan, audience=audience, paper=paper, sensor_summary=sensor,
                                      large_print=large_print, language=language)
        return html.encode("utf-8") if isinstance(html, str) else html

    def latest_sensor_summary(self) -> dict | None:
        """The open person's newest stored worn-sensor summary, if any."""
        if self.record is None or self.store_url is None and self._store is None:
            return None
        try:
            rows = self.store.sensor_summaries(self.record.patient_id)
        except NotFoundError:
            return None
        return rows[-1]["summary"] if rows else None

    # -- store ------------------------------------------------------------------
    @property
    def store(self):
        with self._store_lock:  # the app may read the store from its warm-up thread too
            if self._store is None:
                self._store = _store().open_store(self.store_url)
        return self._store

    def save(self, clinician: str | None = None, note: str = "") -> int | None:
        """Save the person (with their screening) and, if built, the program as a new version.

        Returns the program's new version number (None when there is no program).  A save
        based on an older version than the stored one is refused with ``notice`` set and the
        program kept in the session, so nothing is lost.
        """
        if self.record is None:
            raise InputError.single("record", None, "a checked patient record (press Check and screen first)")
        who = (clinician if clinician is not None else self.clinician).strip()
        if not who and self.login is None:
            raise InputError.single("clinician", who, "your name or initials (saved with every version)")
        who = current_clinician(who, required=True)  # the login under JupyterHub
        self.clinician = who
        try:
            saved = self.store.save_patient(self.record, self.screening, who,
                                            based_on_version=self.record_version or 0)
        except ConflictError as exc:
            self.notice = (f"Not saved: {exc}. Your changes stay open here; note them, open the person "
                           "again to see the other change, and reapply yours.")
            return None
        self.record_version = int(saved["record_version"])
        self.notice = None
        if self.plan is None:
            self._saved_fingerprint = self._fingerprint()
            return None
        try:
            version = self.store.save_program(self.record.patient_id, self.plan, who,
                                              self.saved_version, note=note)
        except ConflictError as exc:
            self.notice = f"Not saved: {exc}. This program stays open here."
            return None
        except PlanRequestRefused as exc:  # the store's own safety check (UnsafeProgram)
            self.notice = "Not saved. " + self.plain_refusal(exc)
            return None
        except ProgramPaused as exc:  # a paused program binds until a clinician records the resumption
            self.notice = (f"Not saved: {exc} Resume it in section 6 (live session) with a reason first; "
                           "this program stays open here.")
            return None
        self.saved_version = int(version)
        self.opened_version = None
        self._saved_fingerprint = self._fingerprint()
        return self.saved_version

    def draft_templates(self) -> list[dict]:
        """The clinic templates waiting for a lead's approval (oldest first)."""
        return [t for t in self.store.templates() if t["status"] == "draft"]

    def approve_template(self, name: str, version: int, clinician: str | None = None) -> str:
        """Approve a draft template version as the current clinician; only a clinic lead may.

        Returns who approved (the login under JupyterHub).  A clinician is refused with
        :class:`prescribe.errors.NotPermittedError`; nothing changes then.
        """
        who = current_clinician(clinician if clinician is not None else self.clinician, required=True)
        require_role(who, "approve_template")
        self.store.approve_template(name, version, who)
        self.clinician = who
        return who

    def saved_people(self) -> list[str]:
        """Patient ids in the store, most recently updated first."""
        return [row["patient_id"] for row in self.saved_people_rows()]

    def saved_people_rows(self) -> list[dict]:
        """The store's people, most recently updated first (id, latest category, latest program version)."""
        return self.store.list_patients()

    def people_names(self) -> dict[str, str]:
        """Each saved person's name on the handout (the record's display_name; empty where none)."""
        return {pid: str(record.get("display_name") or "") for pid, record in self.store.caseload()}

    def versions(self) -> list[dict]:
        """The program's version history for the current person (oldest first), one flat row each."""
        if self.record is None:
            return []
        try:
            rows = self.store.program_versions(self.record.patient_id)
        except NotFoundError:
            return []
        out = []
        for row in rows:
            summary = row.get("summary") or {}
            out.append({"version": row["version"], "based_on_version": row.get("based_on_version"),
                        "clinician": row.get("clinician"), "saved": row.get("created"),
                        "weeks": summary.get("weeks"), "max_impact_level": summary.get("max_impact_level"),
                        "template": (f"{summary['template']}@{summary['template_version']}"
                                     if summary.get("template") and summary.get("template_version")
                                     else summary.get("template")),
                        "note": row.get("note")})
        return out

    def load(self, patient_id: str, version: int | None = None) -> None:
        """Open a saved person: their record, a fresh screening and their program (latest by default).

        An earlier ``version`` is opened as it was saved; it is not the program in force until it
        is saved again (as the next version, based on the latest): ``opened_version`` says which
        version is on the page, and ``unsaved`` is True until then."""
        record_version = self.store.record_version(patient_id)  # first: a later change means a conflict
        record = self.store.get_patient(patient_id)
        self.reset()
        self.submit(record.model_dump(mode="json"))
        self.record_version = record_version
        latest = self.store.latest_program_version(patient_id)
        if latest is None:
            self._saved_fingerprint = self._fingerprint()
            return
        self.plan = self.store.get_program(patient_id, version)
        # What the clinician chose for the saved program, so a change rebuilds that program
        # with one difference rather than the planner's defaults.
        self.options = dict(_planner().fixed_options(self.plan))
        self.swaps = list(_planner().plan_swaps(self.plan))
        self.saved_version = int(latest)
        self.clearance = ((self.plan.cleared_by, self.plan.cleared_at)
                          if self.plan.cleared_by and self.plan.cleared_at else None)
        if self.clearance is not None and self.record is not None:
            self.screening = _screening().screen(self.record, cleared=True)
        self.start_date = self.plan.start_date
        self.refusal = None
        self.opened_version = int(version) if version is not None and int(version) != int(latest) else None
        if self.opened_version is None:
            self._saved_fingerprint = self._fingerprint()
        try:  # a stored program from an older version may break a rule added since: say so
            _safety().assert_safe(self.plan, self.screening, door="saved program", record=self.record)
        except PlanRequestRefused as exc:
            self.refusal = ("This saved program breaks a safety rule; change it before printing or saving. "
                            + self.plain_refusal(exc))
