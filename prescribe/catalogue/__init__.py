"""The exercise catalogue: entries with their bone-loading figures and sources.

The catalogue is a data file (``prescribe/data/exercises.toml``); every entry names
the source of its load figure.  Loading a malformed catalogue raises
:class:`~prescribe.errors.CatalogueError` naming the entry and the field.

Impact levels (PRODUCT.md) follow from force, not from the name:

* level 0, no impact: the feet stay in contact (``ground_contact = true``);
* level 1: peak ground reaction force below 2.0 BW;
* level 2: 2.0 to 4.0 BW, both boundaries included;
* level 3: above 4.0 BW.

Each entry may carry its start and end position as joint angles (:mod:`.poses`), drawn
as SVG by :mod:`.drawings`.
"""

from __future__ import annotations

import tomllib
from functools import lru_cache
from pathlib import Path
from typing import Any, Iterable, Iterator, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, ValidationError, model_validator

from ..errors import CatalogueError, InputError
from ..languages import N_
from .poses import Pose
from ..records import MOVEMENT_PATTERNS

DEFAULT_PATH = Path(__file__).parent.parent / "data" / "exercises.toml"

CATEGORIES: dict[str, str] = {
    "impact": "Weight-bearing impact work at levels 1-3 (walking, stamps, heel drops, jumps, hops).",
    "resistance": "Progressive resistance training: main lifts, their regressions and accessories.",
    "balance": "Static and dynamic balance practice to reduce the risk of falls.",
    "posture": "Posture and upper-back mobility work.",
    "back_extensor": "Strengthening of the muscles that extend the spine.",
}
DIRECTIONS: tuple[str, ...] = ("vertical", "forward_back", "side_to_side", "rotational")
DOSE_UNITS: tuple[str, ...] = ("impacts", "reps", "seconds", "minutes")
BALANCE_DEMANDS: tuple[str, ...] = ("none", "low", "moderate", "high")
SOURCE_KINDS: tuple[str, ...] = ("force_plate", "model", "estimate")
IMPACT_LEVEL_LABELS: dict[int, str] = {0: N_("no impact"), 1: N_("low impact"), 2: N_("moderate impact"),
                                       3: N_("high impact")}

#: Band edges of the impact levels [BW]: below LOW -> 1; LOW..HIGH inclusive -> 2; above HIGH -> 3.
LEVEL_2_FROM_BW = 2.0
LEVEL_3_ABOVE_BW = 4.0

Direction = Literal[tuple(DIRECTIONS)]  # type: ignore[valid-type]
Pattern = Literal[tuple(MOVEMENT_PATTERNS)]  # type: ignore[valid-type]


def impact_level_for_grf(peak_grf_bw, ground_contact=False):
    """Impact level (0-3) of a movement from its peak ground reaction force.

    Parameters
    ----------
    peak_grf_bw : float or array_like
        Peak vertical ground reaction force [BW, multiples of body weight], >= 0.
    ground_contact : bool or array_like of bool, default False
        True where the feet stay in contact with the ground (no landing): level 0
        whatever the force (a sit-to-stand can exceed 1 BW).

    Returns
    -------
    int or numpy.ndarray of int
        0 where ``ground_contact``; otherwise 1 below 2.0 BW, 2 from 2.0 to 4.0 BW
        inclusive, 3 above 4.0 BW.  Same shape as the broadcast inputs.

    Raises
    ------
    InputError
        If a force is negative, NaN or infinite.

    References
    ----------
    Bands of PRODUCT.md (our scale).  Forceful heel drops (4.9 BW, Int J Sci Technol
    Soc 2021, 9:294-300) and stamps at RPE 8 (4.4-4.6 BW, Ryan, Clissold & Winwood
    2021, Sports Injr Med 5:168) fall in level 3; stamps at RPE 5 (2.9-3.1 BW) in 2.
    """
    grf = np.asarray(peak_grf_bw, dtype=float)
    bad = ~np.isfinite(grf) | (grf < 0)
    if np.any(bad):
        value = grf[bad].flat[0] if grf.ndim else float(grf)
        raise InputError.single("peak_grf_bw", float(value), "a finite number of body weights >= 0")
    contact = np.asarray(ground_contact, dtype=bool)
    level = np.where(grf < LEVEL_2_FROM_BW, 1, np.where(grf <= LEVEL_3_ABOVE_BW, 2, 3))
    level = np.where(contact, 0, level)
    if level.ndim == 0:
        return int(level)
    return level.astype(int)


class ModelInputs(BaseModel):
    """Inputs of the landing model from which an entry's force was estimated."""

    model_config = ConfigDict(frozen=True, extra="forbid")

    drop_height_m: float = Field(gt=0, le=2.0)
    contact_time_s: float = Field(gt=0, le=2.0)
    rebound: bool = False
    rise_time_s: float | None = Field(default=None, gt=0, le=1.0)


class Exercise(BaseModel):
    """One catalogue entry.  Frozen; build through :func:`load_catalogue`."""

    model_config = ConfigDict(frozen=True, extra="forbid")

    exercise_id: str = Field(pattern=r"^[a-z][a-z0-9_]{1,63}$")
    name: str = Field(min_length=2, max_length=80)
    category: Literal[tuple(CATEGORIES)]  # type: ignore[valid-type]
    impact_level: int = Field(ge=0, le=3)
    ground_contact: bool
    peak_grf_bw: float = Field(ge=0, le=20)
    peak_grf_range_bw: tuple[float, float]
    loading_rate_bw_s: float | None = Field(default=None, gt=0, le=2000)
    directions: tuple[Direction, ...] = ()
    patterns: tuple[Pattern, ...] = ()
    balance_demand: Literal[tuple(BALANCE_DEMANDS)]  # type: ignore[valid-type]
    equipment: tuple[str, ...] = ()
    regression: str | None = None
    progression: str | None = None
    dose_unit: Literal[tuple(DOSE_UNITS)]  # type: ignore[valid-type]
    loaded_by_1rm: bool = False
    grf_plus_external_load: bool = False
    spine_sparing: bool = False
    instructions: str = Field(min_length=10)
    should_feel: str = Field(min_length=5)
    source: str = Field(min_length=5)
    source_kind: Literal[tuple(SOURCE_KINDS)]  # type: ignore[valid-type]
    model_inputs: ModelInputs | None = None
    #: Start and end position as joint angles, drawn by :mod:`prescribe.catalogue.drawings`
    #: (format: docs/catalogue.md, "Pose data").
    pose: Pose | None = None

    @model_validator(mode="after")
    def _consistent(self) -> "Exercise":
        lo, hi = self.peak_grf_range_bw
        if not (0 <= lo <= self.peak_grf_bw <= hi):
            raise ValueError(f"peak_grf_range_bw [{lo}, {hi}] must hold peak_grf_bw "
                             f"{self.peak_grf_bw} (low <= value <= high)")
        expected = impact_level_for_grf(self.peak_grf_bw, self.ground_contact)
        if self.impact_level != expected:
            raise ValueError(f"impact_level {self.impact_level} does not follow from "
                             f"peak_grf_bw {self.peak_grf_bw} and ground_contact "
                             f"{str(self.ground_contact).lower()}: it must be {expected}")
        if self.impact_level >= 2 and self.loading_rate_bw_s is None:
            raise ValueError("loading_rate_bw_s is required for impact levels 2 and 3")
        if self.source_kind == "model" and self.model_inputs is None:
            raise ValueError("model_inputs are required where source_kind is 'model'")
        if len(set(self.directions)) != len(self.directions):
            raise ValueError("directions must not repeat")
        return self

    @property
    def balance_demand_rank(self) -> int:
        """0 (none) to 3 (high), for comparisons."""
        return BALANCE_DEMANDS.index(self.balance_demand)

    def summary(self) -> dict[str, Any]:
        """The fields ``prescribe exercises`` prints, contract fields first."""
        data = self.model_dump(mode="json")
        head = ["exercise_id", "name", "category", "impact_level", "peak_grf_bw",
                "loading_rate_bw_s", "directions", "patterns", "source"]
        return {**{k: data[k] for k in head}, **{k: v for k, v in data.items() if k not in head}}


class Catalogue:
    """An ordered, validated set of :class:`Exercise` entries."""

    def __init__(self, exercises: Iterable[Exercise], version: str | None = None,
                 path: str | None = None):
        self._by_id: dict[str, Exercise] = {}
        for ex in exercises:
            self._by_id[ex.exercise_id] = ex
        self.version = version
        self.path = path

    @property
    def ids(self) -> list[str]:
        return list(self._by_id)

    def __len__(self) -> int:
        return len(self._by_id)

    def __iter__(self) -> Iterator[Exercise]:
        return iter(self._by_id.values())

    def __contains__(self, exercise_id: object) -> bool:
        return exercise_id in self._by_id

    def all(self) -> list[Exercise]:
        return list(self._by_id.values())

    def get(self, exercise_id: str) -> Exercise:
        """The entry ``exercise_id``; InputError naming the value if there is none."""
        try:
            return self._by_id[exercise_id]
        except (KeyError, TypeError):
            raise InputError.single(
                "exercise_id", exercise_id,
                "an id from the catalogue (list them with `prescribe exercises`)") from None

    def filter(self, level: int | None = None, category: str | None = None,
               max_level: int | None = None, exclude_patterns: Iterable[str] = ()) -> list[Exercise]:
        """Entries at ``level`` (or up to ``max_level``), in ``category``, without any
        of ``exclude_patterns``.  Unknown values raise InputError naming the argument."""
        for arg, value in (("level", level), ("max_level", max_level)):
            if value is not None and (isinstance(value, bool) or value not in (0, 1, 2, 3)):
                raise InputError.single(arg, value, "an impact level 0, 1, 2 or 3")
        if category is not None and category not in CATEGORIES:
            raise InputError.single("category", category, "one of " + ", ".join(CATEGORIES))
        exclude = set(exclude_patterns)
        unknown = sorted(exclude - set(MOVEMENT_PATTERNS))
        if unknown:
            raise InputError.single("exclude_patterns", unknown,
                                    "movement-pattern codes from: " + ", ".join(MOVEMENT_PATTERNS))
        return [ex for ex in self._by_id.values()
                if (level is None or ex.impact_level == level)
                and (max_level is None or ex.impact_level <= max_level)
                and (category is None or ex.category == category)
                and not exclude.intersection(ex.patterns)]


def _field_of(error: dict) -> str:
    loc = [str(p) for p in error.get("loc", ())]
    return ".".join(loc) if loc else "(entry)"


def load_catalogue(path: str | Path | None = None) -> Catalogue:
    """Read and check a catalogue file (TOML, ``[[exercise]]`` tables).

    Raises
    ------
    CatalogueError
        Naming the file, the entry and the field of the first problem: unreadable
        TOML, a bad or missing field, an impact level that does not follow from the
        force, a repeated id, or a regression/progression link to no entry.
    """
    file = Path(path) if path is not None else DEFAULT_PATH
    where = str(file)
    try:
        raw = tomllib.loads(file.read_text(encoding="utf-8"))
    except OSError as exc:
        raise CatalogueError(None, None, f"cannot be read ({exc.strerror or exc})", file=where) from None
    except tomllib.TOMLDecodeError as exc:
        raise CatalogueError(None, None, f"is not valid TOML ({exc})", file=where) from None
    entries = raw.get("exercise")
    if not isinstance(entries, list) or not entries:
        raise CatalogueError(None, "exercise", "the file needs at least one [[exercise]] table",
                             file=where)
    exercises: list[Exercise] = []
    seen: set[str] = set()
    for i, entry in enumerate(entries):
        if not isinstance(entry, dict):
            raise CatalogueError(f"#{i + 1}", None, "an entry must be a table", file=where)
        ident = entry.get("exercise_id")
        label = ident if isinstance(ident, str) and ident else f"#{i + 1}"
        try:
            ex = Exercise.model_validate(entry)
        except ValidationError as exc:
            first = exc.errors()[0]
            field = _field_of(first)
            msg = first.get("msg", "is not valid").removeprefix("Value error, ")
            value = first.get("input")
            if field != "(entry)" and not isinstance(value, dict):
                msg = f"{msg} (got {value!r})"
            raise CatalogueError(label, None if field == "(entry)" else field, msg,
                                 file=where) from None
        if ex.exercise_id in seen:
            raise CatalogueError(label, "exercise_id", "is used by an earlier entry", file=where)
        seen.add(ex.exercise_id)
        exercises.append(ex)
    for ex in exercises:
        for link in ("regression", "progression"):
            target = getattr(ex, link)
            if target is not None and (target not in seen or target == ex.exercise_id):
                raise CatalogueError(ex.exercise_id, link,
                                     f"links to {target!r}, which is not another entry", file=where)
    version = raw.get("meta", {}).get("catalogue_version") if isinstance(raw.get("meta"), dict) else None
    return Catalogue(exercises, version=version, path=where)


@lru_cache(maxsize=1)
def default_catalogue() -> Catalogue:
    """The packaged catalogue, loaded once."""
    return load_catalogue(DEFAULT_PATH)
