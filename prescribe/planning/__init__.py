"""The graded progression planner: a person's record and screening -> a weekly program.

The planner turns a :class:`~prescribe.records.PatientRecord` and its
:class:`~prescribe.records.ScreeningResult` into a :class:`~prescribe.plan_schema.Plan`:
week by week, impact, resistance and balance sessions, progressed the way bone
adapts.  The plan format is documented in ``docs/plan.md``.

The progression rules, each enforced here and checked by :func:`check_plan`:

1. Never above the screening's ``max_impact_level``; never an exercise whose
   movement patterns are in the screening's ``avoid`` list.
2. Impact work starts at or below the person's tolerance and steps up one impact
   level at a time, only after the current level has been held at full volume
   (common practice).
3. The weak window: counting a step-up week as week 1, weeks 3, 4 and 5 carry no
   higher impact level and no more impacts a session than week 2 (resorption
   precedes formation after a new stimulus: Eriksen 1986, Endocr Rev 7:379;
   Heaney, Yates & Santora 1997, J Bone Miner Res 12:1143).  The first week of
   the program counts as a step-up from no impact training.
4. Impacts a session build toward 50-100 and stay at or below 100 unless a
   template says otherwise with a reason; more than 50 in a day are split into
   bouts at least 4 h apart (Robling, Burr & Turner 2001, J Exp Biol
   204:3389-3399: about 8 h restores mechanosensitivity).
5. From moderate impact (level 2) on, each week's impact work loads the skeleton
   in at least two directions (Turner 1998, Bone 23:399-407: unusual strain
   distributions are more osteogenic).
6. Resistance work begins with a technique phase and, where screening allows,
   progresses toward 5 x 5 at 80-85% 1RM (Watson et al. 2018, J Bone Miner Res
   33:211-220; Beck et al. 2017, J Sci Med Sport 20(5):438-445), each barbell
   lift practised at a light load for 4 weeks before it is loaded; after a
   vertebral fracture or with high vertebral risk it keeps spine-sparing
   variants (Giangregorio et al. 2014, Osteoporos Int 25:821-835) dosed by
   effort and progressed toward 8-12RM (Brooke-Wavell et al. 2022); a frail
   person does sit-to-stand before any loaded squat (common practice).  A
   week's % 1RM is the highest its exercises are given.
7. Balance work at least twice a week, first and more when falls risk is flagged
   (Giangregorio et al. 2014).

Session counts default to 3 impact, 3 balance and 2 resistance sessions a week
(Kohrt et al. 2004, Med Sci Sports Exerc 36:1985-1996; Beck et al. 2017).

This is decision support: every plan carries the standard cautions and must be
reviewed by a licensed clinician.

The package, one concern a module:

- :mod:`.options`: the options the clinician fixes (:class:`PlanOptions`), their bounds and defaults;
- :mod:`.templates`: program templates in one place: :mod:`.templates.document` the planner's rules table as
  template documents (``data/templates/*.toml``) with sources, :mod:`.templates.review` the reference panel,
  template checks and comparison;
- :mod:`.sources`: the sources a plan cites and the planner's fixed numbers;
- :mod:`.selection`: which exercises (impact in two directions, resistance chains, balance);
- :mod:`.progression`: week by week (impact levels and volumes, resistance phases, weeks 3-5);
- :mod:`.dosing`: what each exercise of a session is given, and the session's osteogenic index;
- :mod:`.layout`: the days of a week and what each session holds;
- :mod:`.builder`: :func:`build_plan` (the builder joining the above) and the thin :func:`check_plan`;
- :mod:`.editing`: swaps (:func:`replace_exercise`) and the options and swaps a plan was made with;
- :mod:`prescribe.safety` (its own package): the one safety check of every program, its rules one function each.

The public names below are importable from ``prescribe.planning``; each is loaded from
its module when first used, so the options and the rules table can be read (forms, the
command line's help) without loading the planner.  The package never imports pandas
(tables of a plan are in :mod:`prescribe.tables`).
"""

from __future__ import annotations

import importlib

#: public name -> the module of this package that defines it
_PUBLIC: dict[str, str] = {
    "PlanOptions": "options", "option_range": "options", "OPTION_RANGES": "options", "OPTION_DEFAULTS": "options",
    "build_plan": "builder", "check_plan": "builder", "IMPACT_LABELS": "builder",
    "replace_exercise": "editing", "fixed_options": "editing", "plan_swaps": "editing",
    "prescribed_pct_1rm": "dosing", "reassessment_weeks": "progression", "LIFT_PRACTICE_WEEKS": "sources",
}

__all__ = sorted(_PUBLIC)


def __getattr__(name: str):
    module = _PUBLIC.get(name)
    if module is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(importlib.import_module(f"{__name__}.{module}"), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted({*globals(), *_PUBLIC})
