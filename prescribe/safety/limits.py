"""The limits a program is held to, worked out by one function: :func:`derive_limits`.

The planner builds to them, every door works them out again from the plan's record
(:func:`limits_of_plan`), the check holds the program to them (:func:`limits_for`), and the
handout, the app, the advice and the exports print them (``plan.limits``) and no other copy.
Each limit carries its reasons: the screening rule (or the template, or the planner's own
rule) that set it, with its source.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import Iterable

from ..intensity import SUPERVISED_FROM_PCT_1RM
from ..languages import N_
from ..plan_schema import LimitReason, Plan, PlanLimits
from ..records import PatientRecord, ScreeningResult
from .model import IMPACTS_CEILING, Limits

SPINAL_PATTERNS = frozenset({"loaded_spinal_flexion", "loaded_spinal_twisting"})
#: Operations on the spine (``surgeries[].procedure``) after which strength work is spine-sparing.
SPINAL_PROCEDURES = frozenset({"spinal_fusion", "vertebroplasty"})

SRC_SPINE_SPARING = ("Giangregorio et al. 2014, Osteoporos Int 25:821-835 (Too Fit To Fracture: spine-sparing "
                     "exercise after vertebral fracture or at high vertebral fracture risk)")
SRC_SCALE = "common practice: the top of the impact scale (level 3) where no rule or template lowers it"
SRC_CEILING = ("Clissold et al. 2022 (programs of 10-100 jumps a day; citation not confirmed, treat as common "
               "practice); Jämsä et al. 2011, Front Physiol 2:73 (about 60 impacts a day above 4 g)")
SRC_SUPERVISED = ("Watson et al. 2018, J Bone Miner Res 33:211-220 (LIFTMOR: 80-85% 1RM lifts supervised); "
                  "supervision of high-impact work is common practice")
SRC_SPINAL_SURGERY = ("common practice: after spinal surgery, spine-sparing loading until the surgeon's advice "
                      "says otherwise")


@dataclass(frozen=True)
class TemplateCaps:
    """What a template itself caps: its impact level, impacts a session and spine sparing."""

    name: str | None = None
    max_level: int = 3
    max_impacts_per_session: int | None = None
    max_impacts_reason: str = ""
    spine_sparing: bool = False
    level_source: str = "the template's own cap"
    impacts_source: str = "the template's own ceiling"
    spine_source: str = SRC_SPINE_SPARING

    @classmethod
    def of(cls, tpl) -> "TemplateCaps":
        """The caps of a :class:`~prescribe.planning.templates.Template`."""
        src = tpl.sources
        return cls(name=tpl.name, max_level=int(tpl.impact["max_level"]),
                   max_impacts_per_session=int(tpl.impact["max_impacts_per_session"]),
                   max_impacts_reason=tpl.max_impacts_reason or "", spine_sparing=bool(tpl.spine_sparing),
                   level_source=src.get("max_level", "the template's own cap"),
                   impacts_source=src.get("max_impacts_per_session", "the template's own ceiling"),
                   spine_source=src.get("spine_sparing", SRC_SPINE_SPARING))

    @classmethod
    def of_plan(cls, plan: Plan) -> "TemplateCaps":
        """The caps of the template a plan names: a shipped template is read from its file (a hand
        edit of the plan cannot raise them); otherwise the plan's own record of them."""
        tpl = plan.template
        if tpl is not None and (tpl.origin or "shipped") == "shipped":
            shipped = _shipped(tpl.name)
            if shipped is not None:
                return shipped
        stated = plan.limits.template_max_level if plan.limits is not None else None
        level = stated if stated is not None else plan.max_impact_level
        return cls(name=tpl.name if tpl is not None else None,
                   max_level=3 if level is None or level < 0 else min(int(level), 3),
                   max_impacts_per_session=plan.max_impacts_per_session,
                   max_impacts_reason=plan.max_impacts_reason or "",
                   spine_sparing=plan.spine_sparing is True and plan.limits is None)


@lru_cache(maxsize=64)
def _shipped(name: str) -> TemplateCaps | None:
    from ..planning.templates import load_template, template_names
    if name not in template_names():
        return None
    return TemplateCaps.of(load_template(name))


@lru_cache(maxsize=1)
def _rule_effects() -> dict:
    """Each screening rule's effect, by id (what a flag sets, to say which limit it explains)."""
    from ..screening import default_engine
    return {r.id: r.effect for r in default_engine().ruleset.rules}


def _effect(flag, cleared: bool):
    eff = _rule_effects().get(flag.rule)
    if eff is not None and (cleared or flag.lifted_by_clearance):
        eff = eff.once_cleared()
    return eff


#: Why a program is spine-sparing when the screening asks to avoid loaded spinal movements.
_AVOID_SPINAL = {
    ("loaded_spinal_flexion",): N_("the screening asks to avoid loaded spinal flexion"),
    ("loaded_spinal_twisting",): N_("the screening asks to avoid loaded spinal twisting"),
    ("loaded_spinal_flexion", "loaded_spinal_twisting"):
        N_("the screening asks to avoid loaded spinal flexion and loaded spinal twisting"),
}


def spine_sparing_reason(records: Iterable[PatientRecord], screening: ScreeningResult,
                         caps: TemplateCaps) -> tuple[str, str] | None:
    """Why the program is spine-sparing throughout, with its source; None when it is not.

    The one place the decision is made: the planner chooses spine-sparing variants and phases
    from it, the safety check holds strength work to spine-sparing loads from it.
    """
    # The reasons reach the person's pages inside the spine-sparing caution: marked for translation.
    if caps.spine_sparing:
        return N_("the %(name)s template is spine-sparing") % {"name": caps.name}, caps.spine_source
    for record in records:
        if any(f.site == "vertebra" for f in record.fractures):
            return N_("a vertebral fracture is on record"), SRC_SPINE_SPARING
        if sum(1 for f in record.fractures if f.low_trauma) >= 2:
            return N_("two or more fragility fractures (high vertebral fracture risk)"), SRC_SPINE_SPARING
        if "thoracic_kyphosis" in record.conditions:
            return N_("marked thoracic kyphosis"), SRC_SPINE_SPARING
        if any(s.procedure in SPINAL_PROCEDURES for s in getattr(record, "surgeries", None) or ()):
            return N_("spinal surgery on record"), SRC_SPINAL_SURGERY
    if screening.bone_density_category == "severe_osteoporosis":
        return N_("severe osteoporosis"), SRC_SPINE_SPARING
    spinal = tuple(sorted(SPINAL_PATTERNS & set(screening.avoid)))
    if spinal:
        return _AVOID_SPINAL[spinal], SRC_SPINE_SPARING
    return None


def derive_limits(record: PatientRecord | None, template=None, *, cleared: bool = False,
                  screenings: Iterable[ScreeningResult | None] = (),
                  records: Iterable[PatientRecord | None] = (), screened: bool = False) -> PlanLimits:
    """The limits of a program for ``record``: the one derivation (PRODUCT.md "One derivation").

    Parameters
    ----------
    record : PatientRecord or None
        The plan's record, screened again with the current rules (``cleared``: with the
        clearance recorded, what waited for it lifted).
    template : Template or TemplateCaps, optional
        The template whose own caps apply (impact level, impacts a session, spine sparing).
    screenings : screenings to hold the limits to besides the record's (the plan's embedded
        one, one given by a caller): the strictest applies.  With a clearance and a record to
        screen, a screening made before the clearance is left out (it is superseded).
    records : further records of the same person (the store's copy), screened likewise.
    screened : the ``screenings`` already hold the records' own screening with the current rules
        (the planner's, made a moment before): the records are read, not screened again.
    """
    people = [r for r in (record, *records) if r is not None]
    found = [] if screened and screenings else [rescreen(r, cleared) for r in people]
    for scr in screenings:
        if scr is not None and not (cleared and people and not scr.cleared):
            found.append(scr)
    if not found:
        raise ValueError("derive_limits needs a record or a screening")
    scr = strictest_screening(*found) if len(found) > 1 else found[0]
    caps = template if isinstance(template, TemplateCaps) or template is None else TemplateCaps.of(template)
    caps = caps or TemplateCaps()
    reasons: list[LimitReason] = []

    def why(limit: str, value, rule: str, source: str, reason: str = "") -> None:
        reasons.append(LimitReason(limit=limit, value=value, rule=rule, source=source, reason=reason))

    def flag_why(limit: str, value, fl) -> None:
        why(limit, value, fl.rule, fl.source, fl.title or fl.message)

    effects = [(fl, _effect(fl, cleared)) for fl in scr.flags]
    # The impact level: the screening's cap and the template's own, the lower applies.
    level = min(int(scr.max_impact_level), caps.max_level)
    for fl, eff in effects:
        cap = eff.max_impact_level if eff is not None else fl.max_impact_level
        if cap is not None and cap == level:
            flag_why("max_impact_level", cap, fl)
    if caps.max_level == level and caps.name is not None and caps.max_level < 3:
        why("max_impact_level", caps.max_level, f"template:{caps.name}", caps.level_source,
            f"the {caps.name} template goes no higher")
    if not any(r.limit == "max_impact_level" for r in reasons):
        why("max_impact_level", level, "scale", SRC_SCALE if level == 3 else "the screening's cap (docs/rules.md)",
            "no rule or template lowers it" if level == 3 else "the screening's cap")
    # Impacts a session: the template's ceiling, never above 100 unless the template says why.
    per = caps.max_impacts_per_session
    if per is None or per < 0:
        per = IMPACTS_CEILING
        why("max_impacts_per_session", per, "ceiling", SRC_CEILING, "the usual ceiling of impacts a session")
    elif per > IMPACTS_CEILING and not caps.max_impacts_reason:
        per = IMPACTS_CEILING
        why("max_impacts_per_session", per, "ceiling", SRC_CEILING, "the usual ceiling of impacts a session")
    else:
        why("max_impacts_per_session", per, f"template:{caps.name}" if caps.name else "plan",
            caps.max_impacts_reason or caps.impacts_source,
            f"the {caps.name} template's ceiling" if caps.name else "the plan's ceiling")
    for pattern in sorted(scr.avoid):
        for fl, eff in effects:
            if pattern in (eff.avoid if eff is not None else fl.avoid):
                flag_why("avoid", pattern, fl)
    if scr.max_pct_1rm is not None:
        for fl, eff in effects:
            if eff is not None and eff.max_pct_1rm == scr.max_pct_1rm:
                flag_why("max_pct_1rm", scr.max_pct_1rm, fl)
    for limit, attr in (("balance_first", "falls_risk"), ("balance_first", "balance_first"),
                        ("supervision", "supervision"), ("refer", "refer"), ("carer_led", "carer_led"),
                        ("carer_led", "supervision"), ("hold_volume", "hold_volume")):
        if limit == "carer_led" and attr == "supervision":
            continue
        if getattr(scr, attr):
            for fl, eff in effects:
                if eff is not None and getattr(eff, attr):
                    flag_why(limit, True, fl)
    spine = spine_sparing_reason(people, scr, caps)
    if spine is not None:
        why("spine_sparing", True, "spine_sparing", spine[1], spine[0])
    supervision = bool(scr.supervision or scr.carer_led)
    if scr.carer_led and not scr.supervision:
        for fl, eff in effects:
            if eff is not None and eff.carer_led:
                flag_why("supervision", True, fl)
    why("supervised_from_pct_1rm", SUPERVISED_FROM_PCT_1RM, "supervision", SRC_SUPERVISED,
        f"heavy lifts ({SUPERVISED_FROM_PCT_1RM:g}% 1RM or more) and high-impact work are supervised")
    return PlanLimits(
        max_impact_level=level, max_impacts_per_session=per, max_pct_1rm=scr.max_pct_1rm,
        avoid=sorted(scr.avoid), spine_sparing=spine is not None,
        balance_first=bool(scr.falls_risk or scr.balance_first), supervision=supervision,
        refer=bool(scr.refer), carer_led=bool(scr.carer_led), hold_volume=bool(scr.hold_volume),
        cleared=bool(cleared), supervised_from_pct_1rm=SUPERVISED_FROM_PCT_1RM, supervised_from_impact_level=3,
        template=caps.name, template_max_level=caps.max_level if caps.name is not None else None,
        reasons=reasons)


def limits_of_plan(plan: Plan, screening: ScreeningResult | None = None, *,
                   record: PatientRecord | None = None) -> PlanLimits:
    """The plan's limits worked out again from its record (and the caller's copy of the person),
    its embedded screening, a screening given, and its template's own caps."""
    cleared = bool(plan.cleared_by and plan.cleared_at)
    return derive_limits(plan.record, TemplateCaps.of_plan(plan), cleared=cleared,
                         screenings=(screening, plan.screening), records=(record,))


def plan_limits(plan: Plan) -> PlanLimits:
    """The limits every reader prints for ``plan``: its own (the doors refuse a plan whose limits
    differ from its record's, rule ``limits_match``), or, for a plan file made before plans carried
    them, worked out again the same way."""
    return plan.limits if plan.limits is not None else limits_of_plan(plan)


def limits_for(plan: Plan, screening: ScreeningResult | None = None, *,
               record: PatientRecord | None = None) -> Limits:
    """The limits the safety check holds ``plan`` to: :func:`limits_of_plan` as the rules read them."""
    pl = limits_of_plan(plan, screening, record=record)
    origins = tuple(name for name, present in (("screening given", screening is not None),
                                               ("plan.screening", True),
                                               ("re-screened plan.record", plan.record is not None),
                                               ("re-screened record", record is not None)) if present)
    return Limits(cap=pl.max_impact_level, avoid=frozenset(pl.avoid), falls_risk=pl.balance_first,
                  refer=pl.refer, supervision=pl.supervision, spine_sparing=pl.spine_sparing,
                  max_impacts=pl.max_impacts_per_session, max_pct_1rm=pl.max_pct_1rm, carer_led=pl.carer_led,
                  hold_volume=pl.hold_volume, origins=origins, derived=pl)


_CATEGORY_ORDER = ("unknown", "normal", "within_expected_range_for_age", "osteopenia",
                   "below_expected_range_for_age", "osteoporosis", "severe_osteoporosis")


def strictest_screening(*screenings: ScreeningResult) -> ScreeningResult:
    """One screening holding the strictest of each: lowest cap, every pattern to avoid, falls
    risk, refer, supervision and balance-first if any says so, the most severe density
    category, every flag and caution (first seen first).  The first screening's identity
    (patient_id, rule-set version) is kept."""
    first = screenings[0]
    if len(screenings) == 1:
        return first
    flags, seen_rules, cautions = [], set(), []
    for scr in screenings:
        for fl in scr.flags:
            if fl.rule not in seen_rules:
                seen_rules.add(fl.rule)
                flags.append(fl)
        for c in scr.cautions:
            if c not in cautions:
                cautions.append(c)
    known = [s.bone_density_category for s in screenings if s.bone_density_category != "unknown"]
    category = max(known, key=_CATEGORY_ORDER.index) if known else first.bone_density_category
    avoid: list[str] = []
    for scr in screenings:
        avoid.extend(p for p in scr.avoid if p not in avoid)
    pcts = [s.max_pct_1rm for s in screenings if s.max_pct_1rm is not None]
    return first.model_copy(update={
        "bone_density_category": category,
        "falls_risk": any(s.falls_risk for s in screenings),
        "max_impact_level": min(s.max_impact_level for s in screenings),
        "avoid": avoid,
        "refer": any(s.refer for s in screenings),
        "flags": flags,
        "cautions": cautions,
        "balance_first": any(s.balance_first for s in screenings),
        "supervision": any(s.supervision for s in screenings),
        "max_pct_1rm": min(pcts) if pcts else None,
        "carer_led": any(s.carer_led for s in screenings),
        "hold_volume": any(s.hold_volume for s in screenings),
        "person_notes": list(dict.fromkeys(n for s in screenings for n in s.person_notes)),
        "cleared": all(s.cleared for s in screenings),
    })


def rescreen(record: PatientRecord, cleared: bool = False) -> ScreeningResult:
    """The record screened with the current rules (remembered: a plan is checked at many doors);
    ``cleared``: with a recorded clearance (what waited for it lifted)."""
    return _rescreen_json(record.model_dump_json(), cleared)


@lru_cache(maxsize=256)
def _rescreen_json(text: str, cleared: bool = False) -> ScreeningResult:
    from ..records import PatientRecord as _Record
    from ..screening import screen
    return screen(_Record.model_validate_json(text), cleared=cleared)
