"""A recording's delivered dose, counted chunk by chunk in bounded memory.

:class:`ImpactCounter` takes the reader's chunks, checks them (time increasing, no gap
over a day, values at most 100 g, a sample rate of at least 10 Hz), keeps only the
candidate peaks and per-15-minute sums, and at the end joins close peaks, drops the
non-wear periods and sums each day.  The formulas are in :mod:`.impacts`.
"""

from __future__ import annotations

from datetime import datetime, timezone
from typing import Any

import numpy as np

from ..cautions import with_standard
from .._arrays import body_mass
from ..errors import FieldProblem, InputError
from . import impacts as im

#: Limits of a plausible recording (PRODUCT.md, "Delivered dose from a worn sensor").
MIN_RATE_HZ = 10.0
MAX_ABS_G = 100.0
MAX_GAP_S = 86_400.0
#: Times from this value on are Unix time (2000-01-01T00:00:00Z); smaller ones are
#: seconds from the recording's start.
EPOCH_FROM_S = 946_684_800.0
#: A worn or resting sensor reads about 1 g most of the time; a recording whose median
#: resultant lies outside this range is in another unit (m/s^2 reads 9.8, milli-g 1000)
#: [g] (common practice).
PLAUSIBLE_MEDIAN_G = (0.5, 1.5)
#: Every this many samples enter the median above (it needs no more).
RESULTANT_STRIDE = 25
SITES = ("hip", "wrist")
#: Body mass used when none is given [kg] (common practice: a reference adult).
DEFAULT_BODY_MASS_KG = 70.0

SOURCES = [
    "Vainionpaa A, Korpelainen R, Vihriala E, Rinta-Paavola A, Leppaluoto J, Jamsa T 2006, Osteoporos Int "
    "17(3):455-463 (impact bands 0.3-1.0 / 1.1-2.4 / 2.5-3.8 / 3.9-5.3 / 5.4-9.2 g, waist monitor)",
    "Jamsa T, Ahola R, Korpelainen R 2011, Front Physiol 2:73 (more than 4 g as the osteogenic threshold)",
    "Deere K, Sayers A, Rittweger J, Tobias JH 2012, J Bone Miner Res 27(9):1887-1895 (more than 4.2 g)",
    "Neugebauer JM, Collins KH, Hawkins DA 2014, PLoS ONE 9(6):e99023 (peak GRF from hip acceleration, "
    "walking and running; coefficients taken from a secondary source)",
    "Turner CH, Robling AG 2003, Exerc Sport Sci Rev 31(1):45-50 (osteogenic index)",
    "van Hees VT et al. 2013, PLoS ONE 8(4):e61691 (non-wear: 60-min windows, SD < 13 mg and range < 50 mg "
    "on 2 of 3 axes; criteria from memory)",
]


def _fail(field: str, value: Any, allowed: str, source: str | None) -> InputError:
    return InputError([FieldProblem(field, value, allowed)], source)


class ImpactCounter:
    """Accumulates one recording; call :meth:`feed` per chunk, then :meth:`finish`.

    Parameters
    ----------
    body_mass_kg : float
        For the force estimate [kg], 25-300.
    site : str
        Where the sensor was worn: ``hip`` (the bands' and the regression's site) or
        ``wrist`` (counted, but no force or osteogenic index: neither is valid there).
    start_epoch_s : float, optional
        Unix time of the recording's start when the file's times are relative.
    source : str, optional
        The file's name, for messages.
    """

    def __init__(self, body_mass_kg: float = DEFAULT_BODY_MASS_KG, site: str = "hip",
                 start_epoch_s: float | None = None, refractory_s: float = im.REFRACTORY_S,
                 source: str | None = None):
        if site not in SITES:
            raise InputError.single("--site", site, "one of " + ", ".join(SITES))
        self.body_mass_kg = float(np.asarray(body_mass(body_mass_kg)))
        self.site, self.start_epoch_s, self.refractory_s, self.source = site, start_epoch_s, refractory_s, source
        self.samples = 0
        self.first_t: float | None = None
        self.last_t: float | None = None
        self.offset = 0.0  # added to file times to give Unix time (relative times with a start)
        self.relative = False
        self._tail_t = np.zeros(0)
        self._tail_s = np.zeros(0)
        self._peak_t: list[np.ndarray] = []
        self._peak_g: list[np.ndarray] = []
        self._dt_medians: list[float] = []
        self._resultant_medians: list[float] = []
        self._largest_gap_s = 0.0
        self._blocks: dict[int, np.ndarray] = {}  # block -> [n, s1(3), s2(3), lo(3), hi(3)]

    # -- streaming ---------------------------------------------------------------------
    def feed(self, time_s: np.ndarray, acc_g: np.ndarray) -> None:
        t = np.asarray(time_s, dtype=float)
        a = np.asarray(acc_g, dtype=float)
        if t.size == 0:
            return
        self._check(t, a)
        if self.first_t is None:
            self.first_t = float(t[0])
            self.relative = self.first_t < EPOCH_FROM_S
            self.offset = (self.start_epoch_s or 0.0) if self.relative else 0.0
        self.samples += t.size
        self.last_t = float(t[-1])
        net = im.net_resultant_g(a[:, 0], a[:, 1], a[:, 2])
        self._resultant_medians.append(float(np.median(net[::RESULTANT_STRIDE])) + 1.0)
        bt = np.concatenate([self._tail_t, t])
        bs = np.concatenate([self._tail_s, net])
        idx = im.candidate_peaks(bs)
        if idx.size:
            self._peak_t.append(bt[idx])
            self._peak_g.append(bs[idx])
        self._tail_t, self._tail_s = bt[-2:].copy(), bs[-2:].copy()
        self._add_blocks(t, a)

    def _check(self, t: np.ndarray, a: np.ndarray) -> None:
        src = self.source
        if a.ndim != 2 or a.shape != (t.size, 3):
            raise _fail("acceleration", a.shape, "three axes (x_g, y_g, z_g) per time", src)
        # One pass each over the samples; the slow search for the culprit only on failure.
        if not (np.abs(a) <= MAX_ABS_G).all():
            bad_a = ~np.isfinite(a)
            if bad_a.any():
                i = np.argwhere(bad_a)[0]
                raise _fail("xyz"[i[1]] + "_g", "empty or not a number", f"a number (at time_s {t[i[0]]:g})", src)
            i = np.argwhere(np.abs(a) > MAX_ABS_G)[0]
            raise _fail("xyz"[i[1]] + "_g", float(a[i[0], i[1]]),
                        f"an acceleration of at most {MAX_ABS_G:g} g in size (at time_s {t[i[0]]:g}); "
                        "larger values are not a body's movement: is the file in m/s^2 or raw counts?", src)
        prev = np.r_[self.last_t, t] if self.last_t is not None else t
        dt = np.diff(prev)
        if dt.size and not ((dt > 0).all() and dt.max() <= MAX_GAP_S):
            bad_t = ~np.isfinite(prev)
            if bad_t.any():
                raise _fail("time_s", "empty or not a number", "a number of seconds in every row", src)
            if np.any(dt <= 0):
                j = int(np.flatnonzero(dt <= 0)[0])
                raise _fail("time_s", float(prev[j + 1]), f"times that increase from row to row (after {prev[j]:g})",
                            src)
            j = int(np.argmax(dt))
            raise _fail("time_s", f"a gap of {dt[j] / 3600:.1f} h after {prev[j]:g}",
                        "gaps of at most one day (24 h) between samples: split the recording", src)
        if dt.size:
            self._largest_gap_s = max(self._largest_gap_s, float(dt.max()))
            # The sampling interval: the median of the chunk's first intervals (enough to
            # tell 100 Hz from 5 Hz; the median of every interval costs a sort).
            inner = np.diff(t[:10_001])
            if inner.size >= 2:
                self._dt_medians.append(float(np.median(inner)))
        if self.samples == 0 and t.size >= 3:
            self._check_rate(self._dt_medians[-1] if self._dt_medians else None)

    def _check_rate(self, dt: float | None) -> None:
        if dt is not None and 1.0 / dt < MIN_RATE_HZ:
            raise _fail("sample rate", f"{1.0 / dt:.3g} Hz", f"at least {MIN_RATE_HZ:g} Hz (impacts last "
                        "tens of milliseconds; slower recordings miss them)", self.source)

    def _add_blocks(self, t: np.ndarray, a: np.ndarray) -> None:
        # Blocks are runs of the sorted time axis: find where each begins, then reduce.
        span = im.NONWEAR_BLOCK_S
        first = int(np.floor((t[0] + self.offset) / span))
        last = int(np.floor((t[-1] + self.offset) / span))
        edges = np.arange(first + 1, last + 1, dtype=np.float64) * span - self.offset
        starts = np.r_[0, np.searchsorted(t, edges, side="left")]
        keys = np.arange(first, last + 1)
        keep = np.r_[starts[1:] > starts[:-1], True] & (starts < t.size)
        starts, keys = starts[keep], keys[keep]
        n = np.diff(np.r_[starts, t.size]).astype(float)
        s1 = np.add.reduceat(a, starts, axis=0)
        s2 = np.add.reduceat(a * a, starts, axis=0)
        lo = np.minimum.reduceat(a, starts, axis=0)
        hi = np.maximum.reduceat(a, starts, axis=0)
        for pos, key in enumerate(keys):
            row = np.concatenate([[n[pos]], s1[pos], s2[pos], lo[pos], hi[pos]])
            old = self._blocks.get(int(key))
            if old is None:
                self._blocks[int(key)] = row
            else:
                old[0:7] += row[0:7]
                old[7:10] = np.minimum(old[7:10], row[7:10])
                old[10:13] = np.maximum(old[10:13], row[10:13])

    # -- result ------------------------------------------------------------------------
    def finish(self, declared_rate_hz: float | None = None) -> dict:
        """The recording's summary (see docs/sensors.md for every field)."""
        if self.samples < 3 or self.first_t is None or self.last_t is None:
            raise _fail("FILE", f"{self.samples} samples", "a recording of at least 3 samples", self.source)
        median_g = float(np.median(self._resultant_medians))
        lo, hi = PLAUSIBLE_MEDIAN_G
        if not lo <= median_g <= hi:
            raise _fail("acceleration", f"a median resultant of {median_g:.3g}",
                        f"values in g: a worn or resting sensor reads about 1 g ({lo:g}-{hi:g} g) most of the "
                        "time; is the file in m/s^2 (about 9.8) or milli-g (about 1000)?", self.source)
        measured = 1.0 / float(np.median(self._dt_medians)) if self._dt_medians else None
        self._check_rate(1.0 / measured if measured else None)
        rate = declared_rate_hz or measured
        pt = np.concatenate(self._peak_t) if self._peak_t else np.zeros(0)
        pg = np.concatenate(self._peak_g) if self._peak_g else np.zeros(0)
        it, ig = im.group_impacts(pt, pg, self.refractory_s)

        keys = np.array(sorted(self._blocks), dtype=np.int64)
        full = np.arange(keys[0], keys[-1] + 1)
        table = np.zeros((full.size, 13))
        table[keys - keys[0]] = np.array([self._blocks[int(k)] for k in keys])
        nonwear = im.nonwear_windows(table[:, 0], table[:, 1:4], table[:, 4:7], table[:, 7:10], table[:, 10:13])
        block_of_impact = np.floor((it + self.offset) / im.NONWEAR_BLOCK_S).astype(np.int64) - keys[0]
        worn = ~nonwear[np.clip(block_of_impact, 0, full.size - 1)] if it.size else np.zeros(0, bool)
        excluded = int(np.count_nonzero(~worn))
        it, ig = it[worn], ig[worn]
        seconds_per_sample = 1.0 / rate if rate else 0.0
        block_seconds = table[:, 0] * seconds_per_sample

        # Days: UTC calendar days of Unix time, or day 1, 2, ... of a relative recording.
        def day_of(seconds_abs):
            return np.floor(np.asarray(seconds_abs, dtype=float) / 86_400.0).astype(np.int64)

        undated = self.relative and self.start_epoch_s is None
        base = self.first_t + self.offset
        impact_day = day_of(it + self.offset)
        block_day = day_of(full * im.NONWEAR_BLOCK_S)
        first_day, last_day = int(day_of(base)), int(day_of(self.last_t + self.offset))
        days = []
        mass = self.body_mass_kg
        for d in range(first_day, last_day + 1):
            g = ig[impact_day == d]
            in_day = block_day == d
            counts = im.band_counts(g)
            entry: dict[str, Any] = {
                "date": None if undated else _iso_date(d),
                "day": d - first_day + 1,
                "recorded_h": round(float(block_seconds[in_day].sum()) / 3600.0, 2),
                "wear_time_h": round(float(block_seconds[in_day & ~nonwear].sum()) / 3600.0, 2),
                "impacts": int(counts.sum()),
                "impacts_by_band": _band_dict(counts),
                "impacts_above_4g": im.count_above(g, im.JAMSA_THRESHOLD_G),
                "impacts_above_4_2g": im.count_above(g, im.DEERE_THRESHOLD_G),
                "impacts_2bw_or_more": self._count_2bw(g),
                "osteogenic_index": self._oi(g),
            }
            days.append(entry)
        counts = im.band_counts(ig)
        notes = self._notes(undated, excluded)
        return {
            "site": self.site,
            "sample_rate_hz": round(float(rate), 3) if rate else None,
            "measured_sample_rate_hz": round(float(measured), 3) if measured else None,
            "samples": int(self.samples),
            "duration_s": round(self.last_t - self.first_t, 3),
            "start": None if undated else _iso_time(base),
            "end": None if undated else _iso_time(self.last_t + self.offset),
            "largest_gap_s": round(self._largest_gap_s, 3),
            "body_mass_kg": mass,
            "impacts": int(counts.sum()),
            "impacts_by_band": _band_dict(counts),
            "impacts_above_4g": im.count_above(ig, im.JAMSA_THRESHOLD_G),
            "impacts_above_4_2g": im.count_above(ig, im.DEERE_THRESHOLD_G),
            "impacts_2bw_or_more": self._count_2bw(ig),
            "impacts_excluded_nonwear": excluded,
            "wear_time_h": round(float(block_seconds[~nonwear].sum()) / 3600.0, 2),
            "nonwear_time_h": round(float(block_seconds[nonwear].sum()) / 3600.0, 2),
            "osteogenic_index": round(sum(d["osteogenic_index"] or 0.0 for d in days), 2)
            if self.site == "hip" else None,
            "days": days,
            "method": method(),
            "notes": notes,
            "sources": list(SOURCES),
            "cautions": with_standard([
                "Counts from a worn sensor estimate the loading; they do not measure bone strain or predict a "
                "change in bone density. Read them beside what the person reports.",
            ]),
        }

    def _count_2bw(self, g: np.ndarray) -> int | None:
        if self.site != "hip":
            return None
        g = g[im.band_index(g) >= 0]
        return int(np.count_nonzero(im.peak_grf_bw_from_net_g(g, self.body_mass_kg) >= 2.0)) if g.size else 0

    def _oi(self, g: np.ndarray) -> float | None:
        if self.site != "hip":
            return None
        return round(im.banded_osteogenic_index(g, self.body_mass_kg), 2)

    def _notes(self, undated: bool, excluded: int) -> list[str]:
        notes = []
        if undated:
            notes.append("The file's times are relative (seconds from the start) and no start time was given: "
                         "days are numbered from the start and have no date.")
        if excluded:
            notes.append(f"{excluded} peaks fell in non-wear periods and were not counted.")
        if self.site == "wrist":
            notes.append("Worn at the wrist: the impact bands and the force regression were made for a sensor at "
                         "the hip or waist; wrist counts are shown but are not comparable, and no force or "
                         "osteogenic index is estimated.")
        return notes


def method() -> dict:
    """How the counting works, in words and numbers (printed with every summary)."""
    return {
        "signal": "net resultant acceleration: sqrt(x^2 + y^2 + z^2) - 1 g (gravity taken off; at rest 0 g, "
                  "never an impact)",
        "band_edges_include_gravity": False,
        "band_edges_g": [float(x) for x in im.BAND_EDGES_G],
        "bands_g": {label: [lo, hi] for label, lo, hi in zip(im.BAND_LABELS, (0.3, 1.1, 2.5, 3.9, 5.4),
                                                                (1.0, 2.4, 3.8, 5.3, 9.2))},
        "impact": "a local maximum of the net resultant at or above 0.3 g; peaks closer than the refractory "
                  "time join one impact, sized by the highest",
        "refractory_s": im.REFRACTORY_S,
        "band_rule": "lower edge <= peak < next band's lower edge (1.0 < peak < 1.1 g counts in 0.3-1.0)",
        "above_4g": "peaks strictly above 4 g net (Jamsa et al. 2011)",
        "above_4_2g": "peaks strictly above 4.2 g net (Deere et al. 2012)",
        "nonwear": "60-minute windows stepped by 15 minutes; non-wear where 2 of 3 axes have SD < 13 mg and "
                   "range < 50 mg (after van Hees et al. 2013; criteria from memory); peaks there are not counted",
        "peak_grf": "Neugebauer et al. 2014 regression (walking equation up to 1.1 g net, running equation "
                    "2.0-3.8 g net, the equation's run term going linearly from 0 to 1 in between; acceleration "
                    "taken as net peak + 1 g; coefficients from a secondary source); above 3.8 g net, beyond "
                    "running where the regression is not valid: its value at 3.8 g plus 1 BW for each further g "
                    "(Newton's second law, an upper estimate of the increment); one continuous, increasing curve",
        "osteogenic_index": "per day: sum over bands of mean peak GRF [BW] x ln(impacts + 1) (Turner & Robling "
                            "2003), impacts in wear time only",
        "impacts_2bw_or_more": "impacts whose estimated peak GRF is 2 BW or more: what a program's impacts count "
                               "(level 2-3 landings)",
    }


def _band_dict(counts: np.ndarray) -> dict[str, int]:
    out = {label: int(c) for label, c in zip(im.BAND_LABELS, counts)}
    out[im.OVER_RANGE_LABEL] = int(counts[len(im.BAND_LABELS)])
    return out


def _iso_date(day: int) -> str:
    return datetime.fromtimestamp(day * 86_400, tz=timezone.utc).date().isoformat()


def _iso_time(seconds: float) -> str:
    return datetime.fromtimestamp(seconds, tz=timezone.utc).isoformat(timespec="seconds")
