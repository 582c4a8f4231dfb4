"""Hypothesis strategies shared by the tests: random valid patient records.

``valid_records()`` draws :class:`prescribe.records.PatientRecord` objects covering
every field, with the published screening boundaries (T-score -1 and -2.5, TUG 12 s,
tandem 10 s, glucocorticoids 5 mg/day and 3 months, pain 5/10, fracture 3 months)
drawn often, so properties are checked at the edges as well as in between.

About half the records are version 2 (``record_version`` 2, as the tool writes a record
that uses version-2 fields), each version-2 field drawn with the rough frequency of an
invented clinic's caseload (the shares below are invented, not sourced), and the rules'
boundaries drawn often: Z-score -2.0, denosumab 7 months after the last dose, a joint
replacement 12 months ago.

- Z-scores: half the version-2 records (a DXA report gives them beside the T-scores);
- menopause: women only, 60% of them (premenopausal a fifth of those);
- medications: 60% of version-2 records, 1-3 classes; denosumab in about a third of lists,
  its last dose 0-14 months ago (7 and around drawn often) or not known;
- cancer: 20%; metastases excluded, unknown or present;
- surgeries: 35%, 1-2 operations, mostly 0-60 months ago (12 and around drawn often);
- vertebral level: half the vertebral fractures of version-2 records;
- cognition: 50% (none, mild, moderate, severe about 3:2:2:1); lives_alone, has_carer: 50% each;
- display_name: 30%.

The property tests that rely on these cases count them and assert the counts
(``tests/test_screening_property.py``).
"""

from __future__ import annotations

from hypothesis import strategies as st

from prescribe.records import (BONE_METASTASES, CONDITIONS, FRACTURE_SITES, MEDICATION_CLASSES, SURGERY_PROCEDURES,
                               SURGERY_SIDES, PatientRecord, parse_record)


def _number(lo: float, hi: float, edges: tuple[float, ...] = ()) -> st.SearchStrategy[float]:
    """Floats in [lo, hi], with the given edge values (and their neighbours) drawn often."""
    picks = [e for e in edges if lo <= e <= hi]
    plain = st.floats(lo, hi, allow_nan=False, allow_infinity=False)
    if not picks:
        return plain
    near = [v for e in picks for v in (e, round(e - 0.1, 6), round(e + 0.1, 6)) if lo <= v <= hi]
    return st.one_of(st.sampled_from(near), plain)


def _optional(strategy: st.SearchStrategy) -> st.SearchStrategy:
    return st.one_of(st.none(), strategy)


t_score = _number(-7, 5, (-1.0, -2.5))

fracture = st.fixed_dictionaries({
    "site": st.sampled_from(list(FRACTURE_SITES)),
    "months_ago": _number(0, 1200, (3.0, 0.0)),
    "low_trauma": st.booleans(),
})

z_score = _number(-7, 5, (-2.0,))

#: Vertebral levels (C1-C7, T1-T12, L1-L5), the thoracolumbar junction most often.
LEVELS = [f"C{i}" for i in range(1, 8)] + [f"T{i}" for i in range(1, 13)] + [f"L{i}" for i in range(1, 6)]
level = st.one_of(st.sampled_from(["T12", "L1", "T11", "L2"]), st.sampled_from(LEVELS))


@st.composite
def fracture_v2(draw) -> dict:
    """A fracture that may name its vertebral level (vertebrae only)."""
    f = draw(fracture)
    if f["site"] == "vertebra" and draw(st.booleans()):
        f["level"] = draw(level)
    return f


#: Classes weighted as a clinic sees them: bone medicines and anticoagulants most often.
_CLASSES = ["denosumab"] * 4 + ["bisphosphonate"] * 3 + ["anticoagulant"] * 2 + list(MEDICATION_CLASSES)


@st.composite
def medication(draw) -> dict:
    code = draw(st.sampled_from(_CLASSES))
    edges = (7.0, 6.0, 7.5) if code == "denosumab" else (0.0,)
    m = {"class": code,
         "months_on": draw(_optional(_number(0, 1200, (12.0,)) | st.integers(0, 120).map(float))),
         "months_since_last_dose": draw(_optional(_number(0, 14, edges) | _number(0, 1200)))}
    return m


surgery = st.fixed_dictionaries({
    "procedure": st.sampled_from(["hip_replacement", "hip_replacement", "knee_replacement", *SURGERY_PROCEDURES]),
    "side": st.sampled_from(SURGERY_SIDES),
    "months_ago": st.one_of(_number(0, 60, (12.0, 3.0)), _number(0, 24), _number(0, 1200)),
    "surgeon_cleared_impact": st.booleans(),
})

_COGNITION = ["none"] * 3 + ["mild"] * 2 + ["moderate"] * 2 + ["severe"]
_MENOPAUSE = ["premenopausal", "perimenopausal", "postmenopausal", "postmenopausal", "postmenopausal"]


def _v2_fields(draw, data: dict) -> None:
    """Add version-2 fields to a record dict, with the shares of the module docstring."""
    def sometimes(p: float) -> bool:
        return draw(st.integers(0, 99)) < 100 * p

    data["record_version"] = 2
    if sometimes(0.5):
        data["z_scores"] = draw(st.fixed_dictionaries({}, optional={
            "lumbar_spine": z_score, "femoral_neck": z_score, "total_hip": z_score}))
    if data["sex"] == "female" and sometimes(0.6):
        data["menopause"] = draw(st.sampled_from(_MENOPAUSE))
    if sometimes(0.6):
        data["medications"] = draw(st.lists(medication(), min_size=1, max_size=3))
    if sometimes(0.2):
        data["cancer"] = draw(st.fixed_dictionaries({"active": st.booleans()},
                                                    optional={"bone_metastases": st.sampled_from(list(BONE_METASTASES))}))
    if sometimes(0.35):
        data["surgeries"] = draw(st.lists(surgery, min_size=1, max_size=2))
    if sometimes(0.5):
        data["cognition"] = draw(st.sampled_from(_COGNITION))
    for key in ("lives_alone", "has_carer"):
        if sometimes(0.5):
            data[key] = draw(st.booleans())
    if sometimes(0.3):
        data["display_name"] = draw(st.from_regex(r"\A[A-Z][a-z]{1,8}( [A-Z][a-z]{1,10})?\Z"))


glucocorticoids = st.fixed_dictionaries({
    "mg_per_day": _number(0, 1000, (5.0, 7.5)),
    "months": _number(0, 1200, (3.0,)),
})


@st.composite
def record_dicts(draw) -> dict:
    """A dict that :func:`prescribe.records.parse_record` accepts (optional keys sometimes left out)."""
    data: dict = {
        "patient_id": draw(st.from_regex(r"\A[A-Z]{2,4}-[0-9]{1,6}\Z")),
        "age_years": draw(st.one_of(st.integers(18, 110), st.sampled_from([59, 60, 64, 65, 94, 95]))),
        "sex": draw(st.sampled_from(["female", "male"])),
        "body_mass_kg": draw(_number(25, 300)),
        "height_cm": draw(_number(100, 230)),
    }
    scores = draw(st.fixed_dictionaries({}, optional={
        "lumbar_spine": t_score, "femoral_neck": t_score, "total_hip": t_score}))
    if scores or draw(st.booleans()):
        data["t_scores"] = scores
    v2 = draw(st.booleans())
    fractures = draw(st.lists(fracture_v2() if v2 else fracture, max_size=4))
    if fractures or draw(st.booleans()):
        data["fractures"] = fractures
    optional = {
        "falls_past_year": st.one_of(st.integers(0, 4), st.integers(0, 1000)),
        "timed_up_and_go_s": _optional(_number(0, 600, (12.0,))),
        "chair_stand_30s": _optional(st.integers(0, 100) | st.integers(0, 20)),
        "tandem_stance_s": _optional(_number(0, 10, (10.0,))),
        "glucocorticoids": _optional(glucocorticoids),
        "conditions": st.lists(st.sampled_from(list(CONDITIONS)), unique=True, max_size=4),
        "pain_score": st.integers(0, 10),
    }
    for key, strategy in optional.items():
        if draw(st.booleans()):
            data[key] = draw(strategy)
    if v2:
        _v2_fields(draw, data)
    elif draw(st.integers(0, 9)) == 0:
        data["record_version"] = 1          # a version-1 record may say so
    return data


def valid_records() -> st.SearchStrategy[PatientRecord]:
    """Random valid :class:`PatientRecord` objects."""
    return record_dicts().map(parse_record)
