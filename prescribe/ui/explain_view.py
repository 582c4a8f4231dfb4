"""The app's "loads explained" panel: pick an exercise of the program, see what the bone feels.

Beside the program: a list of the program's exercises; for the one picked, two sentences
in plain words for the person, the stress-strain picture and the force bars (the same
inline SVG as the clinician's handout page), a line of key figures and the cautions.
The numbers come from :func:`prescribe.loading.explain.explain_exercise` for the person's body
mass and lowest T-score; nothing here computes a load.

Stable CSS classes: ``pr-explain`` (the panel), ``pr-explain-select``,
``pr-explain-words``, ``pr-explain-figures``, ``pr-explain-figures-numbers``,
``pr-explain-status``.
"""

from __future__ import annotations

import html
import logging
import threading
import traceback
from typing import Any

import ipywidgets as w

from ..errors import PrescribeError
from .cautions_view import specific
from .common import cautions_html, set_options

log = logging.getLogger("prescribe.ui")

EMPTY = "<p><i>Build a program to see what its exercises do to the bone and the hip joint.</i></p>"


def _esc(value: Any) -> str:
    return html.escape(str(value), quote=True)


class ExplainView:
    """The panel over a :class:`~prescribe.ui.views.ClinicApp` (reads ``app.session``)."""

    def __init__(self, app) -> None:
        self.app = app
        self.session = app.session
        self.result: dict | None = None
        self.select = w.Dropdown(options=[], description="Exercise", layout=w.Layout(width="380px"))
        self.select.add_class("pr-explain-select")
        self.select.observe(lambda _ch: self.show(), names="value")
        self.status = w.HTML(EMPTY)
        self.status.add_class("pr-explain-status")
        self.words = w.HTML("")
        self.words.add_class("pr-explain-words")
        self.figures = w.HTML("")
        self.figures.add_class("pr-explain-figures")
        self.numbers = w.HTML("")
        self.numbers.add_class("pr-explain-figures-numbers")
        self.cautions = w.HTML("")  # the panel's own cautions; the standard ones stay in the box on top
        self.cautions.add_class("pr-cautions-box")
        self.cautions.add_class("pr-explain-cautions")
        intro = w.HTML("<h3 style='margin:10px 0 4px 0;color:#1f3b57'>The loads explained</h3>"
                       "<p style='margin:0 0 4px 0'>What one exercise of this program does to the hip joint and "
                       "the thigh bone, to show the person. Estimates from published relations.</p>")
        self.widget = w.VBox([intro, self.select, self.status, self.words, self.figures, self.numbers,
                              self.cautions])
        self.widget.add_class("pr-explain")
        self._syncing = False
        # A page refresh runs in a background thread (warm-up, a page taking a preheated kernel)
        # while the clinician's pick arrives in the kernel's own: one at a time, each reading the
        # choice when it runs, so the last word is always the exercise shown in the list.
        self._lock = threading.RLock()

    # -- state ------------------------------------------------------------------
    def person(self) -> tuple[float | None, float | None]:
        """(body mass [kg], lowest T-score) of the session's person, None where unknown."""
        record, screening = self.session.record, self.session.screening
        mass = record.body_mass_kg if record is not None else None
        t = screening.lowest_t_score if screening is not None else None
        return mass, t

    def refresh(self) -> None:
        """Follow the program: offer its exercises, keep the choice where it is still there."""
        exercises = self.session.plan_exercises() if self.session.plan is not None else []
        options = [(name, i) for i, name in exercises]  # names only: no ids on the page
        with self._lock:
            self._syncing = True  # the list's own change of value shows once, below
            try:
                set_options(self.select, options)
            finally:
                self._syncing = False
            self.show()

    def show(self) -> None:
        """Explain the chosen exercise (or say why there is nothing to show)."""
        with self._lock:  # a pick arriving during a refresh waits for it, then shows what is chosen
            if self._syncing:  # the refresh's own change of list: it shows once it is done
                return
            self._show(self.select.value)

    def _show(self, exercise_id: str | None) -> None:
        if not exercise_id:
            self.result = None
            self.status.value = EMPTY
            self.words.value = self.figures.value = self.numbers.value = ""
            return
        try:
            from ..loading.explain import explain_exercise
            from ..handout.explain_figures import explanation_figures

            mass, t = self.person()
            result = explain_exercise(exercise_id, body_mass_kg=mass, t_score=t)
            ss, bars = explanation_figures(result, prefix="app-explain")
        except PrescribeError as exc:  # e.g. an exercise no longer in the catalogue
            self._fail(f"This exercise cannot be explained: {exc}")
            return
        except Exception as exc:  # noqa: BLE001 - shown in the panel; the rest of the page goes on
            log.error("explaining %s failed:\n%s", exercise_id, traceback.format_exc())
            self._fail(f"Explaining this exercise failed ({exc.__class__.__name__}: {exc}); please report it.")
            return
        self.result = result
        self.status.value = ""
        self.words.value = ('<div style="font-size:16px;line-height:1.45;background:#f4f7fa;padding:6px 10px;'
                            'border-left:4px solid #1f3b57">' +
                            "".join(f"<p style='margin:4px 0'>{_esc(s)}</p>" for s in result["plain_words"]) +
                            "</div>")
        self.figures.value = ('<div style="display:flex;flex-wrap:wrap;gap:12px">' +
                              "".join(f'<figure style="margin:0;flex:1 1 420px;max-width:540px">'
                                      f'<figcaption><b>{_esc(f.title)}</b></figcaption>{f.svg}'
                                      f'<ul style="list-style:none;padding:0;margin:2px 0;font-size:12px">' +
                                      "".join(f"<li>{sw} {_esc(label)}</li>" for sw, label in f.legend) +
                                      "</ul></figure>" for f in (ss, bars)) + "</div>")
        given = []
        if not result["body_mass_given"]:
            given.append(f"body mass {result['body_mass_kg']:g} kg (default)")
        if not result["t_score_given"]:
            given.append(f"T-score {result['t_score']:g} (default)")
        self.numbers.value = (
            "<p style='font-size:13px'>"
            f"Ground force <b>{result['peak_grf_bw']:.1f} BW</b> ({result['peak_grf_n']:.0f} N) &middot; "
            f"hip contact <b>{result['joint_contact_force_bw']:.1f} BW</b> ({result['joint_contact_force_n']:.0f} N) "
            f"&middot; femoral shaft <b>{result['peak_stress_mpa']['compression']:.0f} MPa</b> against "
            f"{result['strength_mpa']['this_person']:.0f} MPa (healthy {result['strength_mpa']['healthy']:.0f}) "
            f"&middot; joint friction {result['joint_friction_n']:.0f} N"
            + (f" &middot; assumed: {_esc(', '.join(given))}" if given else "") +
            ". The command <i>prescribe explain</i> lists every assumption and source.</p>" +
            "".join(f'<p class="pr-msg" role="note">{_esc(n)}</p>' for n in result["notes"]))
        self.cautions.value = self._cautions_html(result["cautions"])

    def _fail(self, text: str) -> None:
        self.result = None
        self.status.value = f'<p class="pr-msg" role="alert">{_esc(text)}</p>'
        self.words.value = self.figures.value = self.numbers.value = ""

    @staticmethod
    def _cautions_html(items: list[str] | None = None) -> str:
        return cautions_html(specific(items), "Cautions for this part")
