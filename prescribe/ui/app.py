"""The clinic app: the sections assembled over one :class:`ClinicSession`.

Person -> Screening -> Program -> Handout -> Save, then the live session, the worn sensor
and the clinic lead's templates.  Each section lives in its own module (``*_section.py``
for the parts of this class, ``*_view.py`` for panels with their own state); this module
builds them in page order, keeps the one always-visible cautions box on top, loads the
slow parts in the background and redraws every section after a change.  Every callback is
guarded (:func:`prescribe.ui.common.guarded`) so an error appears in the page (Voila hides
tracebacks) and never vanishes.  Widgets carry stable CSS classes (``pr-...``) for browser
tests.

The sections a first visit does not need (live session, worn sensor, clinic templates)
are shown by their titles and built when opened, or when a saved program is opened: a page
opens with a fraction of the widgets, which is what a page open costs the server and the
browser (benchmarks/bench_app.py, bench_app_load.py).
"""

from __future__ import annotations

import os
import threading

import ipywidgets as w

from .cautions_view import section_cautions
from .clinic_view import ClinicSettingsForm
from .common import STYLE, ErrorArea, cautions_box, cautions_html, guarded, section_box, share_plain_models
from .explain_view import ExplainView
from .fhir_view import FhirPanel
from .handout_section import HandoutSection
from .identity import SignedIn, SignInPanel
from .intake_view import IntakeForm, screening_html
from .person_section import PersonSection
from .program_section import ProgramSection
from .reassess_view import OutcomesPanel, ReassessPanel
from .sensor_view import SensorPanel
from .session import ClinicSession
from .sessions_view import SessionsView
from .store_section import StoreSection
from .templates_view import TemplatesView

#: Seconds after the page is built before the charts and engines load in the background
#: (sooner if the clinician starts typing), so they do not slow the first render.
WARM_UP_DELAY_S = 2.0


class ClinicApp(PersonSection, ProgramSection, HandoutSection, StoreSection):
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
        self.section_caution_boxes: dict[str, w.HTML] = {}
        self.errors = ErrorArea()
        self._syncing = False
        # Who vouches for approvals, clearances and resumptions: the hub login, or a passphrase sign-in.
        self.signed = SignedIn(login=self.session.login)
        self.signin = SignInPanel(self.signed, lambda: self.session.store)
        self.intake = IntakeForm(self.errors)
        self._build_person_section()
        self._snapshot_form()  # the empty form: nothing typed yet
        self.screening_view = w.HTML("")
        self.screening_view.add_class("pr-screening")
        self.screening_section = self._section("2. Screening", "pr-section-screening", [self.screening_view])
        # The record system (FHIR R4): bring a person in (section 1), send the saved program (section 5).
        self.fhir = FhirPanel(self)
        kids = list(self.person_section.children)
        at = next((i + 1 for i, k in enumerate(kids) if self.load_select in getattr(k, "children", ())), len(kids))
        self.person_section.children = tuple(kids[:at] + [self.fhir.import_widget] + kids[at:])
        self.work_built = False  # sections 3 to 5: built once a person is on the page (build_work)
        self.live = SessionsView(self)  # 6, the live-session panel (docs/sessions.md)
        self.sensor_panel = SensorPanel(self)  # 7, worn sensor
        self.templates_view = TemplatesView(self.session, app=self)  # 8, the clinic lead's section
        self.retest_panel = ReassessPanel(self)  # 9, retest and next block (docs/reassess.md)
        self.outcomes_panel = OutcomesPanel(self)  # 10, the clinic's outcomes, for the lead
        self.clinic_settings = ClinicSettingsForm()  # asks for the clinic's name and phone once
        title = w.HTML("<h1 style='font-size:22px;margin:4px 0'>prescribe: bone-loading program builder</h1>"
                       "<p>Decision support for clinicians. Work down the page: person, screening, program, "
                       "handout, save. Sections 6 to 10 open when you click their titles.</p>")
        self.top_cautions = cautions_box()  # the one always-visible box; sections add their own
        self.top_cautions.add_class("pr-cautions-always")
        # Sections 3 to 5 (program, handout, save) are built and shown once a person is on the page:
        # a first page sends and draws the intake form alone, which is most of what opening a page
        # costs (benchmarks/bench_app_load.py).  Built at once where nothing is warmed up later.
        self.work_box = w.VBox([w.HTML("<p><i>Sections 3 (program), 4 (handout) and 5 (save and history) "
                                       "appear once the person's details are checked or a saved person is "
                                       "opened.</i></p>")])
        self.work_box.add_class("pr-work-sections")
        self.widget = w.VBox([w.HTML(STYLE), title, self.errors.widget, self.top_cautions, self.signin.widget,
                              self.clinic_settings.widget,
                              self.person_section, self.screening_section, self.work_box, self.live.widget,
                              self.sensor_panel.widget, self.templates_view.widget, self.retest_panel.widget,
                              self.outcomes_panel.widget])
        self.widget.add_class("pr-app")
        self._shared_models: dict = {}
        share_plain_models(self.widget, shared=self._shared_models)  # about half the models a page opens with
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
            self.build_work()
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
        self.session.load_engines()
        from . import charts  # noqa: F401 - the charting library, loaded before it is needed
        if self.work_built:
            self._ensure_charts()
        self.refresh()

    def build_work(self) -> None:
        """Build sections 3 to 5 (program, handout, save and history), once, and show them."""
        with self.lock:
            if self.work_built:
                return
            self._build_program_section()
            self.explain_view = ExplainView(self)  # the loads explained, beside the program
            self.program_section.children += (self.explain_view.widget,)
            self._build_handout_section()
            self._build_store_section()
            self.store_section.children += (self.fhir.export_widget,)  # send the saved program
            self.work_sections = (self.program_section, self.handout_section, self.store_section)
            share_plain_models(*self.work_sections, shared=self._shared_models)
            self.work_built = True
            self.work_box.children = self.work_sections

    # -- building ------------------------------------------------------------------
    def _section(self, title: str, css: str, children: list) -> w.VBox:
        """A section always shown; its own cautions (cautions_view.py) go in its box, the standard ones on top."""
        box, cautions = section_box(title, css, children)
        self.section_caution_boxes[css] = cautions
        return box

    @staticmethod
    def _button(text: str, css: str, style: str = "") -> w.Button:
        button = w.Button(description=text, button_style=style, layout=w.Layout(width="auto"))
        button.add_class(css)
        return button

    # -- redraw ------------------------------------------------------------------------
    def refresh(self, store: bool = True) -> None:
        """Make every section show the session's current state (``store``: re-read the saved people)."""
        with self.lock:
            self._refresh(store)

    def _refresh(self, store: bool) -> None:
        s = self.session
        if s.record is not None:
            self.build_work()  # shown from the first person on, and kept
        if self.work_built:
            self._refresh_program()  # the program and its charts first: what the clinician watches
        self.screening_view.value = screening_html(s.screening)
        for css, items in section_cautions(s).items():  # the standard ones are in the box on top
            if css in self.section_caution_boxes:
                self.section_caution_boxes[css].value = cautions_html(items, "Cautions for this part")
        if self.work_built:
            self.explain_view.refresh()
            self._refresh_handout()
        if store:
            self._refresh_store()
            self.clinic_settings.refresh()  # another page may have set the clinic meanwhile
        self.live.refresh()
        self.retest_panel.refresh()
