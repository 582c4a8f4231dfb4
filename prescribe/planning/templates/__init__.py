"""Program templates in one place: the numbers a progression is built from, as documents with
sources (``prescribe/data/templates/*.toml`` shipped; clinic versions in the store).

- :mod:`.document`: the template document: its fields, bounds and sources, read and checked
  (:func:`load_template`, :func:`parse_template`, :func:`template_problems`); the planner reads it.
- :mod:`.review`: reviewing a template before a clinic uses it: the reference panel of invented
  people, the figures a reviewer compares, two templates side by side, a document as TOML.
  It builds plans, so it stands above the planner: import it as ``prescribe.planning.templates.review``.

The clinic's versioned library (drafts, approval, NAME@VERSION) composes these with the store:
:mod:`prescribe.clinic.template_library`.  The names below are the document's.
"""

from .document import (BOUT_GAP_BOUNDS, BOUT_SPLIT_MAX, CERTAINTY_LEVELS, IMPACTS_CEILING, PHASE_BOUNDS,
                       TEMPLATE_DIR, ResistancePhase, Template, TemplateError, TemplateField, load_template,
                       parse_template, template_fields, template_names, template_problems)

__all__ = ["BOUT_GAP_BOUNDS", "BOUT_SPLIT_MAX", "CERTAINTY_LEVELS", "IMPACTS_CEILING", "PHASE_BOUNDS",
           "TEMPLATE_DIR", "ResistancePhase", "Template", "TemplateError", "TemplateField", "load_template",
           "parse_template", "template_fields", "template_names", "template_problems"]
