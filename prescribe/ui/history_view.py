"""The program versions of the open person, in the clinician's words (no widgets).

Columns have plain headings, times are a readable local date and time (never a raw ISO
timestamp), and the note written with each save is shown beside its version.
"""

from __future__ import annotations

import html

from .program_model import level_words, readable_time


def _esc(value) -> str:
    return html.escape("" if value is None else str(value), quote=True)


def _template(value) -> str:
    """The template as the command line names it ("name@3": name and version)."""
    return str(value) if value else ""


def history_html(rows: list[dict], shown: int | None = None) -> str:
    """The versions table (oldest first), or a line saying there is none yet; the row of the
    version ``shown`` on the page is marked."""
    if not rows:
        return "<p><i>No saved version yet.</i></p>"
    head = ("<tr><th>Version</th><th>Made from version</th><th>Saved by</th><th>Saved on</th><th>Weeks</th>"
            "<th>Highest impact level</th><th>Template</th><th>Note</th></tr>")
    body = "".join(
        ('<tr class="pr-history-shown">' if shown is not None and r.get("version") == shown else "<tr>")
        + f"<td>{_esc(r.get('version'))}</td><td>{_esc(r.get('based_on_version') or '')}</td>"
        f"<td>{_esc(r.get('clinician'))}</td><td>{_esc(readable_time(r.get('saved')))}</td>"
        f"<td>{_esc(r.get('weeks') or '')}</td>"
        f"<td>{_esc(level_words(r['max_impact_level']) if r.get('max_impact_level') is not None else '')}</td>"
        f"<td>{_esc(_template(r.get('template')))}</td>"
        f"<td>{_esc(r.get('note') or '')}</td></tr>" for r in rows)
    return f'<table class="pr-table pr-history"><thead>{head}</thead><tbody>{body}</tbody></table>'
