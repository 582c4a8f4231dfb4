"""Why each planned exercise is there: chosen because, dosed because, and why this week changes
or holds, each with its source (PRODUCT.md "One derivation of every figure, and why").

The builder (:class:`~prescribe.planning.builder._Builder`) explains its weeks with
:meth:`_Why.explain_weeks` after laying them out; an edit that swaps an exercise explains the
new one with :func:`chosen_why` and keeps the dose and week reasons of the one it replaces.
The reasons are worked out from the same choices and limits the planner built to, never from
a second copy of them.  A plan shares exercise dicts between sessions and weeks; so do the
explained ones, keyed by the reason, so a plan keeps its speed (``benchmarks/bench_planner.py``).
"""

from __future__ import annotations

from bisect import bisect_left, bisect_right
from functools import lru_cache

from ..catalogue import IMPACT_LEVEL_LABELS
from ..intensity import SUPERVISED_FROM_PCT_1RM, pct_1rm
from ..plan_schema import PlanLimits, PlannedExercise, Why
from .sources import (SRC_BECK, SRC_BROOKE, SRC_CADENCE, SRC_CARER_LED, SRC_GIANG, SRC_HOLD_VOLUME, SRC_KOHRT,
                      SRC_REMODEL, SRC_ROBLING, SRC_TURNER_DIR, SRC_TURNER_OI, SRC_WATSON)

SRC_INCLUDED = "the clinician's choice (plan option include)"
SRC_SWAPPED = "the clinician's choice (a swap within the same kind of movement and the person's limits)"
SRC_SUPERVISED = ("Watson et al. 2018, J Bone Miner Res 33:211-220 (LIFTMOR: lifts of 80-85% 1RM supervised); "
                  "supervision of high-impact work is common practice")
SRC_START = "common practice: every program starts below its full dose and builds up"
SRC_HOLD_AT_LEVEL = "common practice: a dose is repeated for some weeks before the next step (the template's hold)"


@lru_cache(maxsize=4096)
def _why(reason: str, source: str, about: str) -> Why:
    """One reason as a model, shared between every exercise that gives it (a plan is validated fast)."""
    return Why(reason=reason, source=source, about=about)


def _join(*sources: str) -> str:
    return "; ".join(dict.fromkeys(s for s in sources if s))


def chosen_why(e, limits: PlanLimits, *, falls: bool = False, included: bool = False,
               spine_reason: str = "") -> list[Why]:
    """Why exercise ``e`` (the planner's view of a catalogue entry) is in the program."""
    return list(_chosen(e, limits.max_impact_level, limits.spine_sparing, falls, included, spine_reason))


@lru_cache(maxsize=4096)
def _chosen(e, max_impact_level: int, spine_sparing: bool, falls: bool, included: bool,
            spine_reason: str) -> tuple[Why, ...]:
    level = e.impact_level
    label = IMPACT_LEVEL_LABELS.get(level, str(level))
    cat_src = e.source
    out: list[Why] = []
    if e.category == "impact":
        if level >= 2:
            dirs = ", ".join(d.replace("_", "-") for d in e.directions) or "one direction"
            out.append(_why(f"Impact loading at level {level} ({label}): about {e.peak_grf_bw:g} x body weight at "
                            f"landing, in {dirs}; bone responds to brief, fast, varied loads",
                            _join(SRC_TURNER_DIR, cat_src), "chosen"))
        else:
            out.append(_why(f"Impact loading at level {level} ({label}): repeated low loads that start the "
                            f"impact ladder within level {max_impact_level}, the highest allowed",
                            SRC_BROOKE, "chosen"))
    elif e.category == "resistance":
        lifted = "a barbell lift loaded by % 1RM" if e.loaded_by_1rm else "progressive resistance"
        out.append(_why(f"Strength work ({lifted}): muscle pull loads the hip and spine",
                        SRC_WATSON if e.loaded_by_1rm else SRC_BECK, "chosen"))
    elif e.category == "back_extensor":
        out.append(_why("Back-extensor strength: supports an upright spine", SRC_GIANG, "chosen"))
    elif e.category == "posture":
        out.append(_why("Posture work for the upper back", SRC_GIANG, "chosen"))
    elif e.category == "balance":
        text = ("Balance training every week: falls risk is flagged" if falls
                else "Balance training: fewer falls and so fewer fractures")
        out.append(_why(text, SRC_GIANG, "chosen"))
    else:
        out.append(_why(f"{e.category.replace('_', ' ').capitalize()} work", SRC_KOHRT, "chosen"))
    if spine_sparing and e.category in ("resistance", "back_extensor", "posture") and e.spine_sparing:
        out.append(_why(f"A spine-sparing form ({spine_reason or 'spine-sparing program'})", SRC_GIANG, "chosen"))
    if included:
        out.append(_why("The clinician asked for this exercise", SRC_INCLUDED, "chosen"))
    return tuple(out)


_DOSE_CACHE: dict[tuple, list[Why]] = {}


def dose_why(x: dict, week: dict, tpl, limits: PlanLimits) -> list[Why]:
    """Why exercise dict ``x`` has its dose in ``week`` (a week dict of the builder).

    Remembered by what it reads (the dose, the week's phase, the template and the limits): many
    exercises of many plans share a dose, and a plan must stay fast to build.
    """
    key = (x["category"], x["impacts"], x["impact_level"], x["bouts"], x["bout_gap_hours"], x["minutes"], x["sets"],
           x["reps"], x["intensity"], x["supervised"], x.get("load_kg"), x.get("load_note"),
           week.get("resistance_phase"), week.get("balance_minutes_per_session"),
           tpl.name, tpl.version, tpl.origin, tpl.file,
           limits.max_pct_1rm, limits.carer_led, limits.balance_first, limits.spine_sparing,
           tuple(r.source for r in limits.reasons_for("max_pct_1rm")) if limits.max_pct_1rm is not None else ())
    got = _DOSE_CACHE.get(key)
    if got is None:
        if len(_DOSE_CACHE) > 20_000:
            _DOSE_CACHE.clear()
        got = _DOSE_CACHE[key] = _dose_why(x, week, tpl, limits)
    return got


def _dose_why(x: dict, week: dict, tpl, limits: PlanLimits) -> list[Why]:
    src = tpl.sources
    cat = x["category"]
    out: list[Why] = []
    if x["impacts"]:
        target = tpl.impacts_target(x["impact_level"])
        out.append(_why(f"{x['impacts']} impacts a session at level {x['impact_level']}, building toward "
                        f"{target} with the {tpl.name} template; a few impacts with rest between sets load bone "
                        "nearly as well as many (Turner's osteogenic index)",
                        _join(src.get(f"impacts_target_level{3 if x['impact_level'] >= 3 else 2}", ""),
                              SRC_TURNER_OI), "dose"))
        if x["bouts"] > 1:
            out.append(_why(f"Split into {x['bouts']} bouts at least {x['bout_gap_hours']:g} h apart: bone's "
                            "response returns after hours of rest", _join(src.get("bout_gap_hours", ""),
                                                                         SRC_ROBLING), "dose"))
    elif cat == "impact" and x["minutes"]:
        out.append(_why(f"{x['minutes']:g} minutes a session, building toward "
                        f"{tpl.impact['level1_minutes_full']} with the {tpl.name} template",
                        _join(src.get("level1_minutes_full", ""), SRC_CADENCE), "dose"))
    elif cat == "balance":
        minutes = week.get("balance_minutes_per_session")
        text = (f"Part of about {minutes:g} minutes of balance work a session" if minutes
                else "Part of each session's balance work")
        out.append(_why(text + (", longer with falls risk" if limits.balance_first else ""),
                        src.get("minutes_falls_risk" if limits.balance_first else "minutes_full", SRC_GIANG)
                        or SRC_GIANG, "dose"))
    elif x["sets"] and x["reps"]:
        phase = week.get("resistance_phase") or ""
        key = "spine_sparing_phases" if limits.spine_sparing else "phases"
        intensity = f" at {x['intensity']}" if x["intensity"] else ""
        text = (f"The {phase} phase of the {tpl.name} template" if cat in ("resistance", "back_extensor", "posture")
                and phase else f"{x['sets']} x {x['reps']}{intensity} with the {tpl.name} template")
        out.append(_why(text,
                        src.get(key, "") or src.get("level0_reps_full", "") or SRC_BECK, "dose"))
        pct = pct_1rm(x["intensity"])
        if pct is not None and limits.max_pct_1rm is not None and pct >= limits.max_pct_1rm:
            held = limits.reasons_for("max_pct_1rm")
            out.append(_why(f"Load held at {limits.max_pct_1rm:g}% 1RM, the heaviest allowed for this person",
                            _join(*(r.source for r in held)) or "the screening's limit", "dose"))
    if x.get("load_kg") is not None:
        out.append(_why(f"Working load {x['load_kg']:g} kg from the logged sessions",
                        x.get("load_note") or "the session log", "dose"))
    if limits.carer_led:
        out.append(_why("Done with a clinician or the carer present", SRC_CARER_LED, "dose"))
    elif x["supervised"]:
        pct = pct_1rm(x["intensity"]) or 0
        what = (f"{pct:g}% 1RM is {SUPERVISED_FROM_PCT_1RM:g}% or more" if pct >= SUPERVISED_FROM_PCT_1RM
                else "high impact")
        out.append(_why(f"Supervised: {what}", SRC_SUPERVISED, "dose"))
    return out


def _ranges(weeks: list[int]) -> str:
    """Week numbers as ranges: [3, 4, 5, 9, 10, 11] -> "3-5 and 9-11"."""
    parts, start, prev = [], None, None
    for w in weeks:
        if start is None:
            start = prev = w
        elif w == prev + 1:
            prev = w
        else:
            parts.append(f"{start}-{prev}" if prev > start else str(start))
            start = prev = w
    if start is not None:
        parts.append(f"{start}-{prev}" if prev > start else str(start))
    return parts[0] if len(parts) == 1 else ", ".join(parts[:-1]) + " and " + parts[-1]


@lru_cache(maxsize=8192)
def week_why(first: int, last: int, how: str, weak: tuple[int, ...], hold_volume: bool) -> Why:
    """Why the exercise, at this dose, changes in week ``first`` and holds until week ``last``.

    ``how``: "start" (week 1), "step" (a new or larger stimulus that week), "change" (the next
    stage, no new stimulus) or "added" (the exercise joins the program); ``weak``: the weeks of
    the span that are weeks 3 to 5 after a step up.  One reason serves every week of the span,
    so a plan shares one model of the exercise across its weeks (and stays fast to build).
    """
    if hold_volume:
        return _why("Holds at the starting dose every week until a clinician records the clearance",
                    SRC_HOLD_VOLUME, "week")
    begin = {"start": "Starts in week 1",
             "step": f"Steps up in week {first}, once the 3 to 5 weeks after the step before had passed",
             "change": f"Next stage in week {first}",
             "added": f"Joins the program in week {first}"}[how]
    held = f"; held through week {last}" if last > first else ""
    if weak:
        which = f"week {weak[0]}" if len(weak) == 1 else f"weeks {_ranges(list(weak))}"
        held += f"; nothing rises in {which}, 3 to 5 weeks after a step up, while remodelling bone is briefly weaker"
    return _why(begin + held, SRC_REMODEL if how == "step" or weak else SRC_HOLD_AT_LEVEL if how != "start"
                else SRC_START, "week")


def with_why(base: PlannedExercise, whys: list) -> PlannedExercise:
    """``base`` with its reasons: a shallow copy sharing the validated fields (a plan is a value;
    the copy is what :meth:`pydantic.BaseModel.model_copy` makes, without its deep work)."""
    new = PlannedExercise.__new__(PlannedExercise)
    object.__setattr__(new, "__dict__", {**base.__dict__, "why": whys})
    object.__setattr__(new, "__pydantic_fields_set__", base.__pydantic_fields_set__ | {"why"})
    object.__setattr__(new, "__pydantic_extra__", base.__pydantic_extra__)
    object.__setattr__(new, "__pydantic_private__", base.__pydantic_private__)
    return new


class _Why:
    """The builder's weeks with ``why`` on every exercise (a mixin of the builder)."""

    def explain_weeks(self, weeks: list[dict]) -> dict[int, list[Why]]:
        """The reasons of every exercise dict of ``weeks``, by ``id`` of the dict (also kept as ``self.whys``).

        A dict of the builder stands for one dose of one exercise and is shared by the sessions
        and weeks that give that dose; its reasons are worked out once: why it was chosen, why
        this dose, and in which week it changed and through which weeks it holds.
        """
        views = {e.exercise_id: e for e in self.pool}
        spine_reason = next((r.reason for r in self.limits.reasons if r.limit == "spine_sparing"), "")
        spans: dict[int, list] = {}      # id(x) -> [[dicts giving this dose], first week dict, lists, how]
        latest: dict[str, list] = {}     # exercise id -> its latest span
        weak_weeks = [wk["week"] for wk in weeks if wk.get("weak_window")]
        list_last: dict[int, int] = {}   # id(list) -> the last week using it
        list_ids: dict[int, frozenset] = {}
        prev_lists: tuple = ()
        for week, lists in zip(weeks, self.week_lists):   # the week's impact, resistance, balance lists
            w = week["week"]
            for lst in lists:
                key = id(lst)
                if key in list_last:       # a list met before: its exercises are known
                    list_last[key] = w
                    continue
                list_last[key] = w
                list_ids[key] = frozenset(x["exercise_id"] for x in lst)
                for x in lst:
                    span = spans.get(id(x))
                    if span is None:
                        xid = x["exercise_id"]
                        before = latest.get(xid)
                        if (before is not None and before[0][-1] == x
                                and max(list_last[k] for k in before[2]) >= w - 1):
                            # The same dose as the weeks before (another stage of the program that
                            # leaves this exercise as it was): one span, one reason.
                            before[0].append(x)
                            before[2].append(key)
                            spans[id(x)] = before
                            continue
                        how = ("start" if w == 1 else
                               "added" if not any(xid in list_ids[p] for p in prev_lists) else
                               "step" if week.get("step_up") else "change")
                        spans[id(x)] = latest[xid] = [[x], week, [key], how]
                    else:
                        span[2].append(key)
            prev_lists = tuple(id(lst) for lst in lists)
        chosen: dict[str, tuple[Why, ...]] = {}
        lim = self.limits
        self.whys = whys = {}
        done: set[int] = set()
        for span in spans.values():
            if id(span) in done:
                continue
            done.add(id(span))
            xs, first, lists, how = span
            x = xs[0]
            last = max(list_last[k] for k in lists)
            xid = x["exercise_id"]
            if xid not in chosen:
                e = views.get(xid)
                chosen[xid] = () if e is None else _chosen(e, lim.max_impact_level, lim.spine_sparing, self.falls,
                                                           xid in self.prefer, spine_reason)
            f = first["week"]
            weak = (() if x.get("category") == "balance" else  # balance work is not bone loading
                    tuple(weak_weeks[bisect_left(weak_weeks, f):bisect_right(weak_weeks, last)]))
            reasons = [*chosen[xid], *dose_why(x, first, self.tpl, self.limits),
                       week_why(f, last, how, weak, self.hold_volume)]
            for one in xs:
                whys[id(one)] = reasons
        return whys


# ---------------------------------------------------------------------------------------
# Reading the reasons back: the command line (`prescribe why`), the clinician's pages and the app
# print these rows, so every reader says the same.
# ---------------------------------------------------------------------------------------

#: The limits in the order and words every reader prints them.
LIMIT_LABELS: dict[str, str] = {
    "max_impact_level": "Highest impact level allowed",
    "max_impacts_per_session": "Most impacts in one session",
    "max_pct_1rm": "Heaviest resistance load",
    "avoid": "Movements to avoid",
    "spine_sparing": "Spine-sparing exercise",
    "balance_first": "Balance work first, every week",
    "supervision": "Supervised sessions",
    "refer": "Clearance before loading",
    "carer_led": "Sessions led by a carer or clinician",
    "hold_volume": "Dose held at the start",
    "supervised_from_pct_1rm": "Always supervised",
}


def limit_rows(limits: PlanLimits) -> list[dict]:
    """The limits as rows {limit, label, value, reasons: [{reason, source}]}: the values in plain words."""
    rows = []
    for name, label in LIMIT_LABELS.items():
        value = getattr(limits, name)
        if name == "max_impact_level":
            text = f"{value} ({IMPACT_LEVEL_LABELS.get(value, value)})"
        elif name == "max_impacts_per_session":
            text = f"{value}"
        elif name == "max_pct_1rm":
            text = f"{value:g}% 1RM" if value is not None else "no limit beyond the program's phases"
        elif name == "avoid":
            text = ", ".join(p.replace("_", " ") for p in value) or "nothing flagged"
        elif name == "refer":
            text = ("required" + ("; recorded" if limits.cleared else "") if value or limits.cleared
                    else "not required by the rules")
        elif name == "supervised_from_pct_1rm":
            text = f"resistance work at {value:g}% 1RM or more, and high-impact work (level 3)"
        elif name == "supervision":
            text = ("every session (led by a carer or clinician)" if limits.carer_led else
                    "advised, at least at first" if value else
                    "not needed beyond the always-supervised work below")
        else:
            text = "yes" if value else "no"
        reasons = [{"reason": r.reason or r.rule, "source": r.source} for r in limits.reasons_for(name)]
        rows.append({"limit": name, "label": label, "value": text, "reasons": reasons})
    return rows


def exercise_dose(x) -> str:
    """The dose of a planned exercise in the clinician's plain words ("3 x 8 at 80% 1RM 42.5 kg",
    "20 min at RPE 3-4", "40 impacts in 2 bouts"): the clinician's pages, `prescribe why` and the
    FHIR CarePlan's activities print it."""
    parts = []
    if x.impacts:
        parts.append(f"{x.impacts} impacts" + (f" in {x.bouts} bouts" if x.bouts > 1 else ""))
    elif x.sets and x.reps:
        parts.append(f"{x.sets} x {x.reps}")
    elif x.reps:
        parts.append(f"{x.reps} reps")
    if x.minutes and not x.impacts:
        parts.append(f"{x.minutes:g} min")
    if x.intensity:
        parts.append(f"at {x.intensity}")
    if x.load_kg:
        parts.append(f"{x.load_kg:g} kg")
    return " ".join(parts) or "as in the guide"


def why_rows(plan, week: int | None = None) -> list[dict]:
    """Each planned exercise with its reasons: {week(s), name, exercise_id, dose, why: [{about, reason, source}]}.

    With ``week``, that week's exercises; without, each exercise at each dose once, with the
    weeks it is given in (the evidence a clinic lead reviews).
    """
    rows: list[dict] = []
    index: dict[tuple, dict] = {}
    for wk in plan.weeks:
        if week is not None and wk.week != week:
            continue
        for s in wk.sessions:
            for x in s.exercises:
                key = (x.exercise_id, exercise_dose(x), tuple((w.about, w.reason) for w in x.why))
                row = index.get(key)
                if row is None:
                    row = index[key] = {"weeks": [], "name": x.name, "exercise_id": x.exercise_id,
                                        "dose": exercise_dose(x), "supervised": x.supervised,
                                        "why": [{"about": w.about or "", "reason": w.reason, "source": w.source}
                                                for w in x.why]}
                    rows.append(row)
                if wk.week not in row["weeks"]:
                    row["weeks"].append(wk.week)
    for row in rows:
        row["weeks_text"] = _ranges(row["weeks"])
        row["weeks_label"] = ("Week " if len(row["weeks"]) == 1 else "Weeks ") + row["weeks_text"]
    return rows


_ABOUT = {"chosen": "Chosen because", "dose": "This dose because", "week": "This week", "": "Because"}


def why_text(plan, limits: PlanLimits, week: int | None = None) -> str:
    """``prescribe why``: the limits with their reasons, then each exercise with its reasons and sources."""
    out = [f"Why: the program for {plan.patient_id}"
           + (f", week {week} of {len(plan.weeks)}" if week is not None else f", {len(plan.weeks)} weeks"), ""]
    out.append("Limits")
    for row in limit_rows(limits):
        out.append(f"  {row['label']}: {row['value']}")
        for r in row["reasons"]:
            out.append(f"      because {r['reason']} [{r['source']}]")
    out.append("")
    out.append(f"Exercises of week {week}" if week is not None else "Exercises (each dose once, with its weeks)")
    for row in why_rows(plan, week):
        when = "" if week is not None else f"  ({row['weeks_label'].lower()})"
        out.append(f"  {row['name']}: {row['dose']}{' - supervised' if row['supervised'] else ''}{when}")
        if not row["why"]:
            out.append("      no reasons recorded (a plan made before reasons were kept: rebuild it to see them)")
        for w in row["why"]:
            out.append(f"      {_ABOUT.get(w['about'], 'Because')}: {w['reason']} [{w['source']}]")
    out.append("")
    out.append("Decision support only: these reasons support and do not replace clinical judgment; follow local "
               "guidelines and licensed practice.")
    return "\n".join(out) + "\n"


def why_by_exercise(plan) -> list[dict]:
    """The reasons grouped by exercise, for a printed page: {name, exercise_id, chosen: [why],
    doses: [{weeks_text, weeks_label, dose, supervised, why: [why of the dose and the week]}]}, in first-use order."""
    out: dict[str, dict] = {}
    for row in why_rows(plan):
        ex = out.get(row["exercise_id"])
        chosen = [w for w in row["why"] if w["about"] == "chosen"]
        if ex is None:
            ex = out[row["exercise_id"]] = {"name": row["name"], "exercise_id": row["exercise_id"],
                                            "chosen": chosen, "doses": []}
        else:
            ex["chosen"].extend(w for w in chosen if w not in ex["chosen"])
        ex["doses"].append({"weeks_text": row["weeks_text"], "weeks_label": row["weeks_label"], "dose": row["dose"],
                            "supervised": row["supervised"],
                            "why": [w for w in row["why"] if w["about"] != "chosen"]})
    return list(out.values())
