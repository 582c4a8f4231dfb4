"""``prescribe template ...`` and ``prescribe plan --template NAME@VERSION`` end to end
(the real entry point in a subprocess, an invented clinic and invented people).

Contracts: PRODUCT.md "Clinic templates under review".  The four-eyes rule is common
practice in clinical governance (published_facts J).
"""

from __future__ import annotations

import json
import tomllib
from datetime import date, timedelta

import pytest

from prescribe.planning.templates import TEMPLATE_DIR

from conftest import run_cli

REVIEW_BY = (date.today() + timedelta(days=300)).isoformat()
PERSON = {"patient_id": "RBC-0007", "age_years": 63, "sex": "female", "body_mass_kg": 62.0, "height_cm": 163.0,
          "t_scores": {"lumbar_spine": -1.9, "femoral_neck": -1.6}}


@pytest.fixture
def env(tmp_path):
    return {"PRESCRIBE_DB": str(tmp_path / "clinic.db")}


@pytest.fixture
def draft(tmp_path):
    """The shipped standard template under a clinic name, as a TOML file from `template show`."""
    def write(name="riverside_standard", edit=None, file="draft.toml"):
        text = run_cli("template", "show", "standard").stdout
        text = text.replace('name = "standard"', f'name = "{name}"', 1)
        if edit:
            text = edit(text)
        path = tmp_path / file
        path.write_text(text, encoding="utf-8")
        return str(path)
    return write


def _json(done):
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout)


def test_list_shows_shipped_templates_without_a_store(env):
    rows = _json(run_cli("template", "list", env=env))
    shipped = {r["name"]: r for r in rows}
    assert {"standard", "gentle", "post_vertebral_fracture"} <= set(shipped)
    for r in rows:
        assert {"name", "version", "status", "author", "approver", "review_by"} <= set(r)
        assert r["status"] == "approved" and r["origin"] == "shipped"


def test_show_prints_the_shipped_toml():
    done = run_cli("template", "show", "gentle@1")
    assert done.returncode == 0
    assert tomllib.loads(done.stdout) == tomllib.loads((TEMPLATE_DIR / "gentle.toml").read_text())


def test_the_whole_review_cycle(env, draft, tmp_path):
    path = draft()
    assert _json(run_cli("template", "check", path, "--random", "5"))["ok"] is True
    added = _json(run_cli("template", "add", path, "--clinician", "Lead A", env=env))
    assert (added["name"], added["version"], added["status"], added["author"]) == \
        ("riverside_standard", 1, "draft", "Lead A")
    patient = tmp_path / "p.json"
    patient.write_text(json.dumps(PERSON))
    # A draft never builds a program (exit 2, nothing on stdout).
    done = run_cli("plan", str(patient), "--template", "riverside_standard@1", env=env)
    assert done.returncode == 2 and done.stdout == "" and "draft" in done.stderr
    done = run_cli("plan", str(patient), "--template", "riverside_standard", env=env)
    assert done.returncode == 2 and "no approved version" in done.stderr
    # Four eyes: the author cannot approve.
    done = run_cli("template", "approve", "riverside_standard@1", "--clinician", "Lead A", env=env)
    assert done.returncode == 2 and "never its author" in done.stderr
    ok = _json(run_cli("template", "approve", "riverside_standard@1", "--clinician", "Lead B",
                       "--review-by", REVIEW_BY, env=env))
    assert (ok["status"], ok["approver"], ok["review_by"]) == ("approved", "Lead B", REVIEW_BY)
    plan = _json(run_cli("plan", str(patient), "--template", "riverside_standard", env=env))
    assert plan["template"]["name"] == "riverside_standard" and plan["template_version"] == 1
    # Editing makes version 2, a draft; version 1 is unchanged and still the one used.
    path2 = draft(edit=lambda t: t.replace("impacts_target_level2 = 50", "impacts_target_level2 = 40"),
                  file="v2.toml")
    v2 = _json(run_cli("template", "add", path2, "--clinician", "Lead B", env=env))
    assert v2["version"] == 2 and v2["status"] == "draft" and "50 -> 40" in v2["change_note"]
    assert _json(run_cli("plan", str(patient), "--template", "riverside_standard", env=env))["template_version"] == 1
    shown = tomllib.loads(run_cli("template", "show", "riverside_standard@1", env=env).stdout)
    assert shown["impact"]["impacts_target_level2"] == 50 and shown["document"]["approver"] == "Lead B"
    # Compare: the fields that differ, and the people who change.
    cmp = _json(run_cli("template", "compare", "riverside_standard@1", "riverside_standard@2", env=env))
    assert cmp["fields_differ"] == [{"field": "impact.impacts_target_level2", "a": 50, "b": 40}]
    assert len(cmp["people"]) == 20 and any(p["differs"] for p in cmp["people"])
    table = run_cli("template", "compare", "riverside_standard@1", "riverside_standard@2", "--table", env=env)
    assert table.returncode == 0 and "impact.impacts_target_level2" in table.stdout and "PANEL-01" in table.stdout
    # Retire: no new programs from it.
    assert _json(run_cli("template", "retire", "riverside_standard@1", "--clinician", "Lead A",
                         env=env))["status"] == "retired"
    done = run_cli("plan", str(patient), "--template", "riverside_standard@1", env=env)
    assert done.returncode == 2 and "retired" in done.stderr
    listed = {(r["name"], r["version"]): r for r in _json(run_cli("template", "list", env=env))}
    assert listed[("riverside_standard", 1)]["status"] == "retired"
    assert listed[("riverside_standard", 2)]["status"] == "draft"


def test_check_names_each_bad_field_and_exits_2(draft):
    path = draft(edit=lambda t: t.replace("impacts_step = 10", "impacts_step = -3")
                 .replace("bout_gap_hours = 8.0", 'bout_gap_hours = "eight"'))
    done = run_cli("template", "check", path)
    assert done.returncode == 2
    assert "impact.impacts_step" in done.stderr and "impact.bout_gap_hours" in done.stderr
    report = json.loads(done.stdout)
    assert {p["field"] for p in report["problems"]} == {"impact.impacts_step", "impact.bout_gap_hours"}


def test_check_refuses_a_number_without_a_source(draft):
    path = draft(edit=lambda t: "\n".join(l for l in t.splitlines() if not l.startswith("impacts_step = \"")))
    done = run_cli("template", "check", path)
    assert done.returncode == 2 and "sources.impacts_step" in done.stderr


def test_add_refuses_bad_files_and_writes_nothing(env, draft, tmp_path):
    path = draft(edit=lambda t: t.replace("max_level = 3", "max_level = 4"))
    done = run_cli("template", "add", path, "--clinician", "Lead A", env=env)
    assert done.returncode == 2 and "impact.max_level" in done.stderr
    assert not (tmp_path / "clinic.db").exists()
    done = run_cli("template", "add", draft(name="standard"), "--clinician", "Lead A", env=env)
    assert done.returncode == 2 and "read-only" in done.stderr
    done = run_cli("template", "add", str(tmp_path / "missing.toml"), "--clinician", "Lead A", env=env)
    assert done.returncode == 2
    done = run_cli("template", "add", path, env=env)  # --clinician is required
    assert done.returncode == 2


def test_approve_and_retire_name_the_version(env, draft):
    _json(run_cli("template", "add", draft(), "--clinician", "Lead A", env=env))
    for args in (("approve", "riverside_standard"), ("approve", "riverside_standard@7"),
                 ("retire", "standard@1"), ("approve", "riverside_standard@1", "--review-by", "tomorrow")):
        done = run_cli("template", *args, "--clinician", "Lead B", env=env)
        assert done.returncode == 2, args
        assert "Traceback" not in done.stderr


def test_plan_accepts_shipped_names_with_their_version(tmp_path, env):
    patient = tmp_path / "p.json"
    patient.write_text(json.dumps(PERSON))
    plan = _json(run_cli("plan", str(patient), "--template", "gentle@1", env=env))
    assert plan["template"]["name"] == "gentle" and plan["template_version"] == 1
    done = run_cli("plan", str(patient), "--template", "gentle@2", env=env)
    assert done.returncode == 2 and "gentle@1" in done.stderr


def test_where_the_clinic_names_its_leads_only_a_lead_approves_or_retires(env, draft):
    # Roles (deploy/README.md): a clinic lead may approve templates; a clinician may not.
    env = {**env, "PRESCRIBE_CLINIC_LEADS": "Lead B"}
    _json(run_cli("template", "add", draft(), "--clinician", "Clinician C", env=env))
    refused = run_cli("template", "approve", "riverside_standard@1", "--clinician", "Clinician D", env=env)
    assert refused.returncode == 2 and "Clinician D" in refused.stderr and "lead" in refused.stderr
    listed = _json(run_cli("template", "list", env=env))
    mine = [t for t in listed if t["name"] == "riverside_standard"]
    assert mine and mine[0]["status"] == "draft"  # nothing changed
    approved = _json(run_cli("template", "approve", "riverside_standard@1", "--clinician", "Lead B", env=env))
    assert approved["status"] == "approved" and approved["approver"] == "Lead B"
    refused = run_cli("template", "retire", "riverside_standard@1", "--clinician", "Clinician D", env=env)
    assert refused.returncode == 2
