"""The sources a plan cites and the planner's fixed numbers, each with its source.

Only the sources a program actually uses go into its ``sources`` list (the builder
decides which); the numbers are the planner's own choices where a template does not
set them.
"""

from __future__ import annotations

from ..loading.dose import BOUT_GAP_MIN_H as MIN_BOUT_GAP_H

# --- sources the plan cites (only those actually used go into plan.sources) --------------
SRC_KOHRT = "Kohrt et al. 2004, Med Sci Sports Exerc 36:1985-1996 (ACSM position stand: weight-bearing 3-5 and resistance 2-3 times a week)"
SRC_BECK = "Beck, Daly, Fiatarone Singh & Taaffe 2017, J Sci Med Sport 20(5):438-445 (ESSA position statement: impact plus progressive resistance training; loaded spine flexion not recommended)"
SRC_WATSON = "Watson et al. 2018, J Bone Miner Res 33:211-220 (LIFTMOR: 5 x 5 at 80-85% 1RM after a technique phase)"
SRC_GIANG = "Giangregorio et al. 2014, Osteoporos Int 25:821-835 (spine-sparing technique after vertebral fracture; balance training; 8-12 repetitions)"
SRC_ROBLING = "Robling, Burr & Turner 2001, J Exp Biol 204:3389-3399 (about 8 h of recovery restores mechanosensitivity; rest between loading cycles)"
SRC_REMODEL = "Eriksen 1986, Endocr Rev 7:379 (resorption about 3 weeks precedes formation) and Heaney, Yates & Santora 1997, J Bone Miner Res 12:1143 (remodelling transient): no escalation in weeks 3-5 after a step-up"
SRC_TURNER_OI = "Turner & Robling 2003, Exerc Sport Sci Rev 31(1):45-50 (osteogenic index = peak GRF x ln(cycles + 1))"
SRC_TURNER_DIR = "Turner 1998, Bone 23:399-407 (bone responds to dynamic, unusual loading: at least two loading directions)"
SRC_BROOKE = "Brooke-Wavell et al. 2022, Br J Sports Med 56:837-846 (strength 2-3 days a week; moderate impact; after vertebral fracture impact no more than brisk walking)"
SRC_CADENCE = "Walking cadence of about 100 steps a minute, used to count loading cycles of minutes-based work (from memory)"

#: Loading cycles a minute of walking-type work (from memory; see SRC_CADENCE).
STEPS_PER_MINUTE = 100.0
#: Impacts a set of impact work, and the rest between sets [s] (common practice,
#: informed by Robling, Burr & Turner 2001: rest between cycles adds to the response).
IMPACTS_PER_SET = 10
IMPACT_REST_S = 15
#: Weeks of the balance-first phase when falls risk is flagged: no step-up above
#: low impact before it ends (Giangregorio et al. 2014; length common practice).
BALANCE_FIRST_WEEKS = 4
#: Weeks between balance-difficulty steps (common practice); longer with falls risk.
BALANCE_STAGE_WEEKS = 6
BALANCE_STAGE_WEEKS_FALLS = 8
#: Weeks a due resistance phase may wait for a close impact step-up, so both share one
#: remodelling window (common practice).
PHASE_WAIT_WEEKS = 3
#: Resistance exercises a session drawn from progression chains, plus one back extensor.
RESISTANCE_CHAINS_MAX = 5
#: From this %1RM on, a chain's main barbell lift (``loaded_by_1rm``) is loaded by % 1RM.
LIFT_LOAD_FROM_PCT = 70.0
#: Weeks of light practice of a barbell lift before it is loaded at LIFT_LOAD_FROM_PCT or more,
#: and so always before 80% 1RM or more: the LIFTMOR program began with about a month of
#: technique work on the same lifts (Watson et al. 2018, J Bone Miner Res 33:211-220; the month
#: is from memory).  The practice dose (3 x 8 at 50% 1RM, a light load) is common practice.
LIFT_PRACTICE_WEEKS = 4
LIFT_PRACTICE_SETS, LIFT_PRACTICE_REPS, LIFT_PRACTICE_PCT = 3, 8, 50.0
#: A frail person (30-s chair stand below the norm for age and sex, Rikli & Jones 1999) does
#: body-weight sit-to-stand (and the other chains' unloaded forms) in the technique phase and
#: at least the first weeks, before any loaded squat (common practice).
FRAIL_BODYWEIGHT_WEEKS = 4
#: Load progression in effort-based phases: add 2-10% when the target is beaten (ACSM 2009,
#: Med Sci Sports Exerc 41:687-708); "two sessions running" is common practice.
SRC_ACSM_PROGRESSION = ("American College of Sports Medicine 2009, Progression models in resistance training "
                        "for healthy adults, Med Sci Sports Exerc 41(3):687-708 (add 2-10% load when the "
                        "person does 1-2 repetitions beyond the target)")
#: Patterns the planner never chooses for resistance work, whatever the screening says:
#: loaded spine flexion is not recommended (Beck et al. 2017); twisting under load
#: likewise (Giangregorio et al. 2014).
NEVER_IN_RESISTANCE = frozenset({"loaded_spinal_flexion", "loaded_spinal_twisting"})

#: A carer-led or supervised program for a person who cannot follow a written home program
#: alone (moderate or severe cognitive impairment, or living alone with falls risk): at most
#: this many days a week with sessions and exercises a session (common practice: a short,
#: routine program a carer can lead; Montero-Odasso et al. 2022, Age Ageing 51:afac205, from memory).
CARER_LED_MAX_DAYS = 3
CARER_LED_MAX_EXERCISES = 4
SRC_CARER_LED = ("Montero-Odasso et al. 2022, World guidelines for falls prevention and management for older "
                 "adults, Age Ageing 51:afac205 (supervised, tailored exercise with cognitive impairment; from "
                 "memory); a short carer-led program of at most 3 days and 4 exercises a session: common practice")

#: Narrow-base stance (heel-to-toe or one leg): where the person could not hold the tandem stance
#: test for its full time, balance work starts below it and moves to it only after the first review
#: (CDC STEADI 4-stage balance test: tandem stance held under 10 s means increased falls risk;
#: starting within what was measured is common practice).
NARROW_STANCE_PATTERN = "narrow_base_stance"
SRC_BALANCE_MEASURED = ("CDC STEADI 4-stage balance test (tandem stance held under 10 s: increased falls risk); "
                        "balance tasks start within what the person held: common practice")

#: Why a program holds its starting dose (screening ``hold_volume``) until a clinician records the clearance.
SRC_HOLD_VOLUME = ("Mountjoy et al. 2018, Br J Sports Med 52:687-697 (low energy availability and bone; from "
                   "memory); no rise in volume before medical and dietetic review: common practice")
