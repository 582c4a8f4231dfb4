"""Bone-loading dose models: how much osteogenic stimulus a session or a day gives.

Pure, vectorised functions (scalars or arrays in, the same shape out; a float for
all-scalar input) plus :func:`session_dose`, which applies them to one catalogue
entry for the command line and the planner.  Impossible input raises
:class:`~prescribe.errors.InputError` naming the argument.

The models rank and compare loading programmes; they do not predict a person's
change in bone density.
"""

from __future__ import annotations

from collections import Counter
from typing import Any, Iterable, Sequence

import numpy as np

from .._arrays import body_mass, checked, out
from ..catalogue import DIRECTIONS, Catalogue, default_catalogue
from ..cautions import with_standard
from ..errors import InputError
from .mechanics import bw_to_newtons

__all__ = [
    "osteogenic_index", "cycle_share", "recovered_sensitivity", "daily_osteogenic_index",
    "bout_contributions", "carter_daily_stimulus", "direction_variety", "session_dose",
    "RECOVERY_TAU_HOURS", "CARTER_M_DEFAULT", "MAX_CYCLES", "MAX_BOUTS", "MAX_GAP_HOURS",
    "IMPACTS_PER_SESSION_MAX", "IMPACTS_PER_BOUT_MAX", "BOUT_GAP_MIN_H",
]

#: Largest number of loading cycles in a session or a day the models accept.
MAX_CYCLES = 100_000
#: Bouts a day may be split into, and the longest gap between bouts [h].
MAX_BOUTS = 24
MAX_GAP_HOURS = 24.0

#: The practical ceiling of landings in one session: the jump programs that raised femoral-neck BMD
#: used 10-100 jumps a day (Clissold, Cronin, De Souza & Winwood 2022, Arch Sports Med Physiother
#: 7(1):7-15, review); roughly 60 to 100 a session is the usual target and more adds fatigue rather
#: than adaptation (common practice).  A template may go above it only with a reason.
IMPACTS_PER_SESSION_MAX = 100
#: Landings in one bout at most; more in a day are split into bouts (common practice).
IMPACTS_PER_BOUT_MAX = 50
#: Shortest gap between bouts of impact work [h] (common practice; about 8 h restores
#: mechanosensitivity fully: Robling, Burr & Turner 2001, see RECOVERY_TAU_HOURS).
BOUT_GAP_MIN_H = 4.0

#: Time constant of recovery of mechanosensitivity [h], chosen so that 8 h restores
#: 95% (tau = 8 / ln 20 = 2.67 h): Robling, Burr & Turner 2001, J Exp Biol
#: 204:3389-3399, "approximately 8 h of recovery was sufficient".
RECOVERY_TAU_HOURS = 8.0 / np.log(20.0)

#: Default stress exponent of Carter's daily stress stimulus; m = 4 (range ~3-8) as
#: used by Beaupre, Orr & Carter 1990, J Orthop Res 8:651-661 (from memory).
CARTER_M_DEFAULT = 4.0


def _cycles(name: str, value) -> np.ndarray:
    return checked(name, value, low=0, high=MAX_CYCLES, whole=True,
                   allowed=f"a whole number of loading cycles from 0 to {MAX_CYCLES}")


def _grf(value) -> np.ndarray:
    return checked("peak_grf_bw", value, low=0, high=20,
                   allowed="a peak ground reaction force from 0 to 20 BW")


def osteogenic_index(peak_grf_bw, cycles):
    """Turner's osteogenic index of one session [BW].

    .. math:: OI = G \\ln(N + 1)

    The stimulus grows with the peak force and only logarithmically with the number
    of cycles.  Sessions add up over a day and a week (sum their indices).

    Parameters
    ----------
    peak_grf_bw : float or array_like
        Peak ground reaction force of each cycle [BW], 0-20.
    cycles : int or array_like
        Loading cycles (impacts, steps, repetitions) in the session [-], whole, 0-100000.

    Returns
    -------
    float or numpy.ndarray
        Osteogenic index [BW] (ln of a count is dimensionless).

    References
    ----------
    Turner & Robling 2003, Exerc Sport Sci Rev 31(1):45-50.  As applied by
    Santos-Rocha, Oliveira & Veloso 2006, Br J Sports Med 40:860-866 (step aerobics:
    1.40 BW, 4194 cycles, OI 12.0 +- 0.8) and Kishimoto et al. 2012, J Sports Sci Med
    11:31-38 (10 jumps a day, 5 days a week: weekly OI 52.6).
    """
    g = _grf(peak_grf_bw)
    n = _cycles("cycles", cycles)
    return out(g * np.log1p(n), peak_grf_bw, cycles)


def cycle_share(n, total):
    """Share of a session's stimulus given by its first ``n`` of ``total`` cycles [-].

    .. math:: S(n) = \\frac{\\ln(n + 1)}{\\ln(N + 1)}

    From Turner's index at constant force: the diminishing return of cycles.  The
    first 36 of 360 cycles give 61% of the stimulus; the first 60 of 100, 89%.

    Parameters
    ----------
    n : int or array_like
        Cycles done so far [-], whole, 0 <= n <= total.
    total : int or array_like
        Cycles in the session [-], whole, 1-100000.

    Returns
    -------
    float or numpy.ndarray
        Share between 0 and 1.

    References
    ----------
    Turner & Robling 2003, Exerc Sport Sci Rev 31(1):45-50 (logarithmic form).
    Saturation with cycles: 36 cycles a day gave maximal formation in the turkey ulna
    (Rubin & Lanyon 1984, J Bone Joint Surg Am 66:397-402).
    """
    nn = _cycles("n", n)
    tt = checked("total", total, low=1, high=MAX_CYCLES, whole=True,
                 allowed=f"a whole number of cycles from 1 to {MAX_CYCLES}")
    nb, tb = np.broadcast_arrays(nn, tt)
    if np.any(nb > tb):
        raise InputError.single("n", float(nb[nb > tb].flat[0]),
                                "a number of cycles no larger than total")
    return out(np.log1p(nn) / np.log1p(tt), n, total)


def recovered_sensitivity(gap_hours, tau_hours=RECOVERY_TAU_HOURS):
    """Share of bone-cell mechanosensitivity restored after a rest [-].

    .. math:: r(t) = 1 - e^{-t / \\tau}

    with :math:`\\tau` = 8 / ln 20 = 2.67 h by default, so r(8 h) = 0.95.

    Parameters
    ----------
    gap_hours : float or array_like
        Rest between bouts [h], 0-24.
    tau_hours : float, default 2.67
        Recovery time constant [h], > 0 up to 48.

    Returns
    -------
    float or numpy.ndarray
        0 right after loading, approaching 1 after long rest.

    References
    ----------
    Robling, Burr & Turner 2001, J Exp Biol 204:3389-3399: about 8 h between bouts
    restored mechanosensitivity (bone formation rate more than 100% higher than with
    0-0.5 h).  The exponential form is our model.
    """
    t = checked("gap_hours", gap_hours, low=0, high=MAX_GAP_HOURS,
                allowed=f"a rest from 0 to {MAX_GAP_HOURS:g} hours")
    tau = checked("tau_hours", tau_hours, low=0, high=48, low_open=True)
    return out(1.0 - np.exp(-t / tau), gap_hours, tau_hours)


def _bouts(bouts) -> int:
    if isinstance(bouts, bool) or np.ndim(bouts) != 0:
        raise InputError.single("bouts", bouts, f"a whole number of bouts from 1 to {MAX_BOUTS}")
    b = checked("bouts", bouts, low=1, high=MAX_BOUTS, whole=True,
                allowed=f"a whole number of bouts from 1 to {MAX_BOUTS}")
    return int(b)


def split_cycles(cycles, bouts):
    """Cycles of each bout when ``cycles`` are split evenly over ``bouts``.

    Remainders go one each to the earliest bouts (10 over 3 bouts: 4, 3, 3).

    Parameters
    ----------
    cycles : int or array_like
        Cycles in the day [-], whole, 0-100000.
    bouts : int
        Number of bouts [-], 1-24.

    Returns
    -------
    numpy.ndarray
        Shape ``(bouts,) + shape(cycles)``, whole numbers.

    References
    ----------
    Common practice (even split); Robling et al. 2002, J Bone Miner Res 17:1545-1554
    compared 360 cycles in one bout with 4 bouts of 90.
    """
    n = _cycles("cycles", cycles)
    b = _bouts(bouts)
    base, extra = np.floor_divide(n, b), np.mod(n, b)
    return np.stack([base + (k < extra) for k in range(b)])


def bout_contributions(peak_grf_bw, cycles, bouts=1, gap_hours=8.0, tau_hours=RECOVERY_TAU_HOURS):
    """Osteogenic index contributed by each bout of a day [BW].

    Recovery model: a bout's index interpolates, with the recovered share
    :math:`r` of the gap before it (:func:`recovered_sensitivity`), between a fresh
    session and a continuation of the cycles still counted from earlier bouts:

    .. math::

        OI_k = G\\,\\{ r \\ln(n_k + 1)
               + (1 - r)\\,[\\ln(c_k + n_k + 1) - \\ln(c_k + 1)] \\}, \\qquad
        c_{k+1} = n_k + (1 - r)\\,c_k, \\quad c_1 = 0,

    for bout :math:`k` of :math:`n_k` cycles (older bouts fade by :math:`1 - r` per
    gap).  A gap of 0 h (r = 0) gives exactly one session of all the cycles; a long
    gap (r -> 1) gives separate fresh sessions; 8 h (r = 0.95) gives close to fresh
    sessions; in between the index rises steadily with the gap.

    Parameters
    ----------
    peak_grf_bw : float or array_like
        Peak force of each cycle [BW], 0-20.
    cycles : int or array_like
        Cycles in the whole day [-], whole, 0-100000; split by :func:`split_cycles`.
    bouts : int, default 1
        Bouts in the day [-], 1-24 (a scalar).
    gap_hours : float or array_like, default 8
        Rest between consecutive bouts [h], 0-24.
    tau_hours : float, default 2.67
        Recovery time constant [h].

    Returns
    -------
    numpy.ndarray
        Shape ``(bouts,) + broadcast shape of the inputs`` [BW].

    References
    ----------
    Turner & Robling 2003, Exerc Sport Sci Rev 31(1):45-50 (index per session);
    Robling, Burr & Turner 2001, J Exp Biol 204:3389-3399 (about 8 h restores
    mechanosensitivity); Robling et al. 2002, J Bone Miner Res 17:1545-1554 (4 x 90
    cycles beat 360 x 1).  The interpolation is our model.
    """
    g = _grf(peak_grf_bw)
    per_bout = split_cycles(cycles, bouts)
    r = np.asarray(recovered_sensitivity(gap_hours, tau_hours))
    shape = np.broadcast(g, per_bout[0], r).shape
    carried = np.zeros(shape)
    parts = []
    for k, n_k in enumerate(per_bout):
        weight = 1.0 if k == 0 else r  # the first bout is fresh
        fresh = np.log1p(n_k)
        continued = np.log1p(carried + n_k) - np.log1p(carried)
        parts.append(g * (weight * fresh + (1.0 - weight) * continued))
        carried = n_k + (1.0 - r) * carried
    return np.stack([np.broadcast_to(p, shape) for p in parts])


def daily_osteogenic_index(peak_grf_bw, cycles, bouts=1, gap_hours=8.0,
                           tau_hours=RECOVERY_TAU_HOURS):
    """Turner's osteogenic index of a day's cycles split into bouts [BW].

    The sum over bouts of :func:`bout_contributions`: cycles split evenly over
    ``bouts`` (remainders to the earliest bouts), the recovery model applied to each
    gap.  ``bouts = 1`` is :func:`osteogenic_index`.

    Parameters
    ----------
    peak_grf_bw : float or array_like
        Peak force of each cycle [BW], 0-20.
    cycles : int or array_like
        Cycles in the whole day [-], whole, 0-100000.
    bouts : int, default 1
        Bouts in the day [-], 1-24.
    gap_hours : float or array_like, default 8
        Rest between bouts [h], 0-24.
    tau_hours : float, default 2.67
        Recovery time constant [h].

    Returns
    -------
    float or numpy.ndarray
        Daily osteogenic index [BW].

    References
    ----------
    Turner & Robling 2003, Exerc Sport Sci Rev 31(1):45-50; Robling, Burr & Turner
    2001, J Exp Biol 204:3389-3399; Robling et al. 2002, J Bone Miner Res
    17:1545-1554.
    """
    total = bout_contributions(peak_grf_bw, cycles, bouts, gap_hours, tau_hours).sum(axis=0)
    return out(total, peak_grf_bw, cycles, gap_hours, tau_hours)


def carter_daily_stimulus(cycles, stress, m=CARTER_M_DEFAULT):
    """Carter's daily stress stimulus [units of ``stress``].

    .. math:: \\psi = \\left( \\sum_i n_i \\, \\sigma_i^m \\right)^{1/m}

    summed over the last axis (the day's load types: walking, stairs, jumps...).  A
    higher ``m`` weights stress magnitude more against cycles: with m = 4, 16 times
    the cycles equal twice the stress.

    Parameters
    ----------
    cycles : array_like
        Cycles of each load type per day [-], >= 0 (need not be whole: averages).
    stress : array_like
        Effective stress (or strain) of each load type [MPa, or any one unit], >= 0;
        broadcast against ``cycles``.
    m : float, default 4
        Stress exponent [-], 1-20; published range about 3-8.

    Returns
    -------
    float or numpy.ndarray
        Daily stress stimulus, in the unit of ``stress``; a float for 1-d or scalar
        input, an array of the leading shape otherwise.

    References
    ----------
    Carter, Fyhrie & Whalen 1987, J Biomech 20:785-794; Whalen, Carter & Steele 1988,
    J Biomech 21:825-837; default m = 4 as in Beaupre, Orr & Carter 1990, J Orthop
    Res 8:651-661 (from memory).
    """
    n = checked("cycles", cycles, low=0, high=1e9)
    s = checked("stress", stress, low=0)
    mm = checked("m", m, low=1, high=20)
    if mm.ndim:
        raise InputError.single("m", m, "a single exponent from 1 to 20")
    n, s = np.broadcast_arrays(n, s)
    total = np.sum(n * s ** float(mm), axis=-1) if n.ndim else n * s ** float(mm)
    psi = total ** (1.0 / float(mm))
    if np.ndim(psi) == 0:
        return float(psi)
    return psi


def direction_variety(directions_list: Iterable[Sequence[str]], weights=None) -> float:
    """Variety of loading directions in a session or week, from 0 to 1 [-].

    Each exercise contributes its directions (``weights``, e.g. its cycles, share it
    equally among them).  With :math:`p_d` the share of each of the four directions
    (vertical, forward_back, side_to_side, rotational) and
    :math:`D = \\exp(-\\sum p_d \\ln p_d)` the effective number of directions
    (1 to 4):

    .. math:: V = (D - 1) / 3

    0 = all loading in one direction; 1 = all four equally.  Exercises without a
    loading direction (lying, seated) are ignored; none at all gives 0.

    Parameters
    ----------
    directions_list : iterable of sequences of str
        One list of direction codes per exercise (or per impact).
    weights : array_like, optional
        Non-negative weight per exercise [cycles or any unit]; default 1 each.

    Returns
    -------
    float
        Variety score [-], 0-1.

    References
    ----------
    Rationale: bone cells accommodate to routine loading, so unusual or varied
    loading stimulates more (Turner 1998, Bone 23:399-407; Rubin & Lanyon 1985,
    Calcif Tissue Int 37:411-417, from memory).  The score is ours: the exponential of
    Shannon entropy as an effective number (Hill 1973, Ecology 54:427-432, from
    memory), rescaled to 0-1.
    """
    items = [list(d) if not isinstance(d, str) else [d] for d in directions_list]
    w = np.ones(len(items)) if weights is None else checked("weights", weights, low=0)
    if w.shape != (len(items),):
        raise InputError.single("weights", weights, f"one weight per exercise ({len(items)})")
    shares: Counter[str] = Counter()
    for i, dirs in enumerate(items):
        unknown = [d for d in dirs if d not in DIRECTIONS]
        if unknown:
            raise InputError.single("directions_list", unknown[0],
                                    "direction codes from: " + ", ".join(DIRECTIONS))
        for d in set(dirs):
            shares[d] += w[i] / len(set(dirs))
    total = sum(shares.values())
    if total <= 0:
        return 0.0
    p = np.array([v / total for v in shares.values() if v > 0])
    effective = float(np.exp(-np.sum(p * np.log(p))))
    return float(np.clip((effective - 1.0) / (len(DIRECTIONS) - 1.0), 0.0, 1.0))


#: Cycle counts at which :func:`session_dose` reports the share of the stimulus.
SHARE_POINTS = (10, 36, 60, 100)


def session_dose(exercise_id: str, cycles: int, bouts: int = 1, gap_hours: float = 8.0,
                 body_mass_kg: float | None = None, catalogue: Catalogue | None = None) -> dict[str, Any]:
    """Dose figures of one exercise done ``cycles`` times a day in ``bouts`` bouts.

    Parameters
    ----------
    exercise_id : str
        A catalogue id.
    cycles : int
        Loading cycles in the day [-] (impacts, steps or repetitions), 0-100000.
    bouts : int, default 1
        Bouts in the day [-], 1-24; cycles split evenly, remainders to the earliest.
    gap_hours : float, default 8
        Rest between bouts [h], 0-24 (ignored for one bout, but still checked).
    body_mass_kg : float, optional
        Body mass [kg], 25-300; adds the peak force in newtons.
    catalogue : Catalogue, optional
        Default: the packaged catalogue.

    Returns
    -------
    dict
        exercise_id, name, impact_level, peak_grf_bw, loading_rate_bw_s, cycles,
        bouts, gap_hours, cycles_per_bout, bout_osteogenic_index, osteogenic_index
        (the day, recovery applied), osteogenic_index_one_session (all cycles at once),
        osteogenic_index_separate_sessions (full recovery), recovered_sensitivity,
        stimulus_share_first (share of a single session's stimulus from its first
        10/36/60/100 cycles), direction_variety, peak_force_n (with body mass),
        model notes, sources and cautions.

    References
    ----------
    Turner & Robling 2003, Exerc Sport Sci Rev 31(1):45-50; Robling, Burr & Turner
    2001, J Exp Biol 204:3389-3399; the entry's own load source.
    """
    cat = catalogue or default_catalogue()
    ex = cat.get(exercise_id)
    n_total = int(_cycles("cycles", cycles))
    b = _bouts(bouts)
    gap = float(checked("gap_hours", gap_hours, low=0, high=MAX_GAP_HOURS,
                        allowed=f"a rest from 0 to {MAX_GAP_HOURS:g} hours"))
    parts = bout_contributions(ex.peak_grf_bw, n_total, b, gap)
    per_bout = split_cycles(n_total, b)
    result: dict[str, Any] = {
        "exercise_id": ex.exercise_id,
        "name": ex.name,
        "category": ex.category,
        "impact_level": ex.impact_level,
        "peak_grf_bw": ex.peak_grf_bw,
        "peak_grf_range_bw": list(ex.peak_grf_range_bw),
        "loading_rate_bw_s": ex.loading_rate_bw_s,
        "dose_unit": ex.dose_unit,
        "cycles": n_total,
        "bouts": b,
        "gap_hours": gap,
        "cycles_per_bout": [int(x) for x in per_bout],
        "osteogenic_index": round(float(parts.sum()), 4),
        "bout_osteogenic_index": [round(float(x), 4) for x in parts],
        "osteogenic_index_one_session": round(osteogenic_index(ex.peak_grf_bw, n_total), 4),
        "osteogenic_index_separate_sessions": round(
            float(sum(osteogenic_index(ex.peak_grf_bw, int(x)) for x in per_bout)), 4),
        "recovered_sensitivity": round(recovered_sensitivity(gap), 4) if b > 1 else None,
        "stimulus_share_first": {str(k): round(cycle_share(k, n_total), 4)
                                 for k in SHARE_POINTS if 0 < k <= n_total},
        "directions": list(ex.directions),
        "direction_variety": round(direction_variety([ex.directions]), 4),
        "patterns": list(ex.patterns),
        "model": {
            "osteogenic_index": "peak_grf_bw x ln(cycles + 1) per bout (Turner's index)",
            "recovery": "each later bout mixes a fresh session (weight r) with continuing the cycles still counted (weight 1 - r), r(gap) = 1 - exp(-gap / tau)",
            "recovery_tau_hours": round(float(RECOVERY_TAU_HOURS), 4),
            "split": "cycles split evenly over bouts; remainders to the earliest bouts",
        },
        "sources": [
            "Turner CH & Robling AG 2003, Exerc Sport Sci Rev 31(1):45-50",
            "Robling AG, Burr DB & Turner CH 2001, J Exp Biol 204:3389-3399",
            ex.source,
        ],
    }
    notes: list[str] = []
    if body_mass_kg is not None:
        mass = float(body_mass(body_mass_kg))
        result["body_mass_kg"] = mass
        result["peak_force_n"] = round(bw_to_newtons(ex.peak_grf_bw, mass), 1)
        result["peak_force_range_n"] = [round(bw_to_newtons(v, mass), 1) for v in ex.peak_grf_range_bw]
        if ex.grf_plus_external_load:
            notes.append("Peak force is the body-weight part at the feet; any external load adds to it.")
    if ex.dose_unit != "impacts":
        notes.append(f"This exercise is usually dosed in {ex.dose_unit}; cycles are taken as "
                     "its loading cycles (steps or repetitions).")
    if ex.source_kind != "force_plate":
        notes.append("The load figure of this exercise is an estimate, not a force-plate measurement.")
    result["notes"] = notes
    result["cautions"] = with_standard([
        "Dose figures rank and compare loading; they do not predict a change in bone density.",
    ])
    return result
