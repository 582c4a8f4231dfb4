"""The app's retest panel and the clinic lead's outcomes view (docs/reassess.md).

:class:`ReassessPanel`: the retest form (generated from the retest's own field metadata,
:func:`prescribe.ui.form_spec.retest_fields`), "Compare" (the comparison, the decision and
the proposed next block, nothing stored), "Store the retest and apply the next block"
(:func:`prescribe.clinic.reassess.reassess_person`), the measures over time as charts, and
the progress letter to download.  :class:`OutcomesPanel`: per measure, how many people
improved, did not change or worsened, by template (a bqplot chart a lead can show the team).

Widgets carry stable CSS classes (``pr-retest-...``, ``pr-outcomes-...``) for browser tests.
"""

from __future__ import annotations

import base64
import html
from datetime import date
from typing import Any

import ipywidgets as w

from ..cautions import with_standard
from ..errors import InputError, NotFoundError
from ..plan_schema import start_day
from .common import LazyPanel, LazySection, cautions_html, guarded
from .form_spec import retest_data, retest_fields
from .identity import bind_name_field

VERDICT_CSS = {"improved": "pr-verdict-improved", "no real change": "pr-verdict-same", "worse": "pr-verdict-worse"}


def _esc(value: Any) -> str:
    return html.escape(str(value), quote=True)


def result_html(result: dict) -> str:
    """The comparison, the decision, its reasons and the next block as HTML."""
    rows = "".join(
        f'<tr class="{VERDICT_CSS[m["verdict"]]}"><td>{_esc(m["label"])}</td><td>{_esc(m["baseline"])}</td>'
        f'<td>{_esc(m["previous"])}</td><td>{_esc(m["now"])}</td><td>{m["change"]:+g}</td>'
        f'<td title="{_esc(m["mdc_source"])}">{_esc(m["mdc"])} {_esc(m["unit"])}</td>'
        f'<td class="pr-retest-verdict">{_esc(m["verdict"])}</td></tr>' for m in result["measures"])
    table = ('<table class="pr-table pr-retest-measures"><thead><tr><th>Measure</th><th>Baseline</th><th>Previous'
             '</th><th>Now</th><th>Change</th><th>MDC (hover: source)</th><th>Verdict</th></tr></thead><tbody>'
             + rows + "</tbody></table>")
    first = "".join(f"<li>{_esc(f['label'])}: {_esc(f['now'])} {_esc(f['unit'])} (first measurement)</li>"
                    for f in result.get("first_measured") or [])
    reasons = "".join(f'<li>{_esc(r["message"])} <span class="pr-source">({_esc(r["source"])})</span></li>'
                      for r in result["reasons"])
    nb = result.get("next_block")
    if nb:
        stored = (f'stored as program version {nb["program_version"]}' if result.get("retest_id")
                  else f'to be stored as program version {nb["program_version"]}')
        block = (f'<p class="pr-retest-next">Next block: {nb["weeks"]} weeks from {_esc(nb["starts_on"])}, impact '
                 f'level {nb["start_level"]}, resistance phase {_esc(nb["start_phase"])}, continuing from week '
                 f'{nb["continues_from_week"]} ({stored}).</p>')
    else:
        block = '<p class="pr-retest-next">No next block: the current program is not replaced.</p>'
    return (table + (f"<ul>{first}</ul>" if first else "")
            + f'<div class="pr-retest-decision pr-decision-{_esc(result["decision"])}"><b>Decision: '
            f'{_esc(result["decision"])}</b><ul>{reasons}</ul>{block}</div>')


class MeasureCharts:
    """One small bqplot line chart per measure with at least two values (baseline first)."""

    def __init__(self) -> None:
        self.box = w.VBox([])
        self.box.add_class("pr-retest-charts")

    def update(self, series: dict[str, list[tuple[str, float]]]) -> int:
        """Draw ``series`` (:func:`prescribe.outcomes.measures.measure_series`); returns the charts drawn."""
        import bqplot as bq
        import numpy as np

        from ..outcomes.measures import measure_rules
        rules = measure_rules()
        figures = []
        for name, points in series.items():
            if len(points) < 2:
                continue  # no empty charts
            rule = rules[name]
            x = bq.DateScale()
            y = bq.LinearScale()
            days = np.array([date.fromisoformat(d) for d, _ in points], dtype="datetime64[D]")
            line = bq.Lines(x=days.astype("datetime64[ms]"), y=[float(v) for _, v in points],
                            scales={"x": x, "y": y}, marker="circle", colors=["#1f3b57"])
            fig = bq.Figure(title=f"{rule.label} ({rule.unit})", marks=[line],
                            axes=[bq.Axis(scale=x, tick_format="%b %Y"), bq.Axis(scale=y, side="left")],
                            fig_margin={"top": 36, "bottom": 36, "left": 50, "right": 16},
                            layout={"width": "320px", "height": "200px"})
            fig.add_class("pr-retest-chart")
            figures.append(fig)
        self.box.children = [w.HBox(figures[i:i + 3]) for i in range(0, len(figures), 3)]
        return len(figures)


def _cautions_box(lines: list[str]) -> w.HTML:
    """The cautions of a section: its own lines, then the standard ones."""
    box = w.HTML(cautions_html(with_standard(lines), "Cautions for this part"))
    box.add_class("pr-cautions-box")
    return box


class _Panel(LazyPanel):
    """A section of the app built when opened, redrawn by :meth:`refresh` once built; its errors
    and lock are the app's."""

    def __init__(self, app, title: str, css: str) -> None:
        self.app = app
        self.section = LazySection(title, css, self._build, after=self.refresh)

    @property
    def lock(self):
        return self.app.lock

    @property
    def errors(self):
        return self.app.errors


class ReassessPanel(_Panel):
    """Retest, compare, apply the next block, see the measures over time, download the letter."""

    def __init__(self, app) -> None:
        self.result: dict | None = None
        super().__init__(app, "9. Retest, outcome and next block", "pr-section-retest")

    def _build(self) -> list:
        self.specs = retest_fields()
        self.inputs: dict[str, w.Text] = {}
        rows = []
        for spec in self.specs:
            box = w.Text(description=spec.label + (" *" if spec.required else ""), placeholder=spec.placeholder,
                         tooltip=f"{spec.help} Allowed: {spec.allowed}.", style={"description_width": "190px"},
                         layout=w.Layout(width="430px"))
            box.add_class("pr-retest-" + spec.key.replace(".", "-").replace("_", "-"))
            self.inputs[spec.key] = box
            rows.append(box)
        self.inputs["date"].value = date.today().isoformat()
        self.clinician = w.Text(value="", description="Clinician *", style={"description_width": "190px"},
                                layout=w.Layout(width="430px"))
        self.clinician.add_class("pr-retest-clinician")
        bind_name_field(self.app.signed, self.clinician)  # the signed-in name, else typed here
        self.compare_button = w.Button(description="Compare and propose", layout=w.Layout(width="auto"))
        self.compare_button.add_class("pr-retest-compare")
        self.compare_button.on_click(lambda _b: self.on_compare())
        self.apply_button = w.Button(description="Store the retest and apply the next block", button_style="primary",
                                     layout=w.Layout(width="auto"))
        self.apply_button.add_class("pr-retest-apply")
        self.apply_button.on_click(lambda _b: self.on_apply())
        self.letter_button = w.Button(description="Prepare the progress letter (PDF)", layout=w.Layout(width="auto"))
        self.letter_button.add_class("pr-retest-letter")
        self.letter_button.on_click(lambda _b: self.on_letter())
        self.download = w.HTML("")
        self.download.add_class("pr-retest-download")
        self.view = w.HTML("")
        self.view.add_class("pr-retest-result")
        self.charts = MeasureCharts()
        self.history = w.HTML("")
        self.history.add_class("pr-retest-history")
        cautions = _cautions_box(["A verdict compares a measure with its published minimal detectable change; judge "
                                  "it with the person in front of you.",
                                  "The next block passes the same safety check as every program."])
        grid = w.GridBox(rows, layout=w.Layout(grid_template_columns="repeat(2, 440px)"))
        return [w.HTML("<p>The retest of the open, saved person. Leave a box empty when the measure was not "
                       "taken. Hover over a box for what it accepts.</p>"), grid, self.clinician,
                w.HBox([self.compare_button, self.apply_button, self.letter_button, self.download]),
                self.view, self.history, self.charts.box, cautions]

    # -- helpers ------------------------------------------------------------------------
    def _retest(self):
        from ..outcomes.retest import parse_retest
        session = self.app.session
        if session.record is None or session.saved_version is None:
            raise InputError.single("person", None, "a saved person with a stored program, opened above")
        values = {k: box.value for k, box in self.inputs.items()}
        return parse_retest(retest_data(values, session.record.patient_id), source="the retest form")

    def on_compare(self) -> None:
        guarded("Comparing the retest")(ReassessPanel._compare)(self)

    def on_apply(self) -> None:
        guarded("Storing the retest")(ReassessPanel._apply)(self)

    def on_letter(self) -> None:
        guarded("Preparing the progress letter")(ReassessPanel._letter)(self)

    def _compare(self) -> None:
        from ..clinic.reassess import assess_retest
        result = assess_retest(self.app.session.store, self._retest())
        self.result = {k: v for k, v in result.items() if not k.startswith("_")}
        self.view.value = result_html(self.result)

    def _apply(self) -> None:
        from ..clinic.reassess import reassess_person
        from ..settings import current_clinician
        who = current_clinician(self.clinician.value.strip() or None, required=True)
        session = self.app.session
        result = reassess_person(session.store, self._retest(), clinician=who)
        self.result = result
        self.view.value = result_html(result) + (
            f'<div class="pr-notice-box pr-retest-stored" role="status">Retest stored'
            + (f'; next block stored as program version {result["next_block"]["program_version"]}'
               if result.get("next_block") else "") + ".</div>")
        if result.get("next_block"):
            session.load(session.record.patient_id)  # the page shows the new program version
            self.app.refresh()
        self.refresh()

    def _letter(self) -> None:
        from ..handout.letter import letter_context, render_letter_html
        from ..handout.pdf import html_to_pdf
        session = self.app.session
        if session.record is None:
            raise InputError.single("person", None, "a saved person with a stored retest, opened above")
        pid = session.record.patient_id
        pdf = html_to_pdf(render_letter_html(letter_context(session.store, pid)))
        name = f"progress-{pid}.pdf"
        self.download.value = (f'<a class="pr-download-letter" download="{_esc(name)}" '
                               f'href="data:application/pdf;base64,{base64.b64encode(pdf).decode("ascii")}">'
                               f'Download the letter (PDF)</a>')

    def refresh(self) -> None:
        """Show the open person's retests and their measures over time (or clear the panel)."""
        if not self.section.built:
            return
        session = self.app.session
        rows = []
        if session.record is not None:
            try:
                rows = session.store.retests(session.record.patient_id)
            except (NotFoundError, InputError):
                rows = []
        if not rows:
            self.history.value = "<p class='pr-retest-none'>No retest stored for this person yet.</p>"
            self.charts.update({})
            return
        from ..outcomes.measures import measure_series
        start = start_day(session.store.get_program(session.record.patient_id, 1)).isoformat()
        items = "".join(f"<li>{_esc(r['date'])}: {_esc(r['decision'])}"
                        + (f", program version {r['program_version']}" if r["program_version"] else "") + "</li>"
                        for r in rows)
        self.history.value = f"<p><b>Stored retests</b></p><ul class='pr-retest-list'>{items}</ul>"
        self.charts.update(measure_series(start, rows))


class OutcomesPanel(_Panel):
    """The clinic lead's view: per measure, improved / no real change / worse, by template."""

    def __init__(self, app) -> None:
        super().__init__(app, "10. Clinic outcomes (for the lead)", "pr-section-outcomes")

    def _build(self) -> list:
        import bqplot as bq
        self.template = w.Dropdown(options=[("all templates", "(all)")], value="(all)", description="Template")
        self.template.add_class("pr-outcomes-template")
        self.template.observe(lambda _c: self.draw(), names="value")
        self.refresh_button = w.Button(description="Count again", layout=w.Layout(width="auto"))
        self.refresh_button.add_class("pr-outcomes-refresh")
        self.refresh_button.on_click(lambda _b: guarded("Counting the outcomes")(OutcomesPanel._refresh)(self))
        self.x = bq.OrdinalScale()
        self.y = bq.LinearScale(min=0.0)
        self.bars = bq.Bars(x=[], y=[[], [], []], scales={"x": self.x, "y": self.y}, type="stacked",
                            colors=["#2e7d32", "#bdbdbd", "#c62828"], labels=["improved", "no real change", "worse"],
                            display_legend=True, padding=0.4)
        self.y_axis = bq.Axis(scale=self.y, side="left", label="people", tick_format="d")
        self.figure = bq.Figure(title="People by their latest retest against their baseline", marks=[self.bars],
                                axes=[bq.Axis(scale=self.x), self.y_axis],
                                legend_location="top-left", layout={"width": "100%", "height": "320px"},
                                fig_margin={"top": 40, "bottom": 60, "left": 60, "right": 20})
        self.figure.add_class("pr-outcomes-chart")
        self.table = w.HTML("")
        self.table.add_class("pr-outcomes-table")
        self.result: dict | None = None
        cautions = _cautions_box(["Counts of people, not proof that a template works: medicines, illness and season "
                                  "change these measures too."])
        return [w.HBox([self.template, self.refresh_button]), self.figure, self.table, cautions]

    def refresh(self) -> None:
        guarded("Counting the outcomes")(OutcomesPanel._refresh)(self)

    def _refresh(self) -> None:
        if not self.section.built:
            return
        from ..clinic.caseload import outcomes
        self.result = outcomes(self.app.session.store)
        templates = sorted({r["template"] for r in self.result["rows"]} - {"(all)"})
        self.template.options = [("all templates", "(all)")] + [(t, t) for t in templates]
        self.draw()

    def draw(self) -> None:
        if self.result is None:
            return
        rows = [r for r in self.result["rows"] if r["template"] == self.template.value]
        top = max([1, *(r["people"] for r in rows)])
        step = max(1, -(-top // 8))
        with self.bars.hold_sync():
            self.y.max = float(top) * 1.45  # room above the bars for the legend
            self.y_axis.tick_values = list(range(0, top + step, step))
            self.bars.x = [r["label"] for r in rows]
            self.bars.y = [[r["improved"] for r in rows], [r["no real change"] for r in rows],
                           [r["worse"] for r in rows]]
        body = "".join(f"<tr><td>{_esc(r['label'])}</td><td>{r['improved']}</td><td>{r['no real change']}</td>"
                       f"<td>{r['worse']}</td><td>{r['people']}</td></tr>" for r in rows)
        n = self.result["people"]
        self.table.value = (f"<p>{n} {'person' if n == 1 else 'people'} with a stored retest.</p>"
                            '<table class="pr-table pr-outcomes-rows"><thead><tr><th>Measure</th><th>Improved</th>'
                            "<th>No real change</th><th>Worse</th><th>People</th></tr></thead><tbody>"
                            + body + "</tbody></table>")
