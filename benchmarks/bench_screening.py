"""Benchmark: screen 100,000 invented patients with the vectorised evaluator, and the same
people with the per-record evaluator in a plain Python loop, in the same run.

Neither timing includes pydantic validation: the batch evaluator gets a DataFrame of
flattened records, the loop gets plain record dicts (the ``PatientRecord.model_dump()``
shape), both built before the clocks start.  The batch timing includes parsing the
compact fracture and condition cells; the loop timing includes building each result dict.
A third line times the batch evaluator given the fracture figures the caseload reader has
already read (``prescribe.screening.batch_io.Caseload.fractures``), the path ``screen --batch`` takes.

Goal: 100k in under 0.5 s, and at least 50x faster than the loop. Both sides are measured\nalike: one warm-up call each, then five timed calls each; medians are compared.

With ``--v2`` the invented people also have the version-2 columns (medicines, operations,
Z-scores, menopause, cancer, cognition, living situation; shares like an invented clinic's), so
the vectorised version-2 features are measured too.

Run: ``.venv/bin/python benchmarks/bench_screening.py [N] [--v2]``
"""

from __future__ import annotations

import os
import statistics
import sys
import time

import numpy as np
import pandas as pd

from prescribe.screening.batch_columns import LIST_COLUMNS, fracture_columns, parse_bool_cell, parse_items
from prescribe.records import CONDITIONS, FRACTURE_SITES
from prescribe.records import parse_record
from prescribe.screening import default_engine, screen

_ARGS = [a for a in sys.argv[1:] if not a.startswith("--")]
N = int(_ARGS[0]) if _ARGS else 100_000
V2 = "--v2" in sys.argv
LOOP_SAMPLE = 10_000  # the loop runs on this many when N is larger, and is scaled
SEED = 20261201


def _v2_columns(n: int, rng: np.random.Generator, sex: np.ndarray, age: np.ndarray) -> dict[str, np.ndarray]:
    """Version-2 columns for ``n`` invented people (invented shares, not sourced)."""
    def pick(choices: list[str], p: list[float]) -> np.ndarray:
        return np.array(choices, dtype=object)[rng.choice(len(choices), size=n, p=p)]

    meds = [f"denosumab:{rng.integers(1, 60)}:{rng.integers(0, 12)}" for _ in range(40)] + \
        [f"bisphosphonate:{rng.integers(1, 60)}:0" for _ in range(20)] + ["anticoagulant::0", "sedative_hypnotic:12:0",
                                                                          "aromatase_inhibitor:24:0;anticoagulant::0"]
    medications = np.full(n, "", dtype=object)
    on = np.flatnonzero(rng.random(n) < 0.5)
    medications[on] = np.array(meds, dtype=object)[rng.integers(len(meds), size=len(on))]
    ops = [f"{p}:{s}:{m}:{c}" for p in ("hip_replacement", "knee_replacement") for s in ("left", "right")
           for m in (3, 8, 14, 30) for c in "yn"] + ["spinal_fusion:none:24:n", "vertebroplasty:none:6:n"]
    surgeries = np.full(n, "", dtype=object)
    on = np.flatnonzero(rng.random(n) < 0.2)
    surgeries[on] = np.array(ops, dtype=object)[rng.integers(len(ops), size=len(on))]
    cancer = rng.random(n) < 0.1
    z = np.round(rng.normal(-1.0, 1.0, n).clip(-5, 3), 1)
    z[rng.random(n) < 0.7] = np.nan
    return {
        "record_version": np.full(n, 2.0),
        "z_score_lumbar_spine": z, "z_score_femoral_neck": np.full(n, np.nan), "z_score_total_hip": np.full(n, np.nan),
        "menopause": np.where(sex == "female", pick(["", "premenopausal", "perimenopausal", "postmenopausal"],
                                                    [0.3, 0.05, 0.05, 0.6]), "").astype(object),
        "medications": medications,
        "cancer_active": np.where(cancer, rng.random(n) < 0.5, None).astype(object),
        "cancer_bone_metastases": np.where(cancer, pick(["excluded", "unknown", "present"], [0.5, 0.4, 0.1]),
                                           "").astype(object),
        "surgeries": surgeries,
        "cognition": pick(["", "none", "mild", "moderate", "severe"], [0.4, 0.35, 0.15, 0.07, 0.03]),
        "lives_alone": pick(["", "true", "false"], [0.4, 0.25, 0.35]),
        "has_carer": pick(["", "true", "false"], [0.5, 0.2, 0.3]),
    }


def invented_caseload(n: int, seed: int = SEED, v2: bool = False) -> pd.DataFrame:
    """A DataFrame of ``n`` random valid flattened records (invented people); ``v2``: with the
    version-2 columns."""
    rng = np.random.default_rng(seed)

    def maybe(values: np.ndarray, p_missing: float) -> np.ndarray:
        values = values.astype("float64")
        values[rng.random(n) < p_missing] = np.nan
        return values

    sites = np.array(list(FRACTURE_SITES))
    fractures = np.full(n, "", dtype=object)
    has_fx = np.flatnonzero(rng.random(n) < 0.35)
    counts = rng.integers(1, 4, size=len(has_fx))
    for row, k in zip(has_fx, counts):
        fractures[row] = ";".join(
            f"{sites[rng.integers(len(sites))]}:{rng.integers(0, 240)}:{'y' if rng.random() < 0.6 else 'n'}"
            for _ in range(k))
    codes = np.array(list(CONDITIONS))
    cond_bits = rng.random((n, len(codes))) < 0.08
    conditions = np.array([";".join(codes[row]) for row in cond_bits], dtype=object)
    gc = rng.random(n) < 0.15
    frame = pd.DataFrame({
        "patient_id": np.char.add("INV-", np.arange(n).astype(str)).astype(object),
        "age_years": rng.integers(40, 96, n),
        "sex": np.where(rng.random(n) < 0.75, "female", "male").astype(object),
        "body_mass_kg": np.round(rng.normal(68, 12, n).clip(35, 150), 1),
        "height_cm": np.round(rng.normal(163, 8, n).clip(135, 200), 1),
        "t_score_lumbar_spine": maybe(np.round(rng.normal(-1.8, 1.0, n).clip(-6, 3), 1), 0.2),
        "t_score_femoral_neck": maybe(np.round(rng.normal(-1.9, 0.9, n).clip(-6, 3), 1), 0.2),
        "t_score_total_hip": maybe(np.round(rng.normal(-1.5, 0.9, n).clip(-6, 3), 1), 0.3),
        "fractures": fractures,
        "falls_past_year": rng.poisson(0.4, n),
        "timed_up_and_go_s": maybe(np.round(rng.gamma(9, 1.2, n), 1), 0.3),
        "chair_stand_30s": maybe(rng.integers(3, 22, n), 0.3),
        "tandem_stance_s": maybe(np.round(rng.uniform(0, 10, n), 1), 0.3),
        "glucocorticoids_mg_per_day": np.where(gc, np.round(rng.uniform(1, 20, n), 1), np.nan),
        "glucocorticoids_months": np.where(gc, rng.integers(1, 60, n).astype(float), np.nan),
        "conditions": conditions,
        "pain_score": rng.integers(0, 8, n),
    })
    if v2:
        extra = _v2_columns(n, rng, frame["sex"].to_numpy(), frame["age_years"].to_numpy())
        for col in ("lives_alone", "has_carer"):       # as the reader types them: True, False or None
            extra[col] = np.array([parse_bool_cell(c) for c in extra[col].tolist()], dtype=object)
        frame = frame.assign(**extra)
    return frame


def frame_to_record_dicts(df: pd.DataFrame) -> list[dict]:
    """Plain record dicts (model_dump shape) for the loop, without pydantic."""
    out = []
    for row in df.to_dict("records"):
        def opt(v):
            return None if isinstance(v, float) and np.isnan(v) else v
        fx = []
        if row["fractures"]:
            for item in row["fractures"].split(";"):
                site, months, lt = item.split(":")
                fx.append({"site": site, "months_ago": float(months), "low_trauma": lt == "y"})
        mg = opt(row["glucocorticoids_mg_per_day"])
        out.append({
            "patient_id": row["patient_id"], "age_years": int(row["age_years"]), "sex": row["sex"],
            "body_mass_kg": row["body_mass_kg"], "height_cm": row["height_cm"],
            "t_scores": {s: opt(row[f"t_score_{s}"]) for s in ("lumbar_spine", "femoral_neck", "total_hip")},
            "fractures": fx, "falls_past_year": int(row["falls_past_year"]),
            "timed_up_and_go_s": opt(row["timed_up_and_go_s"]),
            "chair_stand_30s": None if opt(row["chair_stand_30s"]) is None else int(row["chair_stand_30s"]),
            "tandem_stance_s": opt(row["tandem_stance_s"]),
            "glucocorticoids": None if mg is None else {"mg_per_day": mg, "months": row["glucocorticoids_months"]},
            "conditions": [c for c in row["conditions"].split(";") if c],
            "pain_score": int(row["pain_score"]),
        })
        if "record_version" in row:                     # the version-2 columns (``--v2``)
            d = out[-1]
            d["z_scores"] = {s: opt(row[f"z_score_{s}"]) for s in ("lumbar_spine", "femoral_neck", "total_hip")}
            for col in ("menopause", "cognition"):
                d[col] = row[col] or None
            for col in ("medications", "surgeries"):
                parse_item, to_dict, _ = LIST_COLUMNS[col]
                d[col] = [to_dict(i) for i in parse_items(row[col], parse_item)]
            if row["cancer_active"] is not None:
                d["cancer"] = {"active": bool(row["cancer_active"]), "bone_metastases": row["cancer_bone_metastases"]}
            for col in ("lives_alone", "has_carer"):
                d[col] = row[col]
    return out


REPEATS = 5


def _timed(fn, repeats: int = REPEATS) -> tuple[list[float], list[float], object]:
    """Wall and CPU seconds of ``repeats`` calls of ``fn`` after one warm-up call."""
    out = fn()  # warm-up: imports, caches (both sides get one)
    walls, cpus = [], []
    for _ in range(repeats):
        t0, c0 = time.perf_counter(), time.process_time()
        out = fn()
        walls.append(time.perf_counter() - t0)
        cpus.append(time.process_time() - c0)
    return walls, cpus, out


def main() -> int:
    engine = default_engine()
    df = invented_caseload(N, v2=V2)
    m = min(N, LOOP_SAMPLE)
    dicts = frame_to_record_dicts(df.head(m))
    records = [parse_record(d) for d in dicts]

    # Both sides measured alike: one warm-up call each (which fills any cache either keeps),
    # then REPEATS timed calls each; the median is quoted, min and max shown.
    b_wall, b_cpu, result = _timed(lambda: engine.screen_frame(df))
    # The command's path: the caseload reader has already read the fracture cells into typed
    # columns (prescribe.screening.batch_io.Caseload), so the screening gets those instead of the text.
    typed, _, _ = fracture_columns(df["fractures"].to_numpy(dtype=object))
    t_wall, t_cpu, typed_result = _timed(lambda: engine.screen_frame(df, typed))
    l_wall, l_cpu, loop = _timed(lambda: [engine.screen_dict(d) for d in dicts])
    a_wall, a_cpu, _ = _timed(lambda: [screen(r) for r in records])
    scale = N / m
    med = statistics.median

    agree = all(
        (a["bone_density_category"], a["max_impact_level"], ";".join(a["rules"]), ";".join(a["avoid"]))
        == (b.bone_density_category, b.max_impact_level, b.flags, b.avoid)
        for a, b in zip(loop, result.head(m).itertuples()))

    def span(xs, k=1.0):
        return f"median {med(xs) * k:.3f} s (min {min(xs) * k:.3f}, max {max(xs) * k:.3f})"

    how = "measured" if m == N else f"measured on {m:,}, scaled x{scale:g}"
    print(f"patients: {N:,} invented (seed {SEED}{', with the version-2 columns' if V2 else ''}); "
          f"rules: {len(engine.rules)} ({engine.version})")
    print(f"each side: 1 warm-up call, then {REPEATS} timed calls; timings exclude pydantic validation "
          "in both; the batch includes parsing the fracture/condition cells")
    print(f"screen_batch (vectorised), {N:,}: wall {span(b_wall)}; CPU {span(b_cpu)}  goal < 0.5 s: "
          f"{'met' if med(b_wall) < 0.5 else 'NOT met'} (median wall)")
    print(f"screen_batch with the reader's typed fracture columns (the command's path), {N:,}: "
          f"wall {span(t_wall)}; CPU {span(t_cpu)}; ratio loop/this {med(l_wall) * scale / med(t_wall):.1f}x wall")
    print(f"per-record loop (scalar evaluator), {N:,} ({how}): wall {span(l_wall, scale)}; CPU {span(l_cpu, scale)}")
    ratio, ratio_cpu = med(l_wall) * scale / med(b_wall), med(l_cpu) * scale / med(b_cpu)
    print(f"ratio loop/batch (medians): {ratio:.1f}x wall, {ratio_cpu:.1f}x CPU  goal >= 50x: "
          f"{'met' if ratio >= 50 else 'NOT met'} (wall), {'met' if ratio_cpu >= 50 else 'NOT met'} (CPU)")
    print(f"per-record public API screen(record), {N:,} ({how}): wall {span(a_wall, scale)}; "
          f"ratio {med(a_wall) * scale / med(b_wall):.1f}x wall")
    print(f"load average while running: {os.getloadavg()[0]:.1f} (wall times suffer on a busy machine; "
          "CPU time is this process's own)")
    print(f"results agree on the {m:,} looped: {agree}")
    print(f"distinct fired-rule patterns: {result['flags'].nunique():,}")
    same = typed_result.equals(result)
    print(f"typed fracture columns give the same results frame: {same}")
    return 0 if agree and same else 1


if __name__ == "__main__":
    sys.exit(main())
