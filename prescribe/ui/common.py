"""What every section of the clinic app shares: the page's style, the cautions box, tables,
the error area and the guard that puts any failure of a callback on the page, shared
layout models, and sections (always shown, or built the first time they are opened).

Nothing here knows a section: the sections (``*_view.py``, ``*_section.py``) import this
module and the app (``app.py``) assembles them, so no two view modules import each other.
"""

from __future__ import annotations

import functools
import html
import logging
import os
import sys
import traceback
from typing import Any, Callable

import ipywidgets as w

from ..cautions import STANDARD_CAUTIONS
from ..errors import PrescribeError

log = logging.getLogger("prescribe.ui")

STYLE = """
<style>
.pr-app { max-width: 1100px; font-size: 14px; }
.pr-app h2 { font-size: 18px; margin: 18px 0 6px 0; border-bottom: 2px solid #1f3b57; color: #1f3b57; }
.pr-msg { color: #a4161a; font-size: 13px; padding-left: 8px; }
.pr-from-fhir input, .pr-from-fhir select, input.pr-from-fhir { background: #e6f2ff !important; outline: 2px solid #2b6cb0 !important; }
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
.pr-app table.pr-table tr.pr-history-shown td { background: #e8f1fb; font-weight: bold; }
</style>
"""


def esc(value: Any) -> str:
    return html.escape(str(value), quote=True)


def cautions_box(extra: list[str] | None = None) -> w.HTML:
    """The standard cautions (or ``extra`` ones) as a box: the one always-visible box of the page."""
    items = list(extra) if extra else list(STANDARD_CAUTIONS)
    box = w.HTML(cautions_html(items))
    box.add_class("pr-cautions-box")
    return box


def cautions_html(items: list[str], title: str = "Cautions") -> str:
    if not items:
        return ""
    return (f'<div class="pr-cautions"><b>{esc(title)}</b><ul>' +
            "".join(f"<li>{esc(c)}</li>" for c in items) + "</ul></div>")


def table_html(rows: list[dict], columns: list[str] | None = None, css: str = "") -> str:
    if not rows:
        return "<p><i>Nothing yet.</i></p>"
    columns = columns or list(rows[0])
    head = "".join(f"<th>{esc(c.replace('_', ' '))}</th>" for c in columns)
    body = "".join("<tr>" + "".join(f"<td>{esc(cell_text(r.get(c)))}</td>" for c in columns) + "</tr>" for r in rows)
    return f'<table class="pr-table {css}"><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>'


def cell_text(v: Any) -> str:
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
        self.widget.value = f'<div class="pr-error-box" role="alert">{esc(text)}</div>'

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


class WidgetKit:
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



def section_box(title: str, css: str, children: list) -> tuple[w.VBox, w.HTML]:
    """A section always shown: its heading, its widgets and a box for its own cautions.

    The standard cautions stay in the one box at the top of the page; the returned HTML
    widget is where this section's specific ones go (empty until there are some).
    """
    cautions = w.HTML("")
    cautions.add_class("pr-cautions-box")
    cautions.add_class("pr-section-cautions")
    box = w.VBox([w.HTML(f"<h2>{esc(title)}</h2>"), *children, cautions])
    box.add_class(css)
    return box, cautions


class LazySection:
    """A section shown by its title alone until it is opened, and built then.

    The widgets of a section cost the page time and memory when it opens (every widget
    is a model the browser builds); a section most visits never use is therefore built
    the first time someone opens it, or when the page calls :meth:`open` because the
    section has become relevant (a saved program was opened).  ``build`` returns the
    section's widgets; ``after`` then fills them from the page's current state.
    """

    PLACEHOLDER = "<p><i>Opening...</i></p>"

    def __init__(self, title: str, css: str, build: Callable[[], list],
                 after: Callable[[], None] | None = None) -> None:
        self._build = build
        self._after = after  # called once the body is shown (fill it from the current state)
        self.built = False
        self._building = False
        self.widget = w.Accordion(children=[w.HTML(self.PLACEHOLDER)], titles=(title,), selected_index=None)
        self.widget.add_class(css)
        self.widget.add_class("pr-lazy-section")
        self.widget.observe(self._on_toggle, names="selected_index")

    @property
    def is_open(self) -> bool:
        return self.widget.selected_index == 0

    def open(self) -> None:
        """Show the section open, and build it if it is not built yet.

        Opened first, built second: the browser then draws the section's widgets into a shown
        panel (a chart drawn into a closed panel could keep a zero size)."""
        if self.widget.selected_index != 0:
            self.widget.selected_index = 0  # the toggle observer builds it
        self.ensure_built()

    def ensure_built(self) -> None:
        if self.built or self._building:
            return
        self._building = True  # a build that reads the section back must not build it twice
        try:
            body = w.VBox(list(self._build()))
        finally:
            self._building = False
        body.add_class("pr-lazy-body")
        self.widget.children = [body]
        self.built = True
        if self._after is not None:
            self._after()

    def _on_toggle(self, change) -> None:
        if change["new"] == 0:
            self.ensure_built()


class LazyPanel:
    """A panel shown as a :class:`LazySection`: ``.widget`` is the section, :meth:`open` opens it.

    Subclasses set ``self.section`` in ``__init__``."""

    section: LazySection

    @property
    def widget(self) -> w.Accordion:
        return self.section.widget

    def open(self) -> None:
        """Show the section open, building it if need be."""
        self.section.open()


def own_layout(widget: w.Widget) -> w.Widget:
    """Mark ``widget`` as one whose layout the code changes (shown, hidden): it keeps its own."""
    widget._prescribe_own_layout = True
    return widget


def share_plain_models(root: w.Widget, *more: w.Widget, shared: dict | None = None) -> int:
    """Let the widgets under ``root`` (and ``more`` roots) with a default layout or style share one of each.

    Every ipywidget brings its own Layout and Style models even when nothing is set on them:
    about half of the models a page opens with.  Each model is work for the server and,
    mostly, for the browser when the page opens, so widgets whose layout and style are the
    defaults share one model per kind and the unused ones are closed.  A widget whose layout
    the code changes later is marked with :func:`own_layout` and keeps its own.  Returns the
    number of models closed.  ``shared`` (a dict kept by the caller) carries the shared models
    over to a later call, for widgets built after the page (a section built when needed).
    """
    shared = {} if shared is None else shared
    plain_layout = shared.setdefault("layout", w.Layout())
    shared_styles: dict[type, w.Widget] = shared.setdefault("styles", {})
    closed = 0
    seen: set[str] = set()

    defaults: dict[type, dict] = {}  # one fresh model of each kind, read once

    def is_default(model: w.Widget) -> bool:
        kind = type(model)
        if kind not in defaults:
            fresh = kind()
            defaults[kind] = {k: getattr(fresh, k) for k in fresh.keys if not k.startswith("_")}
            fresh.close()
        return all(getattr(model, k) == v for k, v in defaults[kind].items())

    def visit(widget: w.Widget) -> None:
        nonlocal closed
        if widget.model_id in seen:
            return
        seen.add(widget.model_id)
        layout = getattr(widget, "layout", None)
        if (isinstance(layout, w.Layout) and layout is not plain_layout
                and not getattr(widget, "_prescribe_own_layout", False) and is_default(layout)):
            widget.layout = plain_layout
            layout.close()
            closed += 1
        style = getattr(widget, "style", None)
        if isinstance(style, w.Widget) and type(style).__module__.startswith("ipywidgets"):
            kind = type(style)
            if shared_styles.get(kind) is not style and is_default(style):
                if kind not in shared_styles:
                    shared_styles[kind] = kind()
                widget.style = shared_styles[kind]
                style.close()
                closed += 1
        for child in getattr(widget, "children", ()) or ():
            if isinstance(child, w.Widget):
                visit(child)

    for top in (root, *more):
        visit(top)
    if closed:
        shared["used"] = True
    elif not shared.get("used"):  # nobody shares it yet: not a model the page needs
        plain_layout.close()
        shared.pop("layout")
    return closed


_FIRST = object()


def set_options(dropdown: w.Dropdown, options, fallback=_FIRST) -> bool:
    """Give a list its options, keeping the clinician's pick.

    A page is refreshed from background threads too (the warm-up, a page taking a preheated
    kernel) while the clinician picks: a list whose options have not changed is left alone, so
    a pick that arrives during a refresh is never set back.  When they change, the pick stays
    where it is still offered, else ``fallback`` is chosen (by default the first option).
    Returns whether the options changed.
    """
    options = list(options)
    if list(dropdown.options) == options:
        return False
    keep = dropdown.value
    values = [v for _, v in options]
    dropdown.options = options
    if keep in values:
        dropdown.value = keep
    elif fallback is not _FIRST and fallback in values:
        dropdown.value = fallback
    elif values:  # a list that had nothing chosen would stay so: choose the first
        dropdown.value = values[0]
    return True
