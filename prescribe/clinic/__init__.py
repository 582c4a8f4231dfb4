"""The modules that compose the domain with the store: the clinic's template library
(:mod:`.template_library`: shipped and clinic templates, NAME@VERSION) and the caseload
(:mod:`.caseload`: the stored people as a batch file, and what a rule or template change
would do to them), the session advice and its applied new version (:mod:`.advice`) and the
reassessment (:mod:`.reassess`).

They sit above the domain (they read and write the store) and below the app and the
command line; the domain never imports them.
"""
