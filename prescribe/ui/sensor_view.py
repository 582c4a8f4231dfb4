"""The app's worn-sensor panel: upload a recording for the open person, watch it being read,
see planned against delivered per day and per week.

A :class:`SensorPanel` sits over a :class:`~prescribe.ui.app.ClinicApp` (its session,
lock and error area) and exposes ``.widget``.  The counting is
:func:`prescribe.sensor.summarise_for_person`; the store keeps the summary (never the
raw signal).  Widgets carry stable CSS classes (``pr-sensor-...``) for browser tests.
"""

from __future__ import annotations

import html
import tempfile
from pathlib import Path
from typing import Any

import ipywidgets as w

from ..errors import InputError, NotFoundError, PrescribeError
from .cautions_view import SENSOR_CAUTIONS
from .common import LazyPanel, LazySection, cautions_html, guarded

SUFFIXES = (".csv", ".cwa", ".bin")
#: Largest upload [bytes]: the app server's websocket limit (prescribe/cli/app_cmd.py).
UPLOAD_LIMIT_BYTES = 256 * 1024 * 1024


def _esc(value: Any) -> str:
    return html.escape(str(value), quote=True)


class PlannedDeliveredChart:
    """Grouped bars: planned (light) and delivered (dark) impacts, one pair per day or week;
    days and weeks inside a weak window are outlined in the accent colour."""

    def __init__(self, title: str, css: str) -> None:
        import bqplot as bq  # loaded on first use, so the page opens without it

        from .charts import INK, SHADE
        self.x = bq.OrdinalScale()
        self.y = bq.LinearScale(min=0.0, max=1.0)
        self.bars = bq.Bars(x=[], y=[[], []], scales={"x": self.x, "y": self.y}, type="grouped",
                            colors=[SHADE, INK], padding=0.25,
                            tooltip=bq.Tooltip(fields=["x", "y"], labels=["", "impacts"]))
        # Whole-number ticks, each once (a count axis of 0-1 would otherwise read "0 0 0 0 0 1 1 1").
        self.y_axis = bq.Axis(scale=self.y, side="left", label="impacts (2 BW or more)", tick_format="d",
                              tick_values=[0, 1])
        self.figure = bq.Figure(
            title=title + ": planned (light), delivered (dark)", marks=[self.bars],
            axes=[bq.Axis(scale=self.x, label=""), self.y_axis],
            fig_margin={"top": 40, "bottom": 50, "left": 60, "right": 20},
            layout={"width": "100%", "height": "260px"})
        self.figure.add_class(css)

    def update(self, labels: list[str], planned: list[float], delivered: list[float]) -> None:
        from .charts import whole_ticks
        ticks = whole_ticks(max([0.0, *planned, *delivered]))
        with self.bars.hold_sync():
            self.y.max = float(ticks[-1]) * 1.05
            self.y_axis.tick_values = ticks
            self.bars.x = labels
            self.bars.y = [planned, delivered]


class SensorPanel(LazyPanel):
    """Upload, count and compare; ``.widget`` is the section shown in the app."""

    def __init__(self, app) -> None:
        self.app = app
        self.summary: dict | None = None
        self.day_chart: PlannedDeliveredChart | None = None
        self.week_chart: PlannedDeliveredChart | None = None
        self.section = LazySection("7. Worn sensor: delivered against planned", "pr-section-sensor", self._build,
                                   after=self.show_latest)

    def _build(self) -> list:
        """The panel's widgets (built the first time the section is opened)."""
        self.upload = w.FileUpload(accept=",".join(SUFFIXES), multiple=False, description="Choose file")
        self.upload.add_class("pr-sensor-upload")
        self.site = w.Dropdown(options=[("worn at the hip", "hip"), ("worn at the wrist", "wrist")], value="hip",
                               description="Site")
        self.site.add_class("pr-sensor-site")
        self.keep = w.Checkbox(value=True, description="Store the summary with the person", indent=False)
        self.keep.add_class("pr-sensor-keep")
        self.count_button = w.Button(description="Count the recording", button_style="primary",
                                     layout=w.Layout(width="auto"))
        self.count_button.add_class("pr-sensor-count")
        self.count_button.on_click(lambda _b: self.on_count())
        self.progress = w.FloatProgress(value=0.0, min=0.0, max=1.0, description="Reading",
                                        layout=w.Layout(visibility="hidden"))
        self.progress.add_class("pr-sensor-progress")
        self.status = w.HTML("")
        self.status.add_class("pr-sensor-status")
        self.chart_box = w.VBox([])
        self.chart_box.add_class("pr-sensor-charts")
        self.table = w.HTML("")
        self.table.add_class("pr-sensor-table")
        cautions = w.HTML(cautions_html(list(SENSOR_CAUTIONS), "Cautions for this part"))
        cautions.add_class("pr-cautions-box")
        cautions.add_class("pr-sensor-cautions")
        return [
            w.HTML("<p>A recording from a sensor worn at the hip: CSV (time_s, x_g, y_g, z_g), Axivity .cwa or "
                   "GENEActiv .bin. Impacts are counted per band of peak acceleration and set beside the "
                   "person's stored program. Only the summary is stored, never the signal. Files up to 256 MB here "
                   "(a week at the hip in .cwa is well under that); a larger one with <code>prescribe sensor</code>.</p>"),
            w.HBox([self.upload, self.site, self.keep]), w.HBox([self.count_button, self.progress]),
            self.status, self.chart_box, self.table, cautions]

    # -- actions ----------------------------------------------------------------------
    def _report(self, share: float) -> None:
        self.progress.value = max(0.0, min(1.0, float(share)))

    def on_count(self) -> None:
        guarded("Counting the recording")(SensorPanel._count)(self)

    @property
    def lock(self):
        return self.app.lock

    @property
    def errors(self):
        return self.app.errors

    def _count(self) -> None:
        session = self.app.session
        if session.record is None:
            raise InputError.single("person", None, "a person opened or checked above (the recording is theirs)")
        files = list(self.upload.value or ())
        if not files:
            raise InputError.single("recording", None, "a file chosen with Choose file (.csv, .cwa or .bin)")
        item = files[0]
        name = str(item.get("name") or "recording")
        suffix = Path(name).suffix.lower()
        if suffix not in SUFFIXES:
            raise InputError.single("recording", name, "a file ending in .csv, .cwa or .bin")
        if int(item.get("size") or len(item["content"])) > UPLOAD_LIMIT_BYTES:
            raise InputError.single("recording", name, "a file of at most 256 MB here (count a larger one with "
                                                       "`prescribe sensor FILE --patient ID`)")
        self.status.value = f'<span role="status">Reading {_esc(name)}...</span>'
        self.progress.layout.visibility = "visible"
        self.progress.value = 0.0
        pid = session.record.patient_id
        plan, saved_at = self._program(pid)
        from ..sensor import summarise_for_person
        with tempfile.TemporaryDirectory(prefix="prescribe-sensor-") as folder:
            path = Path(folder) / f"upload{suffix}"
            path.write_bytes(bytes(item["content"]))
            try:
                summary = summarise_for_person(path, site=self.site.value,
                                               body_mass_kg=session.record.body_mass_kg, plan=plan,
                                               plan_saved_at=saved_at, progress=self._report)
            except PrescribeError:
                self.status.value = ""
                self.progress.layout.visibility = "hidden"
                raise
        summary["file"] = name
        summary["patient_id"] = pid
        summary["notes"] = summary["notes"] + summary.pop("person_notes")
        if plan is None:
            summary["notes"].append("No stored program for this person: save the program to compare with it.")
        stored = ""
        if self.keep.value:
            if not session.store.has_patient(pid):
                raise InputError.single("person", pid, "a saved person (save the person first, then count again)")
            sid = session.store.add_sensor_summary(pid, summary, session.clinician or self.app.clinician.value.strip())
            summary["sensor_summary_id"], summary["stored"] = sid, True
            stored = " Stored with the person."
        else:
            summary["stored"] = False
        self.progress.value = 1.0
        self.show(summary)
        self.status.value = (f'<div class="pr-notice-box" role="status">Counted {_esc(name)}: '
                             f'{summary["impacts"]} impacts over {len(summary["days"])} day(s).{stored}</div>')

    def _program(self, pid: str) -> tuple[Any, str | None]:
        session = self.app.session
        if session.plan is not None and session.saved_version is not None:
            return session.plan, session.store.program_created(pid, session.saved_version)
        try:
            return session.store.get_program(pid), session.store.program_created(pid)
        except NotFoundError:
            return None, None

    def show_latest(self) -> None:
        """Show the open person's newest stored recording (or clear the panel).

        The panel is built when it is opened, or here as soon as a saved person's program is open."""
        session = self.app.session
        if not self.section.built:
            if session.record is not None and session.saved_version is not None:
                self.section.open()  # builds, then comes back here through ``after``
            return
        latest = None
        if session.record is not None:
            try:
                rows = session.store.sensor_summaries(session.record.patient_id)
            except (NotFoundError, PrescribeError):
                rows = []
            latest = rows[-1]["summary"] if rows else None
        if latest is None:
            self.summary = None
            if self.day_chart is not None:
                self.day_chart.update([], [], [])
                self.week_chart.update([], [], [])
            self.table.value = ""
            return
        self.show(latest)

    # -- drawing ----------------------------------------------------------------------
    def _charts(self) -> tuple[PlannedDeliveredChart, PlannedDeliveredChart]:
        if self.day_chart is None:
            self.day_chart = PlannedDeliveredChart("Impacts per day: planned and delivered", "pr-sensor-chart-days")
            self.week_chart = PlannedDeliveredChart("Impacts per program week: planned and delivered",
                                                    "pr-sensor-chart-weeks")
            self.chart_box.children = [self.day_chart.figure, self.week_chart.figure]
        return self.day_chart, self.week_chart

    def show(self, summary: dict) -> None:
        self.summary = summary
        self._charts()
        plan = summary.get("plan") or {}
        days = plan.get("days") or [{"date": d.get("date") or f"day {d['day']}", "planned_impacts": 0,
                                     "delivered_impacts": d.get("impacts_2bw_or_more") or 0,
                                     "weak_window": False} for d in summary["days"]]
        self.day_chart.update([_day_label(d["date"]) for d in days], [float(d["planned_impacts"]) for d in days],
                              [float(d["delivered_impacts"]) for d in days])
        weeks = plan.get("weeks") or []
        self.week_chart.update([f"week {k['week']}" for k in weeks], [float(k["planned_impacts"]) for k in weeks],
                               [float(k["delivered_impacts"]) for k in weeks])
        self.table.value = summary_html(summary)


def _day_label(value) -> str:
    """A recorded day as the charts name it ("2 Nov"); a day without a date keeps its own words."""
    from .program_model import readable_date
    text = readable_date(value)
    return text.rsplit(" ", 1)[0] if text != str(value) else text


def summary_html(summary: dict) -> str:
    """The recording's figures, the days' table, the flags and the notes as HTML."""
    from .program_model import readable_date
    share = summary.get("delivered_share")
    head = (f'<p class="pr-sensor-figures">File <b>{_esc(summary.get("file"))}</b> &middot; '
            f'{_esc(summary.get("sample_rate_hz"))} Hz &middot; {_esc(summary.get("samples"))} samples &middot; '
            f'wear {_esc(summary.get("wear_time_h"))} h &middot; impacts above 4 g: '
            f'<b>{_esc(summary.get("impacts_above_4g"))}</b>'
            + (f' &middot; delivered share of planned impacts: <b class="pr-sensor-share">{share:.0%}</b>'
               if isinstance(share, (int, float)) else "") + "</p>")
    bands = list(summary.get("impacts_by_band") or {})
    cols = ["date", "wear h", *[f"{b} g" for b in bands], "OI", "planned", "delivered", "planned OI", "note"]
    rows = []
    for d in summary["days"]:
        cells = [readable_date(d.get("date")) or f"day {d['day']}", d.get("wear_time_h"), *[d["impacts_by_band"][b] for b in bands],
                 d.get("osteogenic_index"), d.get("planned_impacts", ""), d.get("delivered_impacts", ""),
                 d.get("planned_osteogenic_index", ""),
                 ("beyond plan" + (", weak window" if d.get("weak_window") else "")) if d.get("beyond_plan") else ""]
        css = ' class="pr-sensor-beyond"' if d.get("beyond_plan") else ""
        rows.append(f"<tr{css}>" + "".join(f"<td>{_esc('' if c is None else c)}</td>" for c in cells) + "</tr>")
    table = ('<table class="pr-table pr-sensor-days"><thead><tr>' + "".join(f"<th>{_esc(c)}</th>" for c in cols)
             + "</tr></thead><tbody>" + "".join(rows) + "</tbody></table>")
    flags = (summary.get("plan") or {}).get("flags") or []
    flag_html = "".join(f'<div class="pr-flag pr-flag-{"clear_first" if f["severity"] == "attention" else "note"} '
                        f'pr-sensor-flag"><b>{_esc(readable_date(f["date"]))}</b>: {_esc(f["message"])}</div>'
                        for f in flags)
    notes = "".join(f"<li>{_esc(n)}</li>" for n in summary.get("notes") or [])
    return head + table + flag_html + (f'<ul class="pr-sensor-notes">{notes}</ul>' if notes else "")
