"""The clinician's pages: the dose figures week by week and the evidence."""

from __future__ import annotations

from ...plan_schema import Plan
from .weeks import WeekFacts, week_facts

METHOD_SOURCES_BY_PAGES = {
    "Exerc Sport Sci Rev 31(1):45-50":
    "Turner CH, Robling AG 2003. Designing exercise regimens to increase bone strength. "
    "Exerc Sport Sci Rev 31(1):45-50 (osteogenic index = peak GRF x ln(cycles + 1)).",
    "J Exp Biol 204:3389-3399":
    "Robling AG, Burr DB, Turner CH 2001. Recovery periods restore mechanosensitivity to dynamically "
    "loaded bone. J Exp Biol 204:3389-3399 (about 8 h between bouts).",
    "Endocr Rev 7:379":
    "Eriksen EF 1986. Normal and pathological remodeling of human trabecular bone. Endocr Rev 7:379 "
    "(resorption about 3 weeks before formation: the weak window).",
}


def evidence(plan: Plan) -> list[str]:
    """The plan's sources, then the handout's own method sources the plan does not cite.

    Exact repeats are dropped; a method source counts as cited when the plan cites
    the same journal pages (for example "J Exp Biol 204:3389-3399").
    """
    out: list[str] = []
    for text in plan.sources:
        text = " ".join(str(text).split())
        if text and text not in out:
            out.append(text)
    cited = " ".join(out)
    for pages, text in METHOD_SOURCES_BY_PAGES.items():
        if pages not in cited:
            out.append(text)
    return out


def dose_rows(plan: Plan) -> list[tuple[str, WeekFacts]]:
    """Consecutive weeks with the same dose figures merged, for the clinician page."""
    rows: list[tuple[int, int, WeekFacts]] = []

    def figures(f: WeekFacts) -> tuple:
        return (f.impact_level, f.impacts_per_session, round(f.max_session_oi, 1), round(f.weekly_oi, 1),
                round(f.peak_grf_bw, 2), f.directions, f.resistance_pct_1rm, f.weak_window)

    for f in week_facts(plan):
        if rows and figures(rows[-1][2]) == figures(f) and not f.step_up and rows[-1][1] == f.week - 1:
            rows[-1] = (rows[-1][0], f.week, rows[-1][2])
        else:
            rows.append((f.week, f.week, f))
    return [(f"{a}" if a == b else f"{a}-{b}", f) for a, b, f in rows]
