"""The exercise catalogue: contents, impact levels against force, and malformed files."""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

from prescribe.catalogue import (CATEGORIES, DEFAULT_PATH, Catalogue, Exercise, default_catalogue,
                                 impact_level_for_grf, load_catalogue)
from prescribe.errors import CatalogueError, InputError
from prescribe.records import MOVEMENT_PATTERNS

CAT = default_catalogue()


def _band(grf: float, contact: bool) -> int:
    """The impact bands of our scale (docs/catalogue.md, "Impact levels and boundaries"),
    written out separately from the code under test."""
    if contact:
        return 0
    if grf < 2.0:
        return 1
    if grf <= 4.0:
        return 2
    return 3


# ------------------------------------------------------------------ contents
def test_catalogue_has_at_least_40_entries_over_all_categories():
    assert len(CAT) >= 40
    assert {ex.category for ex in CAT} == set(CATEGORIES)


@pytest.mark.parametrize("exercise", CAT.all(), ids=lambda e: e.exercise_id)
def test_every_entry_level_follows_from_its_force(exercise: Exercise):
    assert exercise.impact_level == _band(exercise.peak_grf_bw, exercise.ground_contact)
    lo, hi = exercise.peak_grf_range_bw
    assert lo <= exercise.peak_grf_bw <= hi
    assert exercise.source.strip()
    assert set(exercise.patterns) <= set(MOVEMENT_PATTERNS)
    if exercise.impact_level >= 2:
        assert exercise.loading_rate_bw_s is not None and exercise.loading_rate_bw_s > 0


def test_impact_work_spread_over_levels_and_directions():
    impact = CAT.filter(category="impact")
    assert len([e for e in impact if e.impact_level >= 1]) >= 12
    for level in (1, 2, 3):
        assert CAT.filter(level=level, category="impact"), level
    directions = {d for e in impact if e.impact_level >= 2 for d in e.directions}
    assert directions == {"vertical", "forward_back", "side_to_side", "rotational"}


def test_required_exercises_present():
    for ident in ("walking", "marching_on_spot", "calf_raise", "sit_to_stand", "back_squat",
                  "goblet_box_squat", "trap_bar_deadlift", "hip_hinge_dowel", "overhead_press",
                  "seated_press", "wall_push_up", "lunge", "split_squat", "step_up",
                  "seated_row_band", "tandem_stance", "tandem_walk", "single_leg_stance",
                  "heel_and_toe_walking", "stepping_practice", "prone_back_extension",
                  "wall_slide", "chin_tuck", "supine_shoulder_retraction",
                  "thoracic_extension_towel", "heel_drop_forceful", "stamp_forceful",
                  "stamp_gentle", "star_jump", "lateral_hop", "quarter_turn_jump"):
        assert ident in CAT, ident


def test_published_force_plate_values_map_to_the_documented_levels():
    # Heel drop 4.9 BW (Int J Sci Technol Soc 2021, 9:294-300) -> level 3.
    assert CAT.get("heel_drop_forceful").peak_grf_bw == pytest.approx(4.9)
    assert CAT.get("heel_drop_forceful").impact_level == 3
    # Stomp RPE 8: 4.4-4.6 BW; RPE 5: 2.9-3.1 BW (Ryan, Clissold & Winwood 2021, Sports Injr Med 5:168).
    assert CAT.get("stamp_forceful").impact_level == 3
    assert CAT.get("stamp_gentle").impact_level == 2
    assert 2.9 <= CAT.get("stamp_gentle").peak_grf_bw <= 3.1
    # Star and stride jumps 3.90-5.38 BW (Clissold et al. 2019, Clin Biomech 73:1-8).
    assert CAT.get("star_jump").peak_grf_range_bw == (3.9, 5.38)
    # Walking ~1.2 BW (Keller et al. 1996, Clin Biomech 11:253-259) -> level 1.
    assert CAT.get("walking").impact_level == 1
    # Sit-to-stand exceeds 1 BW yet stays level 0 (feet in contact; common practice).
    assert CAT.get("sit_to_stand").peak_grf_bw > 1.0 and CAT.get("sit_to_stand").impact_level == 0


def test_links_point_to_entries_and_planner_fields_present():
    for ex in CAT:
        for link in (ex.regression, ex.progression):
            assert link is None or link in CAT
    mains = {e.exercise_id for e in CAT if e.loaded_by_1rm}
    assert {"back_squat", "trap_bar_deadlift", "overhead_press"} <= mains
    assert all(e.dose_unit == "impacts" for e in CAT.filter(level=3))
    assert all(not e.spine_sparing or "loaded_spinal_flexion" not in e.patterns for e in CAT)
    assert {"hip_hinge_dowel", "goblet_box_squat", "wall_push_up",
            "prone_back_extension"} <= {e.exercise_id for e in CAT if e.spine_sparing}


def test_model_estimated_entries_match_the_landing_model():
    from prescribe.loading import mechanics as mech
    for ex in CAT:
        if ex.source_kind != "model":
            continue
        mi = ex.model_inputs
        est = mech.landing_peak_grf_bw(mi.drop_height_m, mi.contact_time_s, rebound=mi.rebound)
        assert est == pytest.approx(ex.peak_grf_bw, abs=0.01), ex.exercise_id
        if mi.rise_time_s:
            assert ex.loading_rate_bw_s == pytest.approx(est / mi.rise_time_s, rel=0.01)


# ------------------------------------------------------------------ interface
def test_filter_and_get():
    lvl1 = CAT.filter(max_level=1)
    assert lvl1 and all(e.impact_level <= 1 for e in lvl1)
    no_landing = CAT.filter(exclude_patterns=["high_impact_landing"])
    assert all("high_impact_landing" not in e.patterns for e in no_landing)
    assert len(no_landing) < len(CAT)
    assert CAT.get("walking").name == "Walking"
    with pytest.raises(InputError, match="exercise_id must be .*prescribe exercises.*not 'nope'"):
        CAT.get("nope")
    with pytest.raises(InputError, match="level"):
        CAT.filter(level=7)
    with pytest.raises(InputError, match="category"):
        CAT.filter(category="yoga")
    with pytest.raises(InputError, match="exclude_patterns"):
        CAT.filter(exclude_patterns=["sitting"])


def test_exercise_is_frozen():
    with pytest.raises(Exception):
        CAT.get("walking").peak_grf_bw = 9.0  # type: ignore[misc]


def test_impact_level_for_grf_scalar_array_and_boundaries():
    # Boundaries: exactly 2.0 and 4.0 BW are level 2 ("2 to 4 BW", docs/catalogue.md).
    assert impact_level_for_grf(2.0) == 2
    assert impact_level_for_grf(4.0) == 2
    assert impact_level_for_grf(4.0001) == 3
    assert impact_level_for_grf(1.999) == 1
    assert impact_level_for_grf(1.3, ground_contact=True) == 0
    assert isinstance(impact_level_for_grf(3.0), int)
    out = impact_level_for_grf(np.array([[0.5, 2.5], [4.5, 3.9]]))
    assert out.shape == (2, 2) and out.tolist() == [[1, 2], [3, 2]]
    for bad in (-0.1, float("nan"), float("inf")):
        with pytest.raises(InputError, match="peak_grf_bw"):
            impact_level_for_grf(bad)


# ------------------------------------------------------------------ malformed files
def _entry_text() -> str:
    text = DEFAULT_PATH.read_text(encoding="utf-8")
    start = text.index('[[exercise]]\nexercise_id = "walking"')
    end = text.index("[[exercise]]", start + 5)
    return text[start:end]


def _write(tmp_path: Path, body: str) -> Path:
    p = tmp_path / "cat.toml"
    p.write_text(body, encoding="utf-8")
    return p


@pytest.mark.parametrize("old, new, field, words", [
    ("peak_grf_bw = 1.2\n", "peak_grf_bw = 3.0\npeak_grf_range_bw_x = 1\n", "peak_grf_range_bw_x", "Extra"),
    ("impact_level = 1", "impact_level = 3", None, "does not follow"),
    ('category = "impact"', 'category = "dance"', "category", "dance"),
    ('patterns = []', 'patterns = ["sitting"]', "patterns.0", "sitting"),
    ('balance_demand = "low"\n', "", "balance_demand", "required"),
    ('progression = "brisk_walking"', 'progression = "missing_one"', "progression", "missing_one"),
])
def test_malformed_entry_names_entry_and_field(tmp_path, old, new, field, words):
    body = _entry_text()
    assert old in body
    path = _write(tmp_path, body.replace(old, new, 1))
    with pytest.raises(CatalogueError) as info:
        load_catalogue(path)
    err = info.value
    assert err.entry == "walking"
    assert err.field == field
    assert words.lower() in str(err).lower()
    assert "walking" in str(err) and str(path) in str(err)


def test_level_mismatch_message_says_what_it_must_be(tmp_path):
    path = _write(tmp_path, _entry_text().replace("peak_grf_bw = 1.2\npeak_grf_range_bw = [1.1, 1.3]",
                                                  "peak_grf_bw = 4.5\npeak_grf_range_bw = [4, 5]"))
    with pytest.raises(CatalogueError, match=re.escape("it must be 3")):
        load_catalogue(path)


def test_duplicate_id_bad_toml_and_missing_file(tmp_path):
    body = _entry_text().replace('progression = "brisk_walking"\n', "")
    with pytest.raises(CatalogueError, match="earlier entry"):
        load_catalogue(_write(tmp_path, body + "\n" + body))
    with pytest.raises(CatalogueError, match="not valid TOML"):
        load_catalogue(_write(tmp_path, "[[exercise]\nx="))
    with pytest.raises(CatalogueError, match="cannot be read"):
        load_catalogue(tmp_path / "nope.toml")
    with pytest.raises(CatalogueError, match="at least one"):
        load_catalogue(_write(tmp_path, "[meta]\n"))


def test_loaded_catalogue_is_a_catalogue(tmp_path):
    body = _entry_text().replace('progression = "brisk_walking"\n', "")
    cat = load_catalogue(_write(tmp_path, body))
    assert isinstance(cat, Catalogue) and cat.ids == ["walking"]
