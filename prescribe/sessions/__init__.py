"""The living program: session records, the next-step rules and their engine.

Domain code over the typed plan: no widgets, no store, no handout.  ``records`` holds the
session record (what ``prescribe session add`` reads) and a stored session; ``rules`` the
decision rules read from ``prescribe/data/rules/sessions.toml``; ``evaluate`` which of them
fire; ``lifts`` the estimated 1RM of each lift and the next loads (the formulas are
:mod:`prescribe.loading.one_rep_max`); ``adjusted`` the adjusted program; ``engine`` the
decision (:func:`~prescribe.sessions.engine.assess`); ``pause`` a pause and its lifting;
``progress`` planned against done, week by week.
"""
