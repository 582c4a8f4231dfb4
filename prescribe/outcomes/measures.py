"""Each retest measure against its minimal detectable change: baseline, previous, now, change, verdict.

The minimal detectable changes (MDC), the DXA least significant change (LSC) and their
sources are data (``prescribe/data/retest_measures.toml``), read here once.  A change
counts as real when it reaches the MDC (at or beyond it); smaller changes are "no real
change".  Which way is better is the measure's own: a faster Timed Up and Go, more chair
stands, a longer tandem stance, less pain; for body mass and height only a loss counts
(as worse).

Pure domain code: values in, dicts out; no store.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass
from functools import lru_cache
from importlib import resources
from typing import Any, Iterable

from ..records import T_SCORE_SITES
from .retest import RETEST_MEASURES

__all__ = ["VERDICTS", "MeasureRule", "measure_rules", "dxa_lsc_sd", "verdict", "snapshot", "compare",
           "measure_label", "decision_rules", "height_loss_cm", "measure_series"]

#: The verdicts, in the contract's words.
VERDICTS: tuple[str, ...] = ("improved", "no real change", "worse")
#: Small slack for comparisons of decimal figures (a change equal to the MDC counts).
_EPS = 1e-9


@dataclass(frozen=True)
class MeasureRule:
    """One measure's MDC, direction and source (a line of the data file)."""

    name: str
    label: str
    unit: str
    better: str                  # lower | higher | loss_is_worse
    mdc: float | None            # absolute, in the unit
    mdc_pct: float | None        # or a percentage of the earlier value
    source: str
    status: str


@lru_cache(maxsize=1)
def _data() -> dict:
    return tomllib.loads(resources.files("prescribe").joinpath("data/retest_measures.toml").read_text("utf-8"))


@lru_cache(maxsize=1)
def measure_rules() -> dict[str, MeasureRule]:
    """The measures of the data file, by name; the DXA sites as ``t_scores.SITE`` and ``z_scores.SITE``."""
    data = _data()
    out: dict[str, MeasureRule] = {}
    for name, m in data["measures"].items():
        if name not in RETEST_MEASURES:
            raise ValueError(f"retest_measures.toml: {name!r} is not a retest measure ({', '.join(RETEST_MEASURES)})")
        out[name] = MeasureRule(name, m["label"], m["unit"], m["better"], m.get("mdc"), m.get("mdc_pct"),
                                m["source"], m["status"])
    missing = [n for n in RETEST_MEASURES if n not in out]
    if missing:
        raise ValueError(f"retest_measures.toml has no entry for {', '.join(missing)}")
    dxa = data["dxa"]
    src = (f"{dxa['lsc_factor_source']} ({dxa['lsc_factor_status']}); {dxa['precision_source']} "
           f"({dxa['precision_status']}); {dxa['reference_source']} ({dxa['reference_status']})")
    for group, word in (("t_scores", "T-score"), ("z_scores", "Z-score")):
        for site in T_SCORE_SITES:
            label = f"{dxa['sites'][site]['label']} {word}"
            out[f"{group}.{site}"] = MeasureRule(f"{group}.{site}", label, "SD", "higher", None, None, src,
                                                 dxa["precision_status"])
    return out


def decision_rules() -> dict[str, dict]:
    """The ``[decision.*]`` entries of the data file (what findings do to the next block)."""
    return _data()["decision"]


def measure_label(name: str) -> str:
    return measure_rules()[name].label


def dxa_lsc_sd(site: str, t_score: float | None = None) -> float:
    """The ISCD least significant change at ``site`` in standard deviations, at the person's BMD.

    .. math:: LSC_{SD} = 2.77 \\cdot \\frac{p}{100} \\cdot \\left(\\frac{\\mu}{\\sigma} + T\\right)

    with ``p`` the precision error [%], ``mu`` and ``sigma`` the young-adult reference mean
    and SD [g/cm2] of the site and ``T`` the T-score (-2.5 when unknown): the LSC is a
    percentage of BMD, and BMD = mu + T sigma.

    References
    ----------
    ISCD precision assessment (LSC = 2.77 x precision error); Shuhart et al. 2019, J Clin
    Densitom 22:453-471 (minimum acceptable precision, from memory); Looker et al. 1998,
    Osteoporos Int 8:468-489 (NHANES III reference, from memory).
    """
    dxa = _data()["dxa"]
    s = dxa["sites"][site]
    t = -2.5 if t_score is None else float(t_score)
    bmd_over_sd = s["reference_mean_g_cm2"] / s["reference_sd_g_cm2"] + t
    return round(dxa["lsc_factor"] * s["precision_pct"] / 100.0 * max(bmd_over_sd, 1.0), 2)


def verdict(rule: MeasureRule, change: float, mdc: float) -> str:
    """improved | no real change | worse, for ``change`` (now minus earlier) against ``mdc``."""
    if rule.better == "lower":
        return "improved" if change <= -mdc + _EPS else "worse" if change >= mdc - _EPS else "no real change"
    if rule.better == "higher":
        return "improved" if change >= mdc - _EPS else "worse" if change <= -mdc + _EPS else "no real change"
    if rule.better == "loss_is_worse":
        return "worse" if change <= -mdc + _EPS else "no real change"
    raise ValueError(f"unknown direction {rule.better!r} for {rule.name}")


def snapshot(values: dict[str, Any]) -> dict[str, float]:
    """The measures in a record or retest dict (``t_scores`` and ``z_scores`` flattened to ``t_scores.SITE``)."""
    out: dict[str, float] = {}
    for name in RETEST_MEASURES:
        if values.get(name) is not None:
            out[name] = values[name]
    for group in ("t_scores", "z_scores"):
        for site, value in (values.get(group) or {}).items():
            if value is not None:
                out[f"{group}.{site}"] = value
    return out


def measure_series(start: str, rows: list[dict]) -> dict[str, list[tuple[str, float]]]:
    """Each measure's values over time, oldest first, in the data file's order of measures: the
    baseline (the record's values the first retest replaced, dated ``start``, the program's first
    day), then each stored retest's (``rows``, oldest first, as the store gives them).  A measure
    never measured is left out; one measured once has one point (the app's and the letter's
    charts draw only those with two or more)."""
    if not rows:
        return {}
    taken = [(str(start)[:10], rows[0]["previous"])] + [(r["date"], snapshot(r["retest"])) for r in rows]
    out: dict[str, list[tuple[str, float]]] = {}
    for name in measure_rules():
        points = [(day, snap[name]) for day, snap in taken if snap.get(name) is not None]
        if points:
            out[name] = points
    return out


def _mdc(rule: MeasureRule, earlier: float, history: dict[str, float]) -> float:
    if rule.name.startswith(("t_scores.", "z_scores.")):
        site = rule.name.split(".", 1)[1]
        t = history.get(f"t_scores.{site}") if rule.name.startswith("z_scores.") else earlier
        return dxa_lsc_sd(site, t)
    if rule.mdc_pct is not None:
        return round(rule.mdc_pct / 100.0 * abs(earlier), 2)
    return float(rule.mdc)


def _num(x: float) -> float:
    return round(float(x), 2)


def compare(history: Iterable[dict[str, float]], now: dict[str, float]) -> tuple[list[dict], list[dict]]:
    """Each measure taken ``now`` against its baseline and previous value.

    Parameters
    ----------
    history : iterable of dict
        Earlier snapshots (:func:`snapshot`), oldest first: the intake record's measures,
        then each earlier retest's.
    now : dict
        This retest's snapshot.

    Returns
    -------
    (measures, first)
        ``measures``: one dict a measure with an earlier value: {measure, label, unit,
        baseline, previous, now, change (now - baseline), mdc, mdc_source, mdc_status,
        verdict, change_since_previous, verdict_since_previous}, in the data file's order;
        ``first``: the measures taken for the first time ({measure, label, unit, now}).
    """
    history = list(history)
    rules = measure_rules()
    measures, first = [], []
    for name, rule in rules.items():
        if name not in now:
            continue
        earlier = [h[name] for h in history if h.get(name) is not None]
        if not earlier:
            first.append({"measure": name, "label": rule.label, "unit": rule.unit, "now": now[name]})
            continue
        baseline, previous = earlier[0], earlier[-1]
        base_hist = next((h for h in history if h.get(name) is not None), {})
        prev_hist = next((h for h in reversed(history) if h.get(name) is not None), {})
        mdc = _mdc(rule, baseline, base_hist)
        mdc_prev = _mdc(rule, previous, prev_hist)
        change, change_prev = _num(now[name] - baseline), _num(now[name] - previous)
        measures.append({"measure": name, "label": rule.label, "unit": rule.unit, "baseline": baseline,
                         "previous": previous, "now": now[name], "change": change, "mdc": mdc,
                         "mdc_source": rule.source, "mdc_status": rule.status,
                         "verdict": verdict(rule, change, mdc),
                         "change_since_previous": change_prev,
                         "verdict_since_previous": verdict(rule, change_prev, mdc_prev)})
    return measures, first


def height_loss_cm(history: Iterable[dict[str, float]], now: dict[str, float]) -> float | None:
    """Height lost since the first measured height [cm] (positive: shorter now), or None."""
    heights = [h["height_cm"] for h in history if h.get("height_cm") is not None]
    if not heights or now.get("height_cm") is None:
        return None
    return _num(heights[0] - now["height_cm"])
