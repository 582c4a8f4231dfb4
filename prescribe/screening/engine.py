"""The screening engine: one rule library, two evaluators.

The rules (:mod:`.rules`, data files under ``prescribe/data/rules/screening``) are
evaluated either for one person (:func:`screen`, a plain per-record evaluator) or
for a whole caseload at once (:func:`screen_batch`, a vectorised numpy/pandas
evaluator over a DataFrame of flattened records).  Both compute the same derived
features (one function each, :func:`.features.record_features` and
:func:`.features.frame_features`), test the same conditions (:mod:`.conditions`)
and combine the fired rules' effects by the rules below,
so a person gets the same result either way (a property test checks every feature
and every result field of random records both ways).

How fired rules combine
-----------------------
- ``max_impact_level``: the lowest cap of all fired rules, 3 when none caps it.
- ``avoid``: the sorted union of the fired rules' movement patterns.
- ``refer``, ``falls_risk``, ``balance_first``, ``supervision``: true when any fired rule says so.
- ``bone_density_category``: the strongest category a fired rule sets; ``normal`` when a
  T-score was measured and no rule set one; ``unknown`` when no T-score was measured.
- ``flags``: one per fired rule, strongest severity first, then in rule-library order.
- ``cautions``: the standard cautions, then each fired rule's own, in flag order.

This module gives decision support only; a licensed clinician reviews every result.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from itertools import compress
from typing import Any

import numpy as np
import pandas as pd

from ..cautions import with_standard
from ..errors import InputError
from ..records import Flag, PatientRecord, ScreeningResult, lowest_score
from .batch_columns import FractureColumns
from .batch_io import records_to_frame
from .conditions import compile_scalar, evaluate_vector
from .features import _frame_features, _lowest_site, _text_column, record_features
from .rules import CATEGORY_RANK, OUTCOME_FEATURES, SEVERITY_RANK, Rule, RuleSet, load_rules

#: Columns of the frame :func:`screen_batch` returns (and of the results CSV).
RESULT_COLUMNS: tuple[str, ...] = (
    "patient_id", "bone_density_category", "falls_risk", "max_impact_level", "avoid", "refer",
    "balance_first", "supervision", "flags", "lowest_t_score", "lowest_t_score_site",
    "ruleset_version", "cautions", "density_reference", "lowest_z_score", "lowest_z_score_site",
    "max_pct_1rm", "carer_led", "hold_volume",
)
#: Separator of list cells in the results frame (avoid, flags).
LIST_SEP = ";"
#: Separator of the cautions cell.
CAUTION_SEP = " | "


def _unique_rows(matrix: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Distinct rows of a boolean matrix and, for each row, the index of its distinct row."""
    n, c = matrix.shape
    if n == 0:
        return np.zeros((0, c), dtype=bool), np.zeros(0, dtype=np.intp)
    if c <= 62:
        keys = matrix.astype(np.int64) @ np.left_shift(np.int64(1), np.arange(c, dtype=np.int64))
        uniq, inverse = np.unique(keys, return_inverse=True)
        rows = ((uniq[:, None] >> np.arange(c, dtype=np.int64)) & 1).astype(bool)
        return rows, np.asarray(inverse).reshape(-1)
    rows, inverse = np.unique(matrix, axis=0, return_inverse=True)
    return rows, np.asarray(inverse).reshape(-1)


@dataclass(frozen=True)
class Outcome:
    """What a set of fired rules means, before the per-person fields are added."""

    category: str | None
    falls_risk: bool
    max_impact_level: int
    avoid: tuple[str, ...]
    refer: bool
    balance_first: bool
    supervision: bool
    rules: tuple[str, ...]
    cautions: tuple[str, ...]
    max_pct_1rm: int | None = None
    carer_led: bool = False
    hold_volume: bool = False
    person_notes: tuple[str, ...] = ()
    lifted: tuple[str, ...] = ()     # fired rules whose held caps a recorded clearance lifted


class Engine:
    """A rule set compiled for both evaluators.

    Rules are kept strongest severity first, then in library order; bit ``i`` of a
    fired-rule mask stands for ``self.rules[i]``.
    """

    def __init__(self, ruleset: RuleSet):
        self.ruleset = ruleset
        self.version = ruleset.version
        order = sorted(range(len(ruleset.rules)), key=lambda i: (SEVERITY_RANK[ruleset.rules[i].severity], i))
        self.rules: tuple[Rule, ...] = tuple(ruleset.rules[i] for i in order)
        self._tests = [compile_scalar(r.when) for r in self.rules]
        # Rules that test the screening's own falls-risk finding run after the rules that make it.
        self._second = [any(f in OUTCOME_FEATURES for f in r.features) for r in self.rules]
        self._falls_rules = [i for i, r in enumerate(self.rules) if r.effect.falls_risk and not self._second[i]]
        self._bit = {r.id: 1 << i for i, r in enumerate(self.rules)}
        self._outcomes: dict[int, Outcome] = {}
        self._flags = {r.id: Flag(rule=r.id, severity=r.severity, message=r.message, source=r.source,
                                  title=r.title, max_impact_level=r.effect.max_impact_level,
                                  avoid=list(r.effect.avoid), until_cleared=r.effect.until_cleared)
                       for r in self.rules}

    # -- shared: fired rules -> outcome ------------------------------------------------
    def outcome(self, mask: int, cleared: bool = False) -> Outcome:
        """The combined effect of the rules whose bits are set in ``mask`` (cached).

        With ``cleared`` (a clinician has recorded the clearance), what a rule held until then
        (its referral, caps and volume hold) is lifted: :meth:`prescribe.screening.rules.Effect.once_cleared`.
        """
        key = (mask, cleared)
        hit = self._outcomes.get(key)
        if hit is not None:
            return hit
        fired = [r for i, r in enumerate(self.rules) if mask >> i & 1]
        effects = [r.effect.once_cleared() if cleared else r.effect for r in fired]
        caps = [e.max_impact_level for e in effects if e.max_impact_level is not None]
        pcts = [e.max_pct_1rm for e in effects if e.max_pct_1rm is not None]
        cats = [e.category for e in effects if e.category]
        out = Outcome(
            category=max(cats, key=CATEGORY_RANK.__getitem__) if cats else None,
            falls_risk=any(e.falls_risk for e in effects),
            max_impact_level=min(caps, default=3),
            avoid=tuple(sorted({a for e in effects for a in e.avoid})),
            refer=any(e.refer for e in effects),
            balance_first=any(e.balance_first for e in effects),
            supervision=any(e.supervision for e in effects),
            rules=tuple(r.id for r in fired),
            cautions=tuple(with_standard([e.caution for e in effects if e.caution])),
            max_pct_1rm=min(pcts) if pcts else None,
            carer_led=any(e.carer_led for e in effects),
            hold_volume=any(e.hold_volume for e in effects),
            person_notes=tuple(dict.fromkeys(e.person_note for e in effects if e.person_note)),
            lifted=tuple(r.id for r in fired if cleared and r.effect.until_cleared),
        )
        self._outcomes[key] = out
        return out

    def mask_of(self, rule_ids: list[str] | tuple[str, ...]) -> int:
        try:
            return sum(self._bit[r] for r in rule_ids)
        except KeyError as exc:
            raise InputError.single("flags", exc.args[0], "rule ids of ruleset " + self.version) from None

    # -- per-record evaluator ----------------------------------------------------------
    def fired_mask(self, feats: dict) -> int:
        mask = 0
        second = self._second
        for i, test in enumerate(self._tests):
            if not second[i] and test(feats):
                mask |= 1 << i
        feats["falls_risk"] = any(mask >> i & 1 for i in self._falls_rules)
        for i, test in enumerate(self._tests):
            if second[i] and test(feats):
                mask |= 1 << i
        return mask

    def screen_dict(self, rec: dict, cleared: bool = False) -> dict[str, Any]:
        """Plain-dict screening result of one record dict (no validation; used by the benchmark)."""
        feats = record_features(rec)
        out = self.outcome(self.fired_mask(feats), cleared)
        lowest = feats["lowest_t_score"]
        site = _site_of(rec.get("t_scores"))
        lowest_z = feats["lowest_z_score"]
        reference = feats["density_reference"]
        # The WHO categories are for T-scores; before the menopause and under 50 only a Z-score
        # rule names a category (ISCD 2019), so no rule means "unknown" there.
        category = out.category or ("normal" if lowest is not None and reference == "t_score" else "unknown")
        return {"patient_id": rec["patient_id"], "bone_density_category": category,
                "falls_risk": out.falls_risk, "max_impact_level": out.max_impact_level,
                "avoid": list(out.avoid), "refer": out.refer, "rules": out.rules,
                "cautions": list(out.cautions), "lowest_t_score": lowest, "lowest_t_score_site": site,
                "balance_first": out.balance_first, "supervision": out.supervision,
                "ruleset_version": self.version, "density_reference": reference,
                "lowest_z_score": lowest_z, "lowest_z_score_site": _site_of(rec.get("z_scores")),
                "max_pct_1rm": out.max_pct_1rm, "carer_led": out.carer_led, "hold_volume": out.hold_volume,
                "person_notes": list(out.person_notes), "cleared": cleared, "lifted": out.lifted}

    def _flag_list(self, rules: tuple[str, ...], lifted: tuple[str, ...]) -> list[Flag]:
        return [self._flags[r].model_copy(update={"lifted_by_clearance": True}) if r in lifted else self._flags[r]
                for r in rules]

    def screen(self, record: PatientRecord, cleared: bool = False) -> ScreeningResult:
        d = self.screen_dict(record.model_dump(), cleared)
        d["flags"] = self._flag_list(d.pop("rules"), d.pop("lifted"))
        return ScreeningResult(**d)

    # -- vectorised evaluator ----------------------------------------------------------
    def _fired_patterns(self, feats: dict[str, np.ndarray], n: int) -> tuple[np.ndarray, np.ndarray]:
        """Distinct fired-rule patterns (patterns x rules, bool) and each row's pattern index.

        Up to 64 rules, each row's fired rules are packed into one integer (bit ``i`` for
        ``self.rules[i]``) and the integers are grouped by hashing: no (rows x rules) matrix
        is built and nothing is sorted.  Patterns come in order of first appearance.
        """
        count = len(self.rules)
        self._vector_falls_risk(feats, n)
        if count > 64:
            return _unique_rows(self._fired(feats, n))
        dtype = np.uint32 if count <= 32 else np.uint64
        keys = np.zeros(n, dtype=dtype)
        for i, r in enumerate(self.rules):
            keys |= evaluate_vector(r.when, feats).astype(dtype) << dtype(i)
        inverse, uniq = pd.factorize(keys)
        rows = ((np.asarray(uniq, dtype=dtype)[:, None] >> np.arange(count, dtype=dtype)) & 1).astype(bool)
        return rows, np.asarray(inverse, dtype=np.intp)

    def _vector_falls_risk(self, feats: dict[str, np.ndarray], n: int) -> None:
        """The first pass's falls-risk finding, for the rules that test it (see :meth:`fired_mask`)."""
        risk = np.zeros(n, dtype=bool)
        for i in self._falls_rules:
            risk |= evaluate_vector(self.rules[i].when, feats)
        feats["falls_risk"] = risk

    def _fired(self, feats: dict[str, np.ndarray], n: int) -> np.ndarray:
        out = np.zeros((n, len(self.rules)), dtype=bool)
        for i, r in enumerate(self.rules):
            out[:, i] = evaluate_vector(r.when, feats)
        return out

    def _combine(self, patterns: np.ndarray) -> dict[str, list | np.ndarray]:
        """The combined effects of each distinct fired-rule pattern (patterns x rules, bool), by
        the rules of :meth:`outcome` (the property tests keep the two identical): numbers and
        yes/no effects as reductions over the rules, texts joined in rule (or code) order."""
        rules = self.rules
        marks = patterns.reshape(len(patterns), len(rules))

        def says(values) -> np.ndarray:
            return np.array(values, dtype=bool).reshape(len(rules))

        def any_of(flag: str) -> np.ndarray:
            return (marks & says([getattr(r.effect, flag) for r in rules])).any(axis=1)

        def joined(texts: list[str], chosen: np.ndarray, sep: str) -> list[str]:
            return [sep.join(compress(texts, row)) for row in chosen.tolist()]

        caps = np.array([3 if r.effect.max_impact_level is None else r.effect.max_impact_level for r in rules])
        ranks = np.array([CATEGORY_RANK[r.effect.category] if r.effect.category else -1 for r in rules])
        categories = {rank: name for name, rank in CATEGORY_RANK.items()}
        rank = np.where(marks, ranks, -1).max(axis=1, initial=-1)
        codes = sorted({a for r in rules for a in r.effect.avoid})
        avoids = np.array([[a in r.effect.avoid for a in codes] for r in rules], dtype=bool).reshape(len(rules),
                                                                                                   len(codes))
        avoided = (marks.astype(np.int64) @ avoids.astype(np.int64)) > 0
        with_caution = [i for i, r in enumerate(rules) if r.effect.caution]
        texts = [rules[i].effect.caution for i in with_caution]
        if len(set(texts)) == len(texts) and not set(texts) & set(with_standard()):
            head = CAUTION_SEP.join(with_standard())    # distinct texts: no duplicate to drop
            cautions = [head + CAUTION_SEP + extra if extra else head
                        for extra in joined(texts, marks[:, with_caution], CAUTION_SEP)]
        else:
            cautions = [CAUTION_SEP.join(with_standard(list(compress(texts, row))))
                        for row in marks[:, with_caution].tolist()]
        pcts = np.array([101 if r.effect.max_pct_1rm is None else r.effect.max_pct_1rm for r in rules])
        pct = np.where(marks, pcts, 101).min(axis=1, initial=101)
        return {
            "max_pct_1rm": np.where(pct > 100, np.nan, pct.astype(float)),
            "carer_led": any_of("carer_led"), "hold_volume": any_of("hold_volume"),
            "category": [categories.get(k) for k in rank.tolist()],
            "max_impact_level": np.where(marks, caps, 3).min(axis=1, initial=3),
            "falls_risk": any_of("falls_risk"), "refer": any_of("refer"),
            "balance_first": any_of("balance_first"), "supervision": any_of("supervision"),
            "avoid": joined(codes, avoided, LIST_SEP),
            "flags": joined([r.id for r in rules], marks, LIST_SEP),
            "cautions": cautions,
        }

    def screen_frame(self, df: pd.DataFrame, fractures: FractureColumns | None = None) -> pd.DataFrame:
        """The vectorised evaluator: one result row per input row (see :func:`screen_batch`).

        The conditions are evaluated on whole feature arrays; the fired rules' effects are then
        combined once per distinct pattern of fired rules (a caseload has far fewer patterns than
        people, :meth:`_combine`) and spread back to the rows.
        """
        n = len(df)
        feats, tscores, zscores = _frame_features(df, fractures)
        rows, inverse = self._fired_patterns(feats, n)
        lowest, site = _lowest_site(tscores, feats["lowest_t_score"])
        effect = self._combine(rows)

        def per_pattern(values, dtype) -> np.ndarray:
            return np.asarray(values, dtype=dtype).reshape(len(rows))[inverse]

        category = per_pattern(effect["category"], object)
        none = np.equal(category, None)
        by_t = feats["density_reference"] == "t_score"
        category[none] = np.where(np.isnan(lowest[none]) | ~by_t[none], "unknown", "normal")
        lowest_z, site_z = _lowest_site(zscores, feats["lowest_z_score"])
        columns = {
            "patient_id": _text_column(df, "patient_id", n).copy(),
            "bone_density_category": category,
            "falls_risk": per_pattern(effect["falls_risk"], bool),
            "max_impact_level": per_pattern(effect["max_impact_level"], np.int64),
            "avoid": per_pattern(effect["avoid"], object),
            "refer": per_pattern(effect["refer"], bool),
            "balance_first": per_pattern(effect["balance_first"], bool),
            "supervision": per_pattern(effect["supervision"], bool),
            "flags": per_pattern(effect["flags"], object),
            "lowest_t_score": lowest,
            "lowest_t_score_site": site,
            "ruleset_version": _constant_text(n, self.version),
            "cautions": per_pattern(effect["cautions"], object),
            "max_pct_1rm": per_pattern(effect["max_pct_1rm"], float),
            "carer_led": per_pattern(effect["carer_led"], bool),
            "hold_volume": per_pattern(effect["hold_volume"], bool),
            "density_reference": np.asarray(feats["density_reference"], dtype=object),
            "lowest_z_score": lowest_z,
            "lowest_z_score_site": site_z,
        }
        # Text columns stay object arrays (no per-cell type inference on 100k rows).
        # copy=False: each column keeps its own array (no consolidation copy into 2-D blocks).
        return pd.DataFrame({k: pd.Series(v, index=df.index, dtype=v.dtype, copy=False) for k, v in columns.items()},
                            columns=list(RESULT_COLUMNS), copy=False)

    def results_from_frame(self, out: pd.DataFrame) -> list[ScreeningResult]:
        """ScreeningResult objects from the frame :meth:`screen_frame` returned."""
        results = []
        for row in out.to_dict("records"):
            ids = [r for r in str(row["flags"]).split(LIST_SEP) if r]
            o = self.outcome(self.mask_of(ids))
            lowest = row["lowest_t_score"]
            lowest = None if lowest is None or np.isnan(lowest) else float(lowest)
            results.append(ScreeningResult(
                patient_id=row["patient_id"], bone_density_category=row["bone_density_category"],
                falls_risk=bool(row["falls_risk"]), max_impact_level=int(row["max_impact_level"]),
                avoid=[a for a in str(row["avoid"]).split(LIST_SEP) if a], refer=bool(row["refer"]),
                flags=[self._flags[r] for r in o.rules], cautions=list(o.cautions),
                max_pct_1rm=None if np.isnan(row["max_pct_1rm"]) else int(row["max_pct_1rm"]),
                carer_led=bool(row["carer_led"]), hold_volume=bool(row["hold_volume"]),
                person_notes=list(o.person_notes),
                lowest_t_score=lowest, lowest_t_score_site=_text_or_none(row["lowest_t_score_site"]),
                balance_first=bool(row["balance_first"]), supervision=bool(row["supervision"]),
                ruleset_version=row["ruleset_version"], density_reference=row["density_reference"],
                lowest_z_score=_number_or_none(row["lowest_z_score"]),
                lowest_z_score_site=_text_or_none(row["lowest_z_score_site"])))
        return results


def _constant_text(n: int, text: str) -> np.ndarray:
    """An object array of ``n`` references to one string (``np.full`` converts cell by cell)."""
    out = np.empty(n, dtype=object)
    out[:] = text
    return out


def _number_or_none(value: Any) -> float | None:
    return None if value is None or np.isnan(value) else float(value)


def _site_of(scores: dict | None) -> str | None:
    """The site of the lowest score (:func:`prescribe.records.lowest_score`); None when none was measured."""
    found = lowest_score(scores)
    return None if found is None else found[0]


def _text_or_none(value: Any) -> str | None:
    return value if isinstance(value, str) and value else None


@lru_cache(maxsize=1)
def default_engine() -> Engine:
    """The engine over the shipped rule library (loaded and validated once)."""
    return Engine(load_rules())


def engine_for(rules: RuleSet | None) -> Engine:
    return default_engine() if rules is None else Engine(rules)


def screen(record: PatientRecord, rules: RuleSet | None = None, *, cleared: bool = False) -> ScreeningResult:
    """Screen one person (per-record evaluator).

    Parameters
    ----------
    record : PatientRecord
        A validated record.
    rules : RuleSet, optional
        Another rule set (for example a draft library); the shipped one when omitted.
    cleared : bool
        A clinician has recorded the clearance: the referral, caps and volume hold that the
        fired rules held until then are lifted (their flags say so); everything else stands.

    Returns
    -------
    ScreeningResult
        Category, falls risk, impact cap (0-3), patterns to avoid, referral, flags with
        sources, and the cautions.

    References
    ----------
    The rule files cite a source for each rule; see ``docs/rules.md``.
    """
    return engine_for(rules).screen(record, cleared)


def screen_batch(df: pd.DataFrame, rules: RuleSet | None = None,
                 fractures: FractureColumns | None = None) -> pd.DataFrame:
    """Screen a caseload at once (vectorised evaluator).

    Parameters
    ----------
    df : pandas.DataFrame
        Flattened, validated records (:func:`prescribe.screening.batch_io.read_batch_csv` or
        :func:`prescribe.screening.batch_io.records_to_frame`).
    rules : RuleSet, optional
        Another rule set; the shipped one when omitted.
    fractures : FractureColumns, optional
        The per-person fracture figures already read from the cells (the batch reader's
        :class:`prescribe.screening.batch_io.Caseload` carries them); read from ``df`` when omitted.

    Returns
    -------
    pandas.DataFrame
        One row a person, columns :data:`RESULT_COLUMNS`; ``avoid`` and ``flags`` are
        ``;``-joined, ``cautions`` is ``' | '``-joined.
    """
    return engine_for(rules).screen_frame(df, fractures)


def results_from_frame(out: pd.DataFrame, rules: RuleSet | None = None) -> list[ScreeningResult]:
    """Turn :func:`screen_batch`'s frame back into :class:`ScreeningResult` objects."""
    return engine_for(rules).results_from_frame(out)


def screen_many(records: list[PatientRecord], rules: RuleSet | None = None) -> list[ScreeningResult]:
    """Screen many people through the vectorised evaluator; same results as :func:`screen` each."""
    engine = engine_for(rules)
    return engine.results_from_frame(engine.screen_frame(records_to_frame(records)))
