"""Section 1's form (the person's baseline, from the record's own field metadata) and
section 2's view of the screening (the glance table and every flag with its source)."""

from __future__ import annotations

from typing import Any

import ipywidgets as w

from ..records import SEVERITIES
from . import form_spec
from .common import ErrorArea, WidgetKit, esc
from .session import IMPACT_LABELS
from .wording import field_words, plain


class IntakeForm:
    """The person's details, generated from the record's own field metadata."""

    def __init__(self, errors: ErrorArea) -> None:
        self.errors = errors
        self.kit = WidgetKit()
        self.inputs: dict[str, w.Widget] = {}
        self.messages: dict[str, w.HTML] = {}
        rows = []
        for spec in form_spec.intake_fields():
            if spec.key == "glucocorticoids.mg_per_day":
                self.gluco_taken = self.kit.make(w.Checkbox, value=False, indent=False,
                                                 description="Takes oral glucocorticoids")
                self.gluco_taken.add_class("pr-intake-glucocorticoids")
                rows.append(self.gluco_taken)
            rows.append(self._row(spec))
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
        self.fracture_rows: list[dict[str, w.Widget]] = []
        self.fracture_box = w.VBox([])
        self.add_fracture_button = w.Button(description="Add a fracture", icon="plus")
        self.add_fracture_button.add_class("pr-intake-add-fracture")
        self.add_fracture_button.on_click(lambda _b: self.add_fracture())
        self.messages["fractures"] = self._msg("fractures")
        self.widget = w.VBox([
            w.HTML("<p><b>The person's baseline at this first visit.</b> These details are the record the "
                   "screening reads; today's pain, effort and symptoms during a session go in the live-session "
                   "panel (section 6), never here. Every box is checked against the record's limits when you "
                   "press <b>Check and screen</b>. Numbers are typed, never clipped. * = required.</p>"),
            *rows,
            w.HTML(f"<b>Fractures</b> <small>({esc(form_spec.fracture_fields()[0].help)} Sites: "
                   + esc(", ".join(s for s, _ in form_spec.fracture_sites())) + ")</small>"),
            self.fracture_box, self.add_fracture_button, self.messages["fractures"],
            w.HTML("<b>Conditions</b> <small>(hover for what each means)</small>"),
            w.GridBox(cond_boxes, layout=w.Layout(grid_template_columns="repeat(3, 270px)")),
            self.messages["conditions"],
        ])
        self.widget.add_class("pr-intake")

    def _msg(self, key: str) -> w.HTML:
        msg = self.kit.make(w.HTML, value="")
        msg.add_class("pr-msg")
        msg.add_class(f"pr-msg-{key.replace('.', '-')}")
        return msg

    def _row(self, spec: form_spec.FieldSpec) -> w.Widget:
        if spec.kind == "choice":
            first = ("- choose -", None) if spec.required else ("not given", None)
            widget = self.kit.make(w.Dropdown, "160px", options=[first] + [(c, c) for c in spec.choices],
                                   value=None, tooltip=spec.help)
        else:
            widget = self.kit.make(w.Text, "160px", value="", placeholder=spec.placeholder, tooltip=spec.help)
        widget.add_class(f"pr-intake-{spec.key.replace('.', '-')}")
        self.inputs[spec.key] = widget
        self.messages[spec.key] = self._msg(spec.key)
        unit = f" ({spec.unit})" if spec.unit else ""
        star = " *" if spec.required else ""
        label = self.kit.make(w.HTML, "300px", value=(
            f'<div class="pr-field-label" title="{esc(spec.help)}">{esc(spec.label)}{esc(unit)}{star}'
            f'<br><small>{esc(spec.help)}</small></div>'))
        return w.HBox([label, widget, self.messages[spec.key]], layout=self.kit.layout(align_items="center"))

    def add_fracture(self, site: str | None = None, months_ago: Any = "", low_trauma: bool = True) -> None:
        index = len(self.fracture_rows)
        row = {
            "site": w.Dropdown(options=[("- site -", None)] + [(s, s) for s, _ in form_spec.fracture_sites()],
                               value=site, layout=w.Layout(width="140px")),
            "months_ago": w.Text(value=str(months_ago), placeholder="months ago", layout=w.Layout(width="110px")),
            "low_trauma": w.Checkbox(value=low_trauma, description="low trauma (fragility)", indent=False),
        }
        for key, widget in row.items():
            widget.add_class(f"pr-intake-fracture-{index}-{key}")
        remove = w.Button(description="Remove", layout=w.Layout(width="80px"))
        box = w.HBox([row["site"], row["months_ago"], row["low_trauma"], remove])
        row["_box"] = box

        def _remove(_b, row=row):
            self.fracture_rows.remove(row)
            self.fracture_box.children = [r["_box"] for r in self.fracture_rows]
        remove.on_click(_remove)
        self.fracture_rows.append(row)
        self.fracture_box.children = [r["_box"] for r in self.fracture_rows]

    def data(self) -> dict:
        """The record dict from what is in the boxes (validated by the session)."""
        values = {k: v.value for k, v in self.inputs.items()}
        fractures = [{k: v.value for k, v in row.items() if not k.startswith("_")} for row in self.fracture_rows]
        conditions = [c for c, box in self.conditions.items() if box.value]
        return form_spec.record_data(values, fractures, conditions, self.gluco_taken.value)

    def show_problems(self, problems: dict[str, str]) -> None:
        """Each message beside its field; fields without a box of their own go to the nearest one."""
        shown = {k: [] for k in self.messages}
        for field, message in problems.items():
            key = field if field in shown else field.split("[")[0].split(".")[0]
            if key == "glucocorticoids":
                key = "glucocorticoids.mg_per_day"
            if key == "t_scores":
                key = "t_scores.lumbar_spine"
            shown.setdefault(key, []).append(message)
        for key, msgs in shown.items():
            if key in self.messages:
                self.messages[key].value = "<br>".join(esc(field_words(m)) for m in msgs)
            elif msgs:
                self.errors.show(" ".join(field_words(m) for m in msgs))

    def fill(self, record: dict) -> None:
        """Show a saved record in the boxes."""
        for key, value in form_spec.form_values(record).items():
            self.inputs[key].value = value if value is not None else None if isinstance(
                self.inputs[key], w.Dropdown) else ""
        self.gluco_taken.value = bool(record.get("glucocorticoids"))
        self.fracture_rows.clear()
        self.fracture_box.children = []
        for fx in record.get("fractures") or []:
            self.add_fracture(fx["site"], fx["months_ago"], fx["low_trauma"])
        for code, box in self.conditions.items():
            box.value = code in (record.get("conditions") or [])
        self.show_problems({})

    def clear(self) -> None:
        for widget in self.inputs.values():
            widget.value = None if isinstance(widget, w.Dropdown) else ""
        self.gluco_taken.value = False
        self.fracture_rows.clear()
        self.fracture_box.children = []
        for box in self.conditions.values():
            box.value = False
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
        f'<small>[{esc(SEVERITIES.get(f.severity, f.severity))}]</small><br>{esc(f.message)}'
        + (' <b class="pr-lifted">Lifted by the recorded clearance.</b>' if f.lifted_by_clearance else
           ' <b class="pr-until-cleared">Holds until a clinician records the clearance.</b>' if f.until_cleared
           else "")
        + f'<br><small>Source: {esc(f.source)}</small></div>' for f in s.flags) or "<p>No rule fired.</p>"
    version = f"<p><small>Rule set {esc(s.ruleset_version)}</small></p>" if s.ruleset_version else ""
    return (f'<table class="pr-table pr-glance">{rows}</table><h3>Flags ({len(s.flags)})</h3>'
            f'<div class="pr-flags">{flags}</div>{version}')
