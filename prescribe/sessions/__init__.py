"""The living program: session records, the next-step rules and their engine.

Domain code: no widgets, no store, no handout.  ``records`` holds the session record
(what ``prescribe session add`` reads), ``loads`` the one-repetition-maximum estimates,
``rules`` the decision rules read from ``prescribe/data/rules/sessions.toml`` and
``engine`` the decision and the adjusted program.
"""
