"""Hypothesis strategies shared by the tests: random valid patient records.

``valid_records()`` draws :class:`prescribe.records.PatientRecord` objects covering
every field, with the published screening boundaries (T-score -1 and -2.5, TUG 12 s,
tandem 10 s, glucocorticoids 5 mg/day and 3 months, pain 5/10, fracture 3 months)
drawn often, so properties are checked at the edges as well as in between.
"""

from __future__ import annotations

from hypothesis import strategies as st

from prescribe.records import CONDITIONS, FRACTURE_SITES, PatientRecord, parse_record


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
    fractures = draw(st.lists(fracture, max_size=4))
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
    return data


def valid_records() -> st.SearchStrategy[PatientRecord]:
    """Random valid :class:`PatientRecord` objects."""
    return record_dicts().map(parse_record)
