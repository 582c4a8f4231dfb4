"""Section 1's form (the person's baseline, from the record's own field metadata) and
section 2's view of the screening (the glance table and every flag with its source)."""

from __future__ import annotations

import re
from typing import Any

import ipywidgets as w

from ..records import SEVERITIES
from . import form_spec
from .common import ErrorArea, WidgetKit, esc, own_layout
from .session import IMPACT_LABELS
from .wording import field_words, plain


#: The form's groups, in order: (heading or None, the keys of the boxes it shows).  A box of
#: :func:`form_spec.intake_fields` in no group is shown at the end, never dropped.
GROUPS: tuple[tuple[str | None, tuple[str, ...]], ...] = (
    (None, ("patient_id", "display_name", "age_years", "sex", "menopause", "body_mass_kg", "height_cm")),
    ("Bone density (DXA): T-score and Z-score by site", ("t_scores.*", "z_scores.*")),
    ("Falls, balance and pain", ("falls_past_year", "timed_up_and_go_s", "chair_stand_30s", "tandem_stance_s",
                                 "pain_score")),
)
LIVING = ("cognition", "lives_alone", "has_carer")

#: What each list of rows is called on the form and on its Add button.
ROW_WORDS: dict[str, tuple[str, str, str]] = {   # list -> (heading, add button, css stem)
    "medications": ("Medicines", "Add a medicine", "medication"),
    "surgeries": ("Operations", "Add an operation", "surgery"),
    "fractures": ("Fractures", "Add a fracture", "fracture"),
}


class IntakeForm:
    """The person's details, generated from the record's own field metadata."""

    def __init__(self, errors: ErrorArea) -> None:
        self.errors = errors
        self.kit = WidgetKit()
        self.inputs: dict[str, w.Widget] = {}
        self.messages: dict[str, w.HTML] = {}
        self.row_boxes: dict[str, w.Widget] = {}
        self.kept_record_version: int | None = None
        specs = {spec.key: spec for spec in form_spec.intake_fields()}
        for key, spec in specs.items():
            self.row_boxes[key] = self._row(spec, "230px" if key.startswith("z_scores.") else "300px")
        # Menopause: shown (and used) for women only.
        self._women_only = [own_layout(self.row_boxes[k]) for k in form_spec.WOMEN_ONLY]
        for box in self._women_only:
            box.layout = w.Layout(display="none", align_items="center")
        self.inputs["sex"].observe(lambda _ch: self._show_for_sex(), names="value")
        self.gluco_taken = self.kit.make(w.Checkbox, value=False, indent=False,
                                         description="Takes oral glucocorticoids")
        self.gluco_taken.add_class("pr-intake-glucocorticoids")
        placed: set[str] = set()

        def take(pattern: str) -> list[str]:
            keys = [k for k in specs if k == pattern or (pattern.endswith(".*") and k.startswith(pattern[:-1]))]
            placed.update(keys)
            return keys

        parts: list[w.Widget] = [w.HTML(
            "<p><b>The person's baseline at this first visit.</b> These details are the record the "
            "screening reads; today's pain, effort and symptoms during a session go in the live-session "
            "panel (section 6), never here. Every box is checked against the record's limits when you "
            "press <b>Check and screen</b>. Numbers are typed, never clipped. * = required.</p>")]
        for heading, patterns in GROUPS:
            if heading:
                parts.append(w.HTML(f"<b>{esc(heading)}</b>"))
            if patterns == ("t_scores.*", "z_scores.*"):
                t_keys, z_keys = take("t_scores.*"), take("z_scores.*")
                parts.extend(w.HBox([self.row_boxes[t], self.row_boxes[z]]) for t, z in zip(t_keys, z_keys))
                continue
            for pattern in patterns:
                parts.extend(self.row_boxes[k] for k in take(pattern))
        parts.append(self.gluco_taken)
        parts.extend(self.row_boxes[k] for k in take("glucocorticoids.*"))
        self.rows: dict[str, list[dict[str, w.Widget]]] = {name: [] for name in form_spec.ROW_LISTS}
        self.list_boxes: dict[str, w.VBox] = {}
        self.add_buttons: dict[str, w.Button] = {}
        for list_field in ("medications", "surgeries", "fractures"):
            if list_field == "surgeries":
                parts.append(w.HTML(f"<b>Cancer</b> <small>({esc(form_spec.FIELD_META['cancer']['description'])})"
                                    "</small>"))
                parts.extend(self.row_boxes[k] for k in take("cancer.*"))
            parts.extend(self._list_section(list_field))
        self.conditions: dict[str, w.Checkbox] = {}
        cond_boxes = []
        for code, meaning in form_spec.condition_choices():
            # The meaning on hover over the words themselves (the label's own title is the words otherwise).
            box = self.kit.make(w.Checkbox, "260px", value=False, indent=False, tooltip=meaning,
                                description=f'<span title="{esc(meaning)}">{esc(code.replace("_", " "))}</span>',
                                description_allow_html=True)
            box.add_class(f"pr-intake-condition-{code}")
            self.conditions[code] = box
            cond_boxes.append(box)
        self.messages["conditions"] = self._msg("conditions")
        parts += [w.HTML("<b>Conditions</b> <small>(hover for what each means)</small>"),
                  w.GridBox(cond_boxes, layout=w.Layout(grid_template_columns="repeat(3, 270px)")),
                  self.messages["conditions"],
                  w.HTML("<b>Thinking and living situation</b>")]
        for key in LIVING:
            parts.extend(self.row_boxes[k] for k in take(key))
        parts.extend(self.row_boxes[k] for k in specs if k not in placed)  # nothing is dropped
        self.widget = w.VBox(parts)
        self.widget.add_class("pr-intake")

    # -- building ------------------------------------------------------------------------
    def _msg(self, key: str) -> w.HTML:
        msg = self.kit.make(w.HTML, value="")
        msg.add_class("pr-msg")
        msg.add_class(f"pr-msg-{key.replace('.', '-')}")
        return msg

    def _choice_box(self, spec: form_spec.FieldSpec, width: str, empty: str) -> w.Dropdown:
        return self.kit.make(w.Dropdown, width, options=[(empty, None)] + spec.options, value=None,
                             tooltip=spec.help)

    def _row(self, spec: form_spec.FieldSpec, label_width: str = "300px") -> w.Widget:
        if spec.kind in ("choice", "boolean"):
            widget = self._choice_box(spec, "160px", "- choose -" if spec.required else "not given")
        else:
            widget = self.kit.make(w.Text, "160px", value="", placeholder=spec.placeholder, tooltip=spec.help)
        widget.add_class(f"pr-intake-{spec.key.replace('.', '-')}")
        self.inputs[spec.key] = widget
        self.messages[spec.key] = self._msg(spec.key)
        unit = f" ({spec.unit})" if spec.unit else ""
        star = " *" if spec.required else ""
        label = self.kit.make(w.HTML, label_width, value=(
            f'<div class="pr-field-label" title="{esc(spec.help)}">{esc(spec.label)}{esc(unit)}{star}'
            f'<br><small>{esc(spec.help)}</small></div>'))
        return w.HBox([label, widget, self.messages[spec.key]], layout=self.kit.layout(align_items="center"))

    def _list_section(self, list_field: str) -> list[w.Widget]:
        heading, add_words, css = ROW_WORDS[list_field]
        meta = form_spec.FIELD_META[list_field]
        self.list_boxes[list_field] = w.VBox([])
        button = w.Button(description=add_words, icon="plus")
        button.add_class(f"pr-intake-add-{css}")
        button.on_click(lambda _b, lf=list_field: self.add_row(lf))
        self.add_buttons[list_field] = button
        self.messages[list_field] = self._msg(list_field)
        note = meta["description"]
        if list_field == "fractures":
            note += " Sites: " + ", ".join(s for s, _ in form_spec.fracture_sites())
        return [w.HTML(f"<b>{esc(heading)}</b> <small>({esc(note)})</small>"), self.list_boxes[list_field],
                button, self.messages[list_field]]

    @property
    def add_fracture_button(self) -> w.Button:
        return self.add_buttons["fractures"]

    @property
    def fracture_rows(self) -> list[dict[str, w.Widget]]:
        return self.rows["fractures"]

    def add_row(self, list_field: str, **values: Any) -> dict[str, w.Widget]:
        """A new row of ``list_field`` (its boxes from the item's schema), filled with ``values``."""
        _heading, _add, css = ROW_WORDS[list_field]
        index = len(self.rows[list_field])
        row: dict[str, w.Widget] = {}
        for spec in form_spec.row_fields(list_field):
            prop = spec.key.split(".", 1)[1]
            words = spec.label.split(" - ")[-1]
            value = values.get(prop)
            if spec.kind == "boolean":
                widget = w.Checkbox(value=bool(value) if value is not None else prop == "low_trauma",
                                    description=words[0].lower() + words[1:], indent=False, tooltip=spec.help,
                                    layout=w.Layout(width="auto"))
            elif spec.kind == "choice":
                widget = w.Dropdown(options=[(f"- {words.lower()} -", None)] + spec.options, tooltip=spec.help,
                                    layout=w.Layout(width="200px"))
                widget.value = value if value in spec.choices else None
            else:
                unit = f" ({spec.unit})" if spec.unit else ""
                text = "" if value is None else form_spec._num(value) if isinstance(value, (int, float)) \
                    else str(value)
                description = f"{words.lower()}{unit}"
                widget = w.Text(value=text, description=description, tooltip=spec.help,
                                placeholder="optional" if not spec.required else "",
                                style={"description_width": "initial"},
                                layout=w.Layout(width=f"{7 * len(description) + 100}px"))  # the words, then the box
            widget.add_class(f"pr-intake-{css}-{index}-{prop}")
            row[prop] = widget
        remove = w.Button(description="Remove", layout=w.Layout(width="80px"))
        remove.add_class(f"pr-intake-{css}-{index}-remove")
        box = w.HBox([*row.values(), remove])
        row["_box"] = box
        if list_field == "fractures":   # the vertebral level shows on a vertebral fracture's row only
            level = own_layout(row["level"])

            def _show_level(_ch=None, row=row, level=level):
                level.layout.display = None if form_spec.shows_level(row["site"].value) else "none"
            row["site"].observe(_show_level, names="value")
            _show_level()

        def _remove(_b, row=row):
            self.rows[list_field].remove(row)
            self.list_boxes[list_field].children = [r["_box"] for r in self.rows[list_field]]
        remove.on_click(_remove)
        self.rows[list_field].append(row)
        self.list_boxes[list_field].children = [r["_box"] for r in self.rows[list_field]]
        return row

    def add_fracture(self, site: str | None = None, months_ago: Any = "", low_trauma: bool = True,
                     level: str | None = None) -> dict[str, w.Widget]:
        return self.add_row("fractures", site=site, months_ago=months_ago, low_trauma=low_trauma, level=level)

    def add_medication(self, medicine: str | None = None, months_on: Any = "",
                       months_since_last_dose: Any = "") -> dict[str, w.Widget]:
        return self.add_row("medications", **{"class": medicine, "months_on": months_on,
                                              "months_since_last_dose": months_since_last_dose})

    def add_surgery(self, procedure: str | None = None, side: str | None = None, months_ago: Any = "",
                    surgeon_cleared_impact: bool = False) -> dict[str, w.Widget]:
        return self.add_row("surgeries", procedure=procedure, side=side, months_ago=months_ago,
                            surgeon_cleared_impact=surgeon_cleared_impact)

    def _show_for_sex(self) -> None:
        shown = self.inputs["sex"].value == "female"
        for box in self._women_only:
            box.layout.display = None if shown else "none"

    # -- reading and filling -------------------------------------------------------------
    def _row_values(self, list_field: str) -> list[dict]:
        return [{k: v.value for k, v in row.items() if not k.startswith("_")} for row in self.rows[list_field]]

    def data(self) -> dict:
        """The record dict from what is in the boxes (validated by the session)."""
        values = {k: v.value for k, v in self.inputs.items()}
        conditions = [c for c, box in self.conditions.items() if box.value]
        return form_spec.record_data(values, self._row_values("fractures"), conditions, self.gluco_taken.value,
                                     medications=self._row_values("medications"),
                                     surgeries=self._row_values("surgeries"),
                                     record_version=self.kept_record_version)

    def show_problems(self, problems: dict[str, str]) -> None:
        """Each message beside its field; fields without a box of their own go to the nearest one."""
        shown = {k: [] for k in self.messages}
        for field, message in problems.items():
            key = field if field in shown else field.split("[")[0].split(".")[0]
            if key == "glucocorticoids":
                key = "glucocorticoids.mg_per_day"
            if key in ("t_scores", "z_scores"):
                key = f"{key}.lumbar_spine"
            if key == "cancer":
                key = "cancer.active"
            shown.setdefault(key, []).append(field_words(form_spec.plain_choices(field, message)))
        for key, msgs in shown.items():
            if key in self.messages:
                self.messages[key].value = "<br>".join(esc(m) for m in msgs)
            elif msgs:
                self.errors.show(" ".join(msgs))

    def _clear_rows(self) -> None:
        for list_field in self.rows:
            self.rows[list_field].clear()
            self.list_boxes[list_field].children = []

    def fill(self, record: dict) -> None:
        """Show a saved record in the boxes."""
        values = form_spec.form_values(record)
        for key, widget in self.inputs.items():
            value = values.get(key)
            widget.value = value if isinstance(widget, w.Dropdown) else ("" if value is None else value)
        self.gluco_taken.value = bool(record.get("glucocorticoids"))
        self._clear_rows()
        for list_field in self.rows:
            for item in values.get(list_field) or []:
                self.add_row(list_field, **item)
        for code, box in self.conditions.items():
            box.value = code in (record.get("conditions") or [])
        self.kept_record_version = record.get("record_version")
        self._show_for_sex()
        self.show_problems({})

    def clear(self) -> None:
        for widget in self.inputs.values():
            widget.value = None if isinstance(widget, w.Dropdown) else ""
        self.gluco_taken.value = False
        self._clear_rows()
        for box in self.conditions.values():
            box.value = False
        self.kept_record_version = None
        self._show_for_sex()
        self.show_problems({})


def screening_html(screening) -> str:
    """The screening at a glance, then every flag with its reason and source."""
    if screening is None:
        return "<p><i>Check the person's details to see the screening.</i></p>"
    s = screening
    t = "" if s.lowest_t_score is None else f" (lowest T-score {s.lowest_t_score:g}" + (
        f" at {esc(s.lowest_t_score_site.replace('_', ' '))})" if s.lowest_t_score_site else ")")
    if s.density_reference == "z_score":
        z = ("no Z-score recorded, so no category" if s.lowest_z_score is None else
             f"lowest Z-score {s.lowest_z_score:g}" + (f" at {s.lowest_z_score_site.replace('_', ' ')}"
                                                       if s.lowest_z_score_site else ""))
        density = ("Bone density (by Z-score: before the menopause or under 50)",
                   s.bone_density_category.replace("_", " ") + f" ({z})")
    else:
        density = ("Bone density category", s.bone_density_category.replace("_", " ") + t)
    glance = [
        density,
        ("Falls risk", "yes" if s.falls_risk else "no"),
        ("Highest impact level allowed", IMPACT_LABELS.get(s.max_impact_level, s.max_impact_level)),
        ("Movement patterns to avoid", ", ".join(p.replace("_", " ") for p in s.avoid) or "none"),
        ("Clinician clearance needed before loading", "YES" if s.refer else "no"),
        ("Balance work first", "yes" if s.balance_first else "no"),
        ("Supervised sessions", "yes" if s.supervision else "no"),
    ]
    if s.max_pct_1rm is not None:
        glance.append(("Heaviest resistance load", f"{s.max_pct_1rm}% 1RM"))
    if s.carer_led:
        glance.append(("Sessions", "with a clinician or carer present; a short program; the person's pages are "
                                   "written for the carer"))
    if s.hold_volume:
        glance.append(("Volume", "held at the starting dose until a clinician records the clearance"))
    rows = "".join(f'<tr class="pr-glance-{i}"><th>{esc(k)}</th><td>{esc(v)}</td></tr>' for i, (k, v) in enumerate(glance))
    flags = "".join(
        f'<div class="pr-flag pr-flag-{esc(f.severity)}" data-rule="{esc(f.rule)}"><b>{esc(f.title or plain(f.rule))}</b> '
        f'<small>[{esc(SEVERITIES.get(f.severity, f.severity))}]</small><br>{esc(rule_words(f.message))}'
        + (' <b class="pr-lifted">Lifted by the recorded clearance.</b>' if f.lifted_by_clearance else
           ' <b class="pr-until-cleared">Holds until a clinician records the clearance.</b>' if f.until_cleared
           else "")
        + f'<br><small>Source: {esc(f.source)}</small></div>' for f in s.flags) or "<p>No rule fired.</p>"
    # The rule set's version is kept with the screening in the store and printed on the clinician's
    # pages; the page itself names the rules by their titles only.
    return (f'<table class="pr-table pr-glance">{rows}</table><h3>Flags ({len(s.flags)})</h3>'
            f'<div class="pr-flags">{flags}</div>')


#: A record path inside a rule's message ("cancer.bone_metastases", "surgeries[].surgeon_cleared_impact").
_DOTTED = re.compile(r"\b[a-z][a-z0-9_]*(?:\[\d*\])?(?:\.[a-z][a-z0-9_]*)+")


def rule_words(text: str) -> str:
    """A rule's message with the record paths and codes it names in the form's words."""
    return plain(_DOTTED.sub(lambda m: field_words(m.group(0)), text))
