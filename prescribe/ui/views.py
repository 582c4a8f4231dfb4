"""The clinic app's widgets: five sections over one :class:`ClinicSession`.

Person -> Screening -> Program -> Handout -> Save.  Every section shows the cautions;
every callback is guarded so an error appears in the page (Voila hides tracebacks)
and never vanishes.  Widgets carry stable CSS classes (``pr-...``) for browser tests.
"""

from __future__ import annotations

import base64
import functools
import html
import logging
import os
import sys
import threading
import traceback
from datetime import date
from typing import Any, Callable

import ipywidgets as w

from ..cautions import STANDARD_CAUTIONS
from ..errors import InputError, PrescribeError
from ..records import SEVERITIES
from . import form_spec
from .cautions_view import section_cautions
from .explain_view import ExplainView
from .exercise_view import ExerciseView
from .history_view import history_html
from .program_view import ProgramView, progression_html
from .safety_view import ClearanceView
from .wording import field_words, plain
from .session import IMPACT_LABELS, ClinicSession, EngineMissing
from .templates_view import TemplatesView, program_notice_html

log = logging.getLogger("prescribe.ui")

#: Seconds after the page is built before the charts and engines load in the background
#: (sooner if the clinician starts typing), so they do not slow the first render.
WARM_UP_DELAY_S = 2.0
#: A session-count control left to the planner.
AUTO = "auto"

STYLE = """
<style>
.pr-app { max-width: 1100px; font-size: 14px; }
.pr-app h2 { font-size: 18px; margin: 18px 0 6px 0; border-bottom: 2px solid #1f3b57; color: #1f3b57; }
.pr-msg { color: #a4161a; font-size: 13px; padding-left: 8px; }
.pr-field-label { line-height: 1.25; padding: 2px 0; }
.pr-handout-download a { color: #1f3b57; font-weight: bold; text-decoration: underline; padding: 0 8px; }
.pr-field-label small { color: #4a5561; }
.pr-cautions { background: #fff8e6; border-left: 4px solid #b35c00; padding: 2px 10px; margin: 6px 0;
               font-size: 12px; line-height: 1.35; }
.pr-cautions ul { margin: 2px 0; padding-left: 18px; }
.pr-cautions-always { position: sticky; top: 0; z-index: 20; }
.pr-cautions-always .pr-cautions { margin: 0 0 6px 0; box-shadow: 0 2px 4px rgba(0,0,0,0.12); }
.pr-error-box { background: #fde8e8; border: 1px solid #a4161a; padding: 6px 10px; }
.pr-refusal-box { background: #fde8e8; border-left: 4px solid #a4161a; padding: 4px 10px; }
.pr-notice-box { background: #e8f1fb; border-left: 4px solid #1f3b57; padding: 4px 10px; }
.pr-app table.pr-table { border-collapse: collapse; font-size: 13px; }
.pr-app table.pr-table td, .pr-app table.pr-table th { border: 1px solid #ccd; padding: 2px 6px; text-align: left; }
.pr-flag-clear_first { border-left: 4px solid #a4161a; padding-left: 6px; margin: 4px 0; }
.pr-flag-adapt { border-left: 4px solid #b35c00; padding-left: 6px; margin: 4px 0; }
.pr-flag-note { border-left: 4px solid #6b7785; padding-left: 6px; margin: 4px 0; }
</style>
"""


def _esc(value: Any) -> str:
    return html.escape(str(value), quote=True)


def cautions_box(extra: list[str] | None = None) -> w.HTML:
    """The standard cautions (or ``extra`` ones) as a box: the one always-visible box of the page."""
    items = list(extra) if extra else list(STANDARD_CAUTIONS)
    box = w.HTML(_cautions_html(items))
    box.add_class("pr-cautions-box")
    return box


def _cautions_html(items: list[str], title: str = "Cautions") -> str:
    if not items:
        return ""
    return (f'<div class="pr-cautions"><b>{_esc(title)}</b><ul>' +
            "".join(f"<li>{_esc(c)}</li>" for c in items) + "</ul></div>")


def table_html(rows: list[dict], columns: list[str] | None = None, css: str = "") -> str:
    if not rows:
        return "<p><i>Nothing yet.</i></p>"
    columns = columns or list(rows[0])
    head = "".join(f"<th>{_esc(c.replace('_', ' '))}</th>" for c in columns)
    body = "".join("<tr>" + "".join(f"<td>{_esc(_cell(r.get(c)))}</td>" for c in columns) + "</tr>" for r in rows)
    return f'<table class="pr-table {css}"><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>'


def _cell(v: Any) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return "yes" if v else ""
    if isinstance(v, float):
        return "" if v != v else f"{v:.1f}"  # NaN: not applicable that week
    if isinstance(v, (list, tuple)):
        return ", ".join(str(x) for x in v)
    return str(v)


class ErrorArea:
    """Where every failure of a callback is shown, in plain words."""

    def __init__(self) -> None:
        self.widget = w.HTML("")
        self.widget.add_class("pr-error")
        self.last: str = ""

    def show(self, text: str) -> None:
        self.last = text
        self.widget.value = f'<div class="pr-error-box" role="alert">{_esc(text)}</div>'

    def clear(self) -> None:
        self.last = ""
        self.widget.value = ""


def guarded(action: str) -> Callable:
    """Decorate a callback: any exception becomes a readable message in the error area."""
    def wrap(fn: Callable) -> Callable:
        @functools.wraps(fn)
        def inner(self, *args, **kwargs):
            try:
                with self.lock:  # one action at a time: the warm-up thread may be redrawing
                    result = fn(self, *args, **kwargs)
            except EngineMissing as exc:
                self.errors.show(f"{action}: not available yet ({exc}).")
            except PrescribeError as exc:
                self.errors.show(f"{action}: {exc}")
            except Exception as exc:  # noqa: BLE001 - shown, logged, never lost
                log.error("%s failed:\n%s", action, traceback.format_exc())
                if os.environ.get("PRESCRIBE_DEBUG"):
                    traceback.print_exc(file=sys.stderr)
                self.errors.show(f"{action} failed ({exc.__class__.__name__}: {exc}). "
                                 "Nothing was saved by this step; please report it.")
            else:
                self.errors.clear()
                return result
        return inner
    return wrap


class _Shared:
    """One Layout and one Style model per look, shared by many widgets.

    Each ipywidget otherwise brings its own Layout and Style models; the intake form has
    dozens of boxes, and every model costs the browser time when the page opens.
    """

    def __init__(self) -> None:
        self._layouts: dict[tuple, w.Layout] = {}
        self._styles: dict[type, w.Widget] = {}

    def layout(self, **kwargs) -> w.Layout:
        key = tuple(sorted(kwargs.items()))
        if key not in self._layouts:
            self._layouts[key] = w.Layout(**kwargs)
        return self._layouts[key]

    def style(self, widget_class: type) -> w.Widget:
        style_class = widget_class.style.klass
        if style_class not in self._styles:
            self._styles[style_class] = style_class()
        return self._styles[style_class]

    def make(self, widget_class: type, width: str | None = None, **kwargs) -> w.Widget:
        layout = self.layout(width=width) if width else self.layout()
        return widget_class(layout=layout, style=self.style(widget_class), **kwargs)


class IntakeForm:
    """The person's details, generated from the record's own field metadata."""

    def __init__(self, errors: ErrorArea) -> None:
        self.errors = errors
        self.kit = _Shared()
        self.inputs: dict[str, w.Widget] = {}
        self.messages: dict[str, w.HTML] = {}
        rows = []
        for spec in form_spec.intake_fields():
            if spec.key == "glucocorticoids.mg_per_day":
                self.gluco_taken = self.kit.make(w.Checkbox, value=False, indent=False,
                                                 description="Takes oral glucocorticoids")
                self.gluco_taken.add_class("pr-intake-glucocorticoids")
                rows.append(self.gluco_taken)
            rows.append(self._row(spec))
        self.conditions: dict[str, w.Checkbox] = {}
        cond_boxes = []
        for code, meaning in form_spec.condition_choices():
            # The meaning on hover over the words themselves (the label's own title is the words otherwise).
            box = self.kit.make(w.Checkbox, "260px", value=False, indent=False, tooltip=meaning,
                                description=f'<span title="{_esc(meaning)}">{_esc(code.replace("_", " "))}</span>',
                                description_allow_html=True)
            box.add_class(f"pr-intake-condition-{code}")
            self.conditions[code] = box
            cond_boxes.append(box)
        self.messages["conditions"] = self._msg("conditions")
        self.fracture_rows: list[dict[str, w.Widget]] = []
        self.fracture_box = w.VBox([])
        self.add_fracture_button = w.Button(description="Add a fracture", icon="plus")
        self.add_fracture_button.add_class("pr-intake-add-fracture")
        self.add_fracture_button.on_click(lambda _b: self.add_fracture())
        self.messages["fractures"] = self._msg("fractures")
        self.widget = w.VBox([
            w.HTML("<p><b>The person's baseline at this first visit.</b> These details are the record the "
                   "screening reads; today's pain, effort and symptoms during a session go in the live-session "
                   "panel (section 6), never here. Every box is checked against the record's limits when you "
                   "press <b>Check and screen</b>. Numbers are typed, never clipped. * = required.</p>"),
            *rows,
            w.HTML(f"<b>Fractures</b> <small>({_esc(form_spec.fracture_fields()[0].help)} Sites: "
                   + _esc(", ".join(s for s, _ in form_spec.fracture_sites())) + ")</small>"),
            self.fracture_box, self.add_fracture_button, self.messages["fractures"],
            w.HTML("<b>Conditions</b> <small>(hover for what each means)</small>"),
            w.GridBox(cond_boxes, layout=w.Layout(grid_template_columns="repeat(3, 270px)")),
            self.messages["conditions"],
        ])
        self.widget.add_class("pr-intake")

    def _msg(self, key: str) -> w.HTML:
        msg = self.kit.make(w.HTML, value="")
        msg.add_class("pr-msg")
        msg.add_class(f"pr-msg-{key.replace('.', '-')}")
        return msg

    def _row(self, spec: form_spec.FieldSpec) -> w.Widget:
        if spec.kind == "choice":
            first = ("- choose -", None) if spec.required else ("not given", None)
            widget = self.kit.make(w.Dropdown, "160px", options=[first] + [(c, c) for c in spec.choices],
                                   value=None, tooltip=spec.help)
        else:
            widget = self.kit.make(w.Text, "160px", value="", placeholder=spec.placeholder, tooltip=spec.help)
        widget.add_class(f"pr-intake-{spec.key.replace('.', '-')}")
        self.inputs[spec.key] = widget
        self.messages[spec.key] = self._msg(spec.key)
        unit = f" ({spec.unit})" if spec.unit else ""
        star = " *" if spec.required else ""
        label = self.kit.make(w.HTML, "300px", value=(
            f'<div class="pr-field-label" title="{_esc(spec.help)}">{_esc(spec.label)}{_esc(unit)}{star}'
            f'<br><small>{_esc(spec.help)}</small></div>'))
        return w.HBox([label, widget, self.messages[spec.key]], layout=self.kit.layout(align_items="center"))

    def add_fracture(self, site: str | None = None, months_ago: Any = "", low_trauma: bool = True) -> None:
        index = len(self.fracture_rows)
        row = {
            "site": w.Dropdown(options=[("- site -", None)] + [(s, s) for s, _ in form_spec.fracture_sites()],
                               value=site, layout=w.Layout(width="140px")),
            "months_ago": w.Text(value=str(months_ago), placeholder="months ago", layout=w.Layout(width="110px")),
            "low_trauma": w.Checkbox(value=low_trauma, description="low trauma (fragility)", indent=False),
        }
        for key, widget in row.items():
            widget.add_class(f"pr-intake-fracture-{index}-{key}")
        remove = w.Button(description="Remove", layout=w.Layout(width="80px"))
        box = w.HBox([row["site"], row["months_ago"], row["low_trauma"], remove])
        row["_box"] = box

        def _remove(_b, row=row):
            self.fracture_rows.remove(row)
            self.fracture_box.children = [r["_box"] for r in self.fracture_rows]
        remove.on_click(_remove)
        self.fracture_rows.append(row)
        self.fracture_box.children = [r["_box"] for r in self.fracture_rows]

    def data(self) -> dict:
        """The record dict from what is in the boxes (validated by the session)."""
        values = {k: v.value for k, v in self.inputs.items()}
        fractures = [{k: v.value for k, v in row.items() if not k.startswith("_")} for row in self.fracture_rows]
        conditions = [c for c, box in self.conditions.items() if box.value]
        return form_spec.record_data(values, fractures, conditions, self.gluco_taken.value)

    def show_problems(self, problems: dict[str, str]) -> None:
        """Each message beside its field; fields without a box of their own go to the nearest one."""
        shown = {k: [] for k in self.messages}
        for field, message in problems.items():
            key = field if field in shown else field.split("[")[0].split(".")[0]
            if key == "glucocorticoids":
                key = "glucocorticoids.mg_per_day"
            if key == "t_scores":
                key = "t_scores.lumbar_spine"
            shown.setdefault(key, []).append(message)
        for key, msgs in shown.items():
            if key in self.messages:
                self.messages[key].value = "<br>".join(_esc(field_words(m)) for m in msgs)
            elif msgs:
                self.errors.show(" ".join(field_words(m) for m in msgs))

    def fill(self, record: dict) -> None:
        """Show a saved record in the boxes."""
        for key, value in form_spec.form_values(record).items():
            self.inputs[key].value = value if value is not None else None if isinstance(
                self.inputs[key], w.Dropdown) else ""
        self.gluco_taken.value = bool(record.get("glucocorticoids"))
        self.fracture_rows.clear()
        self.fracture_box.children = []
        for fx in record.get("fractures") or []:
            self.add_fracture(fx["site"], fx["months_ago"], fx["low_trauma"])
        for code, box in self.conditions.items():
            box.value = code in (record.get("conditions") or [])
        self.show_problems({})

    def clear(self) -> None:
        for widget in self.inputs.values():
            widget.value = None if isinstance(widget, w.Dropdown) else ""
        self.gluco_taken.value = False
        self.fracture_rows.clear()
        self.fracture_box.children = []
        for box in self.conditions.values():
            box.value = False
        self.show_problems({})


def screening_html(screening) -> str:
    """The screening at a glance, then every flag with its reason and source."""
    if screening is None:
        return "<p><i>Check the person's details to see the screening.</i></p>"
    s = screening
    t = "" if s.lowest_t_score is None else f" (lowest T-score {s.lowest_t_score:g}" + (
        f" at {_esc(s.lowest_t_score_site.replace('_', ' '))})" if s.lowest_t_score_site else ")")
    glance = [
        ("Bone density category", s.bone_density_category.replace("_", " ") + t),
        ("Falls risk", "yes" if s.falls_risk else "no"),
        ("Highest impact level allowed", IMPACT_LABELS.get(s.max_impact_level, s.max_impact_level)),
        ("Movement patterns to avoid", ", ".join(p.replace("_", " ") for p in s.avoid) or "none"),
        ("Clinician clearance needed before loading", "YES" if s.refer else "no"),
        ("Balance work first", "yes" if s.balance_first else "no"),
        ("Supervised sessions", "yes" if s.supervision else "no"),
    ]
    rows = "".join(f'<tr class="pr-glance-{i}"><th>{_esc(k)}</th><td>{_esc(v)}</td></tr>' for i, (k, v) in enumerate(glance))
    flags = "".join(
        f'<div class="pr-flag pr-flag-{_esc(f.severity)}" data-rule="{_esc(f.rule)}"><b>{_esc(f.title or plain(f.rule))}</b> '
        f'<small>[{_esc(SEVERITIES.get(f.severity, f.severity))}]</small><br>{_esc(f.message)}'
        f'<br><small>Source: {_esc(f.source)}</small></div>' for f in s.flags) or "<p>No rule fired.</p>"
    version = f"<p><small>Rule set {_esc(s.ruleset_version)}</small></p>" if s.ruleset_version else ""
    return (f'<table class="pr-table pr-glance">{rows}</table><h3>Flags ({len(s.flags)})</h3>'
            f'<div class="pr-flags">{flags}</div>{version}')


class ClinicApp:
    """The whole app: build it, then display ``.widget`` (the last cell of apps/clinic.ipynb)."""

    def __init__(self, session: ClinicSession | None = None, warm_up: bool = False) -> None:
        """Build the widgets over ``session``.

        With ``warm_up`` the slow parts (the charting library, the screening and planning
        engines, the store's list of people) load in a background thread once the clinician
        starts typing or ``WARM_UP_DELAY_S`` after the form is built, so the intake form is
        usable at once; without it they load here.
        """
        self.session = session or ClinicSession()
        self.charts = None
        self.lock = threading.RLock()
        self.caution_boxes: list[w.HTML] = []
        self.section_caution_boxes: dict[str, w.HTML] = {}
        self.errors = ErrorArea()
        self._syncing = False
        self.intake = IntakeForm(self.errors)
        self._build_person_section()
        self._build_screening_section()
        self._build_program_section()
        self.explain_view = ExplainView(self)  # the loads explained, beside the program
        self.program_section.children += (self.explain_view.widget,)
        self._build_handout_section()
        self._build_store_section()
        from .sessions_view import SessionsView  # the live-session panel (docs/sessions.md)
        self.live = SessionsView(self)
        from .sensor_view import SensorPanel  # worn-sensor section
        self.sensor_panel = SensorPanel(self)
        self.templates_view = TemplatesView(self.session)  # the clinic lead's section (loads when opened)
        title = w.HTML("<h1 style='font-size:22px;margin:4px 0'>prescribe: bone-loading program builder</h1>"
                       "<p>Decision support for clinicians. Work down the page: person, screening, program, "
                       "handout, save.</p>")
        from .template_review import TemplateReview
        self.template_review = TemplateReview(self)
        from .clinic_view import ClinicSettingsForm  # asks for the clinic's name and phone once
        self.clinic_settings = ClinicSettingsForm()
        self.top_cautions = cautions_box()  # the one always-visible box; sections add their own
        self.top_cautions.add_class("pr-cautions-always")
        self.widget = w.VBox([w.HTML(STYLE), title, self.errors.widget, self.top_cautions, self.clinic_settings.widget,
                              self.person_section, self.screening_section, self.program_section,
                              self.handout_section, self.store_section, self.live.widget,
                              self.sensor_panel.widget, self.templates_view.widget, self.template_review.widget])
        self.widget.add_class("pr-app")
        self.warm_thread: threading.Thread | None = None
        self._warm_lock = threading.Lock()
        if warm_up:
            self.refresh(store=False)
            # Start loading once the clinician starts typing, or shortly after the page is shown.
            for widget in self.intake.inputs.values():
                widget.observe(lambda _ch: self.start_warm_up(), names="value")
            timer = threading.Timer(WARM_UP_DELAY_S, self.start_warm_up)
            timer.daemon = True
            timer.start()
        else:
            self.warm_up()

    def start_warm_up(self) -> None:
        """Run :meth:`warm_up` in a background thread, once."""
        with self._warm_lock:
            if self.warm_thread is None:
                self.warm_thread = threading.Thread(target=self.warm_up, name="prescribe-warm-up", daemon=True)
                self.warm_thread.start()

    @classmethod
    def from_environment(cls) -> "ClinicApp":
        """The app over the store named by ``PRESCRIBE_DB`` (see prescribe.settings)."""
        from ..settings import db_url
        app = cls(ClinicSession(store_url=db_url()), warm_up=True)
        app.follow_page_request()
        return app

    def follow_page_request(self) -> None:
        """In a preheated kernel, re-read what may have changed once a page takes it.

        ``prescribe app`` keeps kernels preheated (prescribe.ui.server): the app is built
        before anyone opens the page, so the list of saved people could be minutes old when a
        clinician arrives.  A background thread waits for the page's request (Voila's
        ``wait_for_request``) and then refreshes the page from the store.
        """
        if os.environ.get("VOILA_PREHEAT") != "True":
            return

        def wait_then_refresh() -> None:
            from voila.utils import wait_for_request
            wait_for_request()
            self.refresh()

        threading.Thread(target=wait_then_refresh, name="prescribe-page-request", daemon=True).start()

    @guarded("Preparing the app")
    def warm_up(self) -> None:
        """Load the charts, the engines and the list of saved people."""
        import importlib
        for module in ("prescribe.screening", "prescribe.planning.builder"):
            try:
                importlib.import_module(module)
            except ModuleNotFoundError:
                pass  # shown as "not available yet" when used
        self._ensure_charts()
        self.refresh()

    def _ensure_charts(self):
        with self._charts_lock:
            if self.charts is None:
                from .charts import ProgramCharts
                self.charts = ProgramCharts()
                self.chart_box.children = self.charts.figures
        return self.charts

    # -- building ------------------------------------------------------------------
    def _section(self, title: str, css: str, children: list) -> w.VBox:
        cautions = w.HTML("")  # this section's own cautions (cautions_view.py); the standard ones stay on top
        cautions.add_class("pr-cautions-box")
        cautions.add_class("pr-section-cautions")
        self.caution_boxes.append(cautions)
        self.section_caution_boxes[css] = cautions
        box = w.VBox([w.HTML(f"<h2>{_esc(title)}</h2>"), *children, cautions])
        box.add_class(css)
        return box

    @staticmethod
    def _button(text: str, css: str, style: str = "") -> w.Button:
        button = w.Button(description=text, button_style=style, layout=w.Layout(width="auto"))
        button.add_class(css)
        return button

    def _build_person_section(self) -> None:
        self.submit_button = self._button("Check and screen", "pr-intake-submit", "primary")
        self.submit_button.on_click(lambda _b: self.on_submit())
        self.new_button = self._button("New person", "pr-new-person")
        self.new_button.on_click(lambda _b: self.on_new())
        self.load_select = w.Dropdown(options=[], description="Saved people", layout=w.Layout(width="380px"),
                                      style={"description_width": "100px"})
        self.load_select.add_class("pr-load-select")
        self.load_button = self._button("Open", "pr-load-button")
        self.load_button.on_click(lambda _b: self.on_load())
        self.intake_status = w.HTML("")
        self.intake_status.add_class("pr-intake-status")
        self.person_section = self._section("1. Person: baseline at intake", "pr-section-person", [
            w.HBox([self.load_select, self.load_button, self.new_button]),
            self.intake.widget, w.HBox([self.submit_button, self.intake_status])])

    def _build_screening_section(self) -> None:
        self.screening_view = w.HTML("")
        self.screening_view.add_class("pr-screening")
        self.screening_section = self._section("2. Screening", "pr-section-screening", [self.screening_view])

    def _build_program_section(self) -> None:
        self.start_level = w.Dropdown(options=[(v, k) for k, v in IMPACT_LABELS.items()], value=None,
                                      description="Start level", style={"description_width": "90px"})
        self.start_level.add_class("pr-option-start_level")
        self.weeks = w.Text(value="", placeholder="weeks", description="Weeks",
                            continuous_update=False, layout=w.Layout(width="170px"))
        self.weeks.add_class("pr-option-weeks")
        self.start_date = w.DatePicker(description="Week 1 starts", style={"description_width": "100px"})
        self.start_date.add_class("pr-option-start_date")
        self.start_date.observe(lambda ch: self.on_start_date_change(), names="value")
        self.sessions: dict[str, w.Dropdown] = {}
        for kind in ("impact", "resistance", "balance"):
            dd = w.Dropdown(options=[("planner's choice", AUTO)] + [(str(n), n) for n in
                                                                   self.session.session_choices(kind)], value=AUTO,
                            description=f"{kind.capitalize()} sessions a week",
                            style={"description_width": "initial"}, layout=w.Layout(width="330px"))
            dd.add_class(f"pr-option-{kind}_sessions_per_week")
            self.sessions[kind] = dd
        for control in (self.start_level, *self.sessions.values()):
            control.observe(lambda ch: self.on_option_change(), names="value")
        self.weeks.observe(lambda ch: self.on_option_change(), names="value")
        # The program day by day, the progression and the swap panel (program_view.py).
        self.program_view = ProgramView(self)
        swap = self.program_view.swap
        self.exercise_select, self.replacement_select = swap.exercise_select, swap.replacement_select
        self.swap_button, self.exclude_button = swap.swap_button, swap.exclude_button
        self.exercise_select.observe(lambda ch: self.on_exercise_chosen(), names="value")
        self.exercise_view = ExerciseView()  # the drawing of the chosen exercise and its replacement
        self.replacement_select.observe(lambda ch: self._show_drawing(), names="value")
        self.swap_button.on_click(lambda _b: self.on_swap())
        swap.confirm_button.on_click(lambda _b: self.on_confirm_swap())
        swap.cancel_button.on_click(lambda _b: swap.cancel())
        self.exclude_button.on_click(lambda _b: self.on_exclude())
        self.refusal = w.HTML("")
        self.refusal.add_class("pr-refusal")
        self._charts_lock = threading.Lock()
        self.chart_box = w.VBox([])
        self.chart_box.add_class("pr-charts")
        self.dose = w.HTML("")
        self.dose.add_class("pr-dose")
        self.week_table = w.HTML("", layout=w.Layout(max_height="420px", overflow="auto"))
        self.week_table.add_class("pr-week-table")
        self.clearance = ClearanceView(self)  # draft status and clearance (safety_view.py)
        self.program_section = self._section("3. Program", "pr-section-program", [
            self.clearance.widget, w.HBox([self.start_level, self.weeks, self.start_date]),
            w.HBox(list(self.sessions.values())),
            swap.widget, self.exercise_view.widget, self.refusal, self.program_view.widget, self.dose,
            self.chart_box, w.HTML("<h3>Week by week</h3>"), self.week_table])

    def _build_handout_section(self) -> None:
        self.audience = w.Dropdown(options=[("for the person and the clinician", "both"),
                                            ("for the person", "person"), ("for the clinician", "clinician")],
                                   value="both", description="Handout", layout=w.Layout(width="360px"))
        self.audience.add_class("pr-handout-audience")
        self.paper = w.Dropdown(options=[("A4", "a4"), ("US letter", "letter")], value="a4", description="Paper")
        self.paper.add_class("pr-handout-paper")
        self.large_print = w.Checkbox(value=False, description="Large print (the person's pages)", indent=False)
        self.large_print.add_class("pr-handout-large-print")
        self.preview_button = self._button("Preview", "pr-handout-preview")
        self.preview_button.on_click(lambda _b: self.on_preview())
        self.pdf_button = self._button("Prepare PDF", "pr-handout-make-pdf")
        self.pdf_button.on_click(lambda _b: self.on_prepare("pdf"))
        self.html_button = self._button("Prepare HTML", "pr-handout-make-html")
        self.html_button.on_click(lambda _b: self.on_prepare("html"))
        self.download = w.HTML("")
        self.download.add_class("pr-handout-download")
        self.preview = w.HTML("")
        self.preview.add_class("pr-handout-frame")
        self.handout_section = self._section("4. Handout", "pr-section-handout", [
            w.HBox([self.audience, self.paper, self.large_print]),
            w.HBox([self.preview_button, self.pdf_button, self.html_button, self.download]), self.preview])

    def _build_store_section(self) -> None:
        login = self.session.login
        self.clinician = w.Text(value=self.session.clinician, description="Clinician *",
                                placeholder="your name or initials", disabled=login is not None,
                                tooltip=("your login: every save is recorded under it" if login else
                                         "your name or initials, recorded with every save"))
        self.clinician.add_class("pr-store-clinician")
        if login is not None:
            self.clinician.add_class("pr-store-clinician-login")
        self.save_note = w.Text(value="", description="Note", placeholder="why this version (optional)",
                                layout=w.Layout(width="420px"),
                                tooltip="kept with the program version in the history below")
        self.save_note.add_class("pr-store-note")
        self.save_button = self._button("Save person and program", "pr-store-save", "success")
        self.save_button.on_click(lambda _b: self.on_save())
        self.store_status = w.HTML("")
        self.store_status.add_class("pr-store-status")
        self.history = w.HTML("")
        self.history.add_class("pr-store-history")
        self.store_section = self._section("5. Save and history", "pr-section-store", [
            w.HBox([self.clinician, self.save_note, self.save_button]), self.store_status,
            w.HTML("<b>Program versions</b>"), self.history])

    # -- callbacks -------------------------------------------------------------------
    @guarded("Checking the details")
    def on_submit(self) -> bool:
        ok = self.session.submit(self.intake.data())
        self.intake.show_problems(self.session.problems)
        n = len(self.session.problems)
        self.intake_status.value = (f'<span class="pr-msg">{n} field{"s" if n != 1 else ""} to correct '
                                    f'(see the messages beside them). Nothing was screened or saved.</span>'
                                    if not ok else "<span>Details checked; screening and program below.</span>")
        self.refresh()
        return ok

    @guarded("Starting a new person")
    def on_new(self) -> None:
        self.session.reset()
        self.intake.clear()
        self.intake_status.value = ""
        self.store_status.value = ""
        self.refresh()

    @guarded("Opening the saved person")
    def on_load(self) -> None:
        patient_id = self.load_select.value
        if not patient_id:
            raise InputError.single("saved person", patient_id, "a person chosen from the list")
        self.session.load(patient_id)
        self.intake.fill(self.session.record.model_dump(mode="json"))
        self.intake_status.value = f"<span>Opened {_esc(patient_id)}.</span>"
        self.refresh()

    @guarded("Changing the program")
    def on_option_change(self) -> None:
        if self._syncing or self.session.record is None:
            return
        changes: dict[str, Any] = {}
        if self.start_level.value is not None:
            changes["start_level"] = self.start_level.value
        weeks = form_spec.convert_text(self.weeks.value, "integer")
        if weeks is not None:
            changes["weeks"] = weeks
        for kind, dd in self.sessions.items():
            # Back to "planner's choice" clears the option (None), rather than keeping the last number.
            changes[f"{kind}_sessions_per_week"] = None if dd.value == AUTO else dd.value
        self.program_view.swap.status.value = ""  # what the last swap changed no longer describes the page
        self.session.build(**changes)
        self.refresh(store=False)

    @guarded("Changing the start date")
    def on_start_date_change(self) -> None:
        if self._syncing or self.session.record is None:
            return
        self.session.set_start_date(self.start_date.value)
        self.refresh(store=False)

    @guarded("Listing the replacements")
    def on_exercise_chosen(self) -> None:
        self._refresh_swap_candidates()

    @guarded("Swapping the exercise")
    def on_swap(self) -> None:
        """Ask for confirmation, saying what will change (a refused swap is said at once)."""
        self.program_view.swap.ask()
        self.refresh(store=False)

    @guarded("Swapping the exercise")
    def on_confirm_swap(self) -> None:
        self.program_view.swap.confirm()
        self.refresh(store=False)

    @guarded("Leaving the exercise out")
    def on_exclude(self) -> None:
        if not self.exercise_select.value:
            raise InputError.single("exercise", None, "an exercise chosen from the list")
        self.session.exclude(self.exercise_select.value)
        self.refresh(store=False)

    @guarded("Previewing the handout")
    def on_preview(self) -> None:
        doc = self.session.handout("html", self.audience.value, self.paper.value,
                                   large_print=self.large_print.value).decode("utf-8")
        self.preview.value = (f'<iframe class="pr-handout-iframe" title="handout preview" srcdoc="{_esc(doc)}" '
                              'style="width:100%;height:640px;border:1px solid #ccd;background:white"></iframe>')

    @guarded("Preparing the handout")
    def on_prepare(self, fmt: str) -> None:
        # Shown at once (a PDF takes a second or two), replaced by the link when it is ready.
        self.download.value = f'<span class="pr-preparing" role="status">Preparing the {fmt.upper()}...</span>'
        data = self.session.handout(fmt, self.audience.value, self.paper.value, large_print=self.large_print.value)
        mime = "application/pdf" if fmt == "pdf" else "text/html"
        name = f"handout-{self.session.record.patient_id}.{fmt}"
        link = (f'<a class="pr-download-{fmt}" download="{_esc(name)}" '
                f'href="data:{mime};base64,{base64.b64encode(data).decode("ascii")}">Download {fmt.upper()} '
                f'({len(data) // 1024 + 1} kB)</a>')
        self.download.value = link

    @guarded("Saving")
    def on_save(self) -> None:
        version = self.session.save(self.clinician.value.strip(), note=self.save_note.value.strip())
        if version is not None:
            self.save_note.value = ""  # saved with that version; a new note goes with the next
        pid = self.session.record.patient_id
        if self.session.notice:
            self.store_status.value = f'<div class="pr-notice-box">{_esc(self.session.notice)}</div>'
        else:
            what = f"program version {version}" if version else "record (no program yet)"
            self.store_status.value = f'<div class="pr-notice-box">Saved {_esc(pid)}: {what}.</div>'
        self.refresh()

    # -- redraw ------------------------------------------------------------------------
    def refresh(self, store: bool = True) -> None:
        """Make every section show the session's current state (``store``: re-read the saved people)."""
        with self.lock:
            self._refresh(store)

    def _refresh(self, store: bool) -> None:
        s = self.session
        if s.plan is not None or self.charts is not None:  # the charts first: what the clinician watches
            self._ensure_charts().update(s.chart_series())
        self.screening_view.value = screening_html(s.screening)
        for css, items in section_cautions(s).items():  # the standard ones are in the box on top
            if css in self.section_caution_boxes:
                self.section_caution_boxes[css].value = _cautions_html(items, "Cautions for this part")
        if s.refusal:
            self.refusal.value = f'<div class="pr-refusal-box" role="alert">{_esc(plain(s.refusal))}</div>'
        elif s.program_note:
            self.refusal.value = f'<div class="pr-notice-box" role="status">{_esc(plain(s.program_note))}</div>'
        else:
            self.refusal.value = ""
        self._syncing = True
        try:
            first_level = s.plan.weeks[0].impact_level if s.plan else None
            self.start_level.value = s.options.get("start_level", first_level)
            self.weeks.value = str(s.options.get("weeks", len(s.plan.weeks) if s.plan else ""))
            start = s.plan.start_date if s.plan is not None else None
            self.start_date.value = date.fromisoformat(start) if start else None
            for kind, dd in self.sessions.items():
                dd.value = s.options.get(f"{kind}_sessions_per_week", AUTO)
            self.program_view.swap.refresh_exercises()
        finally:
            self._syncing = False
        self._refresh_swap_candidates()
        self.program_view.refresh()
        self.clearance.refresh()
        figures = s.dose_figures()
        self.dose.value = ("<p>" + " &middot; ".join(f"{_esc(k.replace('_', ' '))}: <b>{_esc(v)}</b>"
                                                     for k, v in figures.items()) + "</p>") if figures else ""
        self.week_table.value = progression_html(s.plan)
        self.explain_view.refresh()
        if s.plan is None:
            self.preview.value = ""
            self.download.value = ""
        if store:
            self._refresh_store()
            self.clinic_settings.refresh()  # another page may have set the clinic meanwhile
        self.live.refresh()

    def _refresh_swap_candidates(self) -> None:
        self.program_view.swap.refresh_candidates()
        self._show_drawing()

    def _show_drawing(self) -> None:
        self.exercise_view.show(self.exercise_select.value, self.replacement_select.value)

    def _refresh_store(self) -> None:
        try:
            people = self.session.saved_people()
            versions = self.session.versions()
        except EngineMissing:
            self.history.value = "<p><i>The store is not available in this version.</i></p>"
            return
        except PrescribeError as exc:
            self.history.value = f'<p class="pr-msg">The store could not be read: {_esc(exc)}</p>'
            return
        self.sensor_panel.show_latest()
        current = self.load_select.value
        self.load_select.options = [("- choose -", None)] + [(p, p) for p in people]
        if current in people:
            self.load_select.value = current
        self.history.value = history_html(versions) + program_notice_html(self.session)
        try:
            self.template_review.refresh()
        except PrescribeError as exc:
            self.template_review.status.value = f"<p class='pr-msg'>Templates could not be read: {_esc(exc)}</p>"
