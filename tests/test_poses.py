"""Pose data of the exercise catalogue, and the drawings made from it.

Sanity of every entry's start and end position: joint angles within human ranges
(American Academy of Orthopaedic Surgeons 1965 average ranges, from memory; see
prescribe.catalogue.poses.JOINT_RANGES), segment lengths the same in both positions, and the feet
(or the seat, or the body lying down) on the floor or a prop where the exercise has no
flight phase.
"""

from __future__ import annotations

import math
import xml.etree.ElementTree as ET

import pytest

from prescribe.catalogue import default_catalogue, load_catalogue
from prescribe.catalogue.drawings import pose_svg
from prescribe.errors import CatalogueError
from prescribe.catalogue.poses import (HEAD_RADIUS, SEGMENTS, Pose, Posture, angles_out_of_range, contact_errors,
                                       key_points, segments)

SVG = "{http://www.w3.org/2000/svg}"
#: How far a point may be from the surface it rests on: 1.5% of body height, about
#: 2.5 cm for an adult of 172 cm (the joint angles are whole degrees; common practice).
CONTACT_TOLERANCE = 0.015
CATALOGUE = default_catalogue()
ENTRIES = CATALOGUE.all()
FOOT_POINTS = ("heel_n", "heel_f", "toe_n", "toe_f")


def _postures(ex):
    return (("start", ex.pose.start), ("end", ex.pose.end))


def test_every_exercise_in_the_catalogue_has_a_pose():
    assert len(ENTRIES) == 52
    assert [ex.exercise_id for ex in ENTRIES if ex.pose is None] == []


@pytest.mark.parametrize("ex", ENTRIES, ids=lambda e: e.exercise_id)
def test_joint_angles_are_within_human_ranges(ex):
    for name, posture in _postures(ex):
        assert angles_out_of_range(posture, ex.pose.view) == [], (ex.exercise_id, name)


@pytest.mark.parametrize("ex", ENTRIES, ids=lambda e: e.exercise_id)
def test_segment_lengths_are_the_same_in_the_start_and_end_position(ex):
    view = ex.pose.view
    start, end = key_points(ex.pose.start, view), key_points(ex.pose.end, view)
    for a, b in segments(view):
        first, last = math.dist(start[a], start[b]), math.dist(end[a], end[b])
        assert first == pytest.approx(last, abs=1e-9), (a, b)
    # ...and the body's own lengths (Drillis & Contini 1966 via Winter 2009, from memory).
    assert math.dist(start["hip"], start["neck"]) == pytest.approx(SEGMENTS["trunk"])
    assert math.dist(start["knee_n"], start["ankle_n"]) == pytest.approx(SEGMENTS["shank"])


@pytest.mark.parametrize("ex", ENTRIES, ids=lambda e: e.exercise_id)
def test_feet_on_the_floor_where_the_exercise_has_no_flight_phase(ex):
    view = ex.pose.view
    if ex.ground_contact:  # level 0: the feet are placed, never landed
        assert not ex.pose.flight
    for name, posture in _postures(ex):
        where = (ex.exercise_id, name)
        points = key_points(posture, view)
        # Nothing sinks into the floor; the head stays above it.
        assert min(y for _, y in points.values()) >= -CONTACT_TOLERANCE, where
        assert points["head"][1] - HEAD_RADIUS >= -CONTACT_TOLERANCE, where
        for contact, error in contact_errors(posture, view).items():
            assert abs(error) <= CONTACT_TOLERANCE, (where, contact, round(error, 3))
        if not ex.pose.flight:
            resting = [c.partition("@")[0] for c in posture.contacts if not c.endswith("@wall")]
            assert resting, f"{where}: no point rests on the floor or a prop"
            assert any(p in FOOT_POINTS or p == "hip" for p in resting), where


def test_the_sanity_checks_catch_a_bad_pose():
    # A knee bent past its range, and a foot said to be on the floor that floats above it.
    bent = Posture(knee=(170, 0))
    assert angles_out_of_range(bent) == ["knee[0] = 170 not in 0..140"]
    floating = Posture(hip=(40, 0), contacts=("heel_f@floor", "heel_n@floor"))
    assert contact_errors(floating)["heel_n@floor"] > CONTACT_TOLERANCE


def test_each_exercise_moves_between_start_and_end():
    for ex in ENTRIES:
        assert ex.pose.start != ex.pose.end, ex.exercise_id


def test_a_catalogue_with_a_bad_pose_is_refused_naming_the_entry(tmp_path):
    text = open(default_catalogue().path, encoding="utf-8").read()
    bad = text.replace('contacts = ["heel_n@floor", "toe_f@floor"]', 'contacts = ["nose@floor"]', 1)
    path = tmp_path / "cat.toml"
    path.write_text(bad, encoding="utf-8")
    with pytest.raises(CatalogueError, match=r"exercise 'walking', field 'pose\.start': contact 'nose@floor'"):
        load_catalogue(path)


@pytest.mark.parametrize("ex", ENTRIES, ids=lambda e: e.exercise_id)
def test_each_drawing_is_a_small_svg_of_three_paths_and_no_text(ex):
    svg = pose_svg(ex.pose, ex.name)
    root = ET.fromstring(svg)  # well-formed
    elements = list(root.iter())
    assert len(elements) <= 6  # svg, title, three paths: cheap for WeasyPrint to lay out
    assert [e.get("class") for e in root.iter(f"{SVG}path")] == ["props", "far", "body"]
    assert not list(root.iter(f"{SVG}text"))
    assert root.find(f"{SVG}title").text == f"{ex.name}: start and end position"
    body = next(p for p in root.iter(f"{SVG}path") if p.get("class") == "body").get("d")
    assert body.count("a") >= 4  # a head (two arcs) in each of the two positions


def test_drawing_titles_are_escaped():
    svg = pose_svg(ENTRIES[0].pose, "<b>x</b> & y")
    assert "<b>" not in svg and "&lt;b&gt;x&lt;/b&gt; &amp; y" in svg
    ET.fromstring(svg)


def test_a_pose_in_the_front_view_keeps_the_knees_straight():
    with pytest.raises(ValueError, match="front view"):
        Pose(view="front", start=Posture(knee=(30, 30)), end=Posture())
