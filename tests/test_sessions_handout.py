"""The handout of an adjusted program says the working load beside the %1RM, from the
estimated 1RM of the logged sets (Brzycki 1993, J Phys Educ Recreat Dance 64(1):88-90:
30 kg x 9 reps -> 30 x 36 / 28 = 38.6 kg; 50% of it is 19.3, about 19.5 kg in 0.5 kg steps),
and a paused program says so on the page.  Invented people."""

from __future__ import annotations

from prescribe.handout import render_html
from prescribe.sessions.engine import assess
from session_support import day_of, full_weeks, logged, program


def test_the_handout_says_about_how_many_kg_beside_the_pct_1rm():
    plan = program()
    sessions = full_weeks([6], plan)
    sessions[1] = logged(6, 1, sid=2, exercises=[{"exercise_id": "back_squat", "load_kg": 30.0, "reps_done": 9}])
    advice = assess(plan, sessions, today=day_of(7), program_version=1)
    assert advice.estimated_1rm["back_squat"]["kg"] == 38.6
    html = render_html(advice.program)
    # The person's pages say the load in words and in kilograms (50% of the estimated 1RM).
    assert "about 19.5 kg" in html


def test_a_paused_program_says_so_in_the_handout():
    plan = program()
    sessions = full_weeks([6], plan)
    sessions[-1] = logged(6, 5, sid=9, fell_since_last=True)
    advice = assess(plan, sessions, today=day_of(7), program_version=1)
    html = render_html(advice.program)
    assert "Paused from week 7: do not continue this program until a clinician has assessed the person." in html
