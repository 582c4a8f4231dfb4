"""The cautions every output carries: plans, screenings, handouts and the app."""

from __future__ import annotations

from .languages import N_

#: Shown on every screen, plan and handout (common practice for exercise prescription;
#: wording ours).
STANDARD_CAUTIONS: tuple[str, ...] = (
    N_("This tool supports and does not replace clinical judgment: a licensed clinician "
       "must review every screening result and program before it is used."),
    N_("Stop exercising and seek advice on new or worsening pain, chest pain or tightness, "
       "unusual breathlessness, dizziness or feeling faint, or after a fall."),
    N_("Follow your local clinical guidelines and the scope of your licensed practice; "
       "where they differ from this tool, they take precedence."),
)

#: One line for page footers.
SHORT_CAUTION = ("Decision support only: review by a licensed clinician is required. "
                 "Stop and seek advice on new or worsening pain, chest pain, dizziness or a fall.")


#: The page footer of the person's pages: the same caution in plain words (wording ours).
PERSON_SHORT_CAUTION = N_("Your clinician must check this plan before you start. Stop and get advice "
                          "if you have new or worse pain, chest pain, dizziness or a fall.")


def with_standard(extra: list[str] | tuple[str, ...] = ()) -> list[str]:
    """The standard cautions followed by ``extra`` ones, without duplicates, order kept."""
    out: list[str] = []
    for text in (*STANDARD_CAUTIONS, *extra):
        if text and text not in out:
            out.append(text)
    return out
