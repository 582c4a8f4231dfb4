"""`prescribe explain` through the real entry point."""

from __future__ import annotations

import json

import pytest

from conftest import run_cli

G = 9.80665


def test_explain_prints_the_contract_as_json():
    res = run_cli("explain", "walking", "--body-mass-kg", "64", "--t-score", "-2.6")
    assert res.returncode == 0, res.stderr
    d = json.loads(res.stdout)
    for key in ("exercise_id", "body_mass_kg", "peak_grf_bw", "peak_grf_n", "joint_contact_force_bw",
                "joint_friction_n", "bone_stress_mpa", "strength_mpa", "sources", "loading_rate_bw_s",
                "assumptions", "cautions"):
        assert key in d
    assert d["peak_grf_n"] == pytest.approx(1.2 * 64 * G, abs=0.1)
    # Bergmann et al. 2001, J Biomech 34:859-871: 238% BW walking (within 10%).
    assert d["joint_contact_force_bw"] == pytest.approx(2.38, rel=0.10)
    assert d["joint_contact_force_bw"] > d["peak_grf_bw"]
    assert set(d["strength_mpa"]) == {"healthy", "this_person"}
    assert d["strength_mpa"]["this_person"] < d["strength_mpa"]["healthy"]


def test_explain_table():
    res = run_cli("explain", "heel_drop_forceful", "--table")
    assert res.returncode == 0, res.stderr
    assert res.stdout.splitlines()[0].split() == ["figure", "value"]
    assert "joint_contact_force_bw" in res.stdout and "assumption: Body mass not given" in res.stdout
    assert "in plain words:" in res.stdout and "caution:" in res.stdout


@pytest.mark.parametrize("args, field", [
    (["no_such_move"], "exercise_id"),
    (["walking", "--body-mass-kg", "20"], "body_mass_kg"),
    (["walking", "--t-score", "-9"], "t_score"),
    (["walking", "--t-score", "nan"], "t_score"),
    (["walking", "--external-load-kg", "5"], "external_load_kg"),
])
def test_explain_bad_input_exits_2_naming_it(args, field):
    res = run_cli("explain", *args)
    assert res.returncode == 2
    assert field in res.stderr and "Traceback" not in res.stderr
    assert res.stdout == ""


def test_explain_bad_option_exits_2():
    res = run_cli("explain", "walking", "--body-mass-kg", "heavy")
    assert res.returncode == 2 and "--body-mass-kg" in res.stderr
