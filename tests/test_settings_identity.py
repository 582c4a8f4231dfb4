"""Who is working and in which role: the hub login wins over typed names, and only a
clinic lead may approve templates.  Logins here are invented."""

from __future__ import annotations

import pytest

from prescribe.errors import InputError, NotPermittedError
from prescribe.settings import clinic_leads, clinician_role, current_clinician, require_role


@pytest.fixture(autouse=True)
def no_hub(monkeypatch):
    for var in ("JUPYTERHUB_USER", "PRESCRIBE_HUB_ROLE", "PRESCRIBE_CLINIC_LEADS", "PRESCRIBE_SETTINGS"):
        monkeypatch.delenv(var, raising=False)


def test_without_a_hub_the_typed_name_is_used():
    assert current_clinician("  Dr Ivo Quill ") == "Dr Ivo Quill"
    assert current_clinician(None) == ""
    with pytest.raises(InputError, match="clinician is required|clinician must be"):
        current_clinician("  ", required=True)


def test_under_the_hub_the_login_is_the_clinician(monkeypatch):
    monkeypatch.setenv("JUPYTERHUB_USER", "mara.teal")
    assert current_clinician() == "mara.teal"
    assert current_clinician("") == "mara.teal"
    assert current_clinician("mara.teal") == "mara.teal"


def test_under_the_hub_another_name_is_refused_not_replaced(monkeypatch):
    monkeypatch.setenv("JUPYTERHUB_USER", "mara.teal")
    with pytest.raises(InputError) as info:
        current_clinician("otto.fenn")
    message = str(info.value)
    assert "'otto.fenn'" in message and "'mara.teal'" in message and "clinician" in message


def test_roles_come_from_the_hub_for_the_logged_in_user_only(monkeypatch):
    monkeypatch.setenv("JUPYTERHUB_USER", "lena.vos")
    monkeypatch.setenv("PRESCRIBE_HUB_ROLE", "lead")
    assert clinician_role("lena.vos") == "lead"
    assert clinician_role("otto.fenn") == "clinician"  # the hub speaks for its own user only
    monkeypatch.setenv("PRESCRIBE_HUB_ROLE", "clinician")
    assert clinician_role("lena.vos") == "clinician"


def test_roles_from_the_clinic_settings(monkeypatch, tmp_path):
    settings = tmp_path / "clinic.toml"
    settings.write_text('[clinic]\nname = "Harbourside Bone Health (invented)"\n[roles]\nleads = ["lena.vos"]\n')
    monkeypatch.setenv("PRESCRIBE_SETTINGS", str(settings))
    monkeypatch.setenv("PRESCRIBE_CLINIC_LEADS", "rui.amsel, ")
    assert clinic_leads() == {"lena.vos", "rui.amsel"}
    assert clinician_role("lena.vos") == "lead" and clinician_role("rui.amsel") == "lead"
    assert clinician_role("otto.fenn") == "clinician" and clinician_role("") == "clinician"
    settings.write_text('[roles]\nleads = "lena.vos"\n')
    with pytest.raises(InputError, match="leads"):
        clinic_leads()


def test_only_a_lead_may_approve_a_template(monkeypatch):
    monkeypatch.setenv("PRESCRIBE_CLINIC_LEADS", "lena.vos")
    assert require_role("lena.vos", "approve_template") == "lead"
    with pytest.raises(NotPermittedError) as info:
        require_role("otto.fenn", "approve_template")
    assert info.value.exit_code == 2
    assert "'otto.fenn'" in str(info.value) and "approve template" in str(info.value)
    with pytest.raises(InputError, match="action"):
        require_role("lena.vos", "delete_everything")


def test_a_single_user_install_with_no_leads_named_has_no_roles(monkeypatch):
    # Outside a hub a typed name proves nothing, so a clinic that names no leads has no roles:
    # any named clinician may approve (the store still refuses an approver who is the author).
    assert clinician_role("otto.fenn") == "lead"
    assert require_role("otto.fenn", "approve_template") == "lead"
    assert clinician_role("") == "clinician"
    monkeypatch.setenv("PRESCRIBE_CLINIC_LEADS", "lena.vos")  # once leads are named, only they are
    assert clinician_role("otto.fenn") == "clinician"
