"""Counting bone-loading impacts in a worn accelerometer's signal: pure, vectorised.

Every function takes arrays (or scalars) and returns arrays of the documented shape;
no I/O, no global state.  The streaming layer (:mod:`prescribe.sensor.summary`) calls
them chunk by chunk so that a week of 100 Hz data is counted in bounded memory.

Conventions (docs/sensors.md gives the reasons and sources):

* The signal counted is the **net resultant acceleration** ``sqrt(x^2 + y^2 + z^2) - 1``
  [g]: the 1 g of gravity is taken off, so a sensor at rest reads 0 g and is never an
  impact.  Band edges (Vainionpaa et al. 2006), the 4 g threshold (Jamsa et al. 2011)
  and the 4.2 g threshold (Deere et al. 2012) are applied to this net value.
* An impact is a peak (local maximum) of the net resultant at or above the lowest band
  edge, 0.3 g.  Peaks closer together than the refractory time (0.2 s) join one impact,
  whose size is the highest of them.
"""

from __future__ import annotations

import numpy as np

from .._arrays import G, body_mass, checked
from ..errors import InputError

__all__ = [
    "BAND_EDGES_G", "BAND_LABELS", "IMPACT_THRESHOLD_G", "JAMSA_THRESHOLD_G", "DEERE_THRESHOLD_G",
    "REFRACTORY_S", "EDGE_RESOLUTION_G", "NEUGEBAUER_COEF", "NEUGEBAUER_WALK_TO_NET_G",
    "NEUGEBAUER_RUN_FROM_NET_G", "NEUGEBAUER_VALID_TO_NET_G", "net_resultant_g", "candidate_peaks", "group_impacts",
    "band_index", "band_counts", "count_above", "neugebauer_peak_grf_n", "peak_grf_bw_from_net_g",
    "banded_osteogenic_index", "still_axes", "nonwear_windows",
]

#: Lower edges of Vainionpaa et al. 2006's five bands [g, net of gravity], then the
#: top of the fifth band.  The paper reports 0.3-1.0 / 1.1-2.4 / 2.5-3.8 / 3.9-5.3 /
#: 5.4-9.2 g to 0.1 g; a peak belongs to the band whose lower edge it reaches and the
#: next band's lower edge it does not (1.05 g -> 0.3-1.0; 1.1 g -> 1.1-2.4).  Peaks of
#: 9.3 g and more are counted apart, as over the published range.
BAND_EDGES_G = np.array([0.3, 1.1, 2.5, 3.9, 5.4, 9.3])
BAND_LABELS = ("0.3-1.0", "1.1-2.4", "2.5-3.8", "3.9-5.3", "5.4-9.2")
OVER_RANGE_LABEL = "above_9.2"
#: A peak is an impact from the lowest band edge on [g net].
IMPACT_THRESHOLD_G = float(BAND_EDGES_G[0])
#: Jamsa et al. 2011, Front Physiol 2:73: accelerations "exceeding 4 g" [g net].
JAMSA_THRESHOLD_G = 4.0
#: Deere et al. 2012, J Bone Miner Res 27(9):1887-1895: impacts above 4.2 g [g net].
DEERE_THRESHOLD_G = 4.2
#: Peaks closer than this join one impact [s] (common practice: one landing's impact
#: and push-off transients fall within about 0.1-0.15 s; the fastest running cadence,
#: about 200 steps a minute, leaves 0.3 s between steps).
REFRACTORY_S = 0.2
#: Peaks are compared with band edges after rounding to this step [g] (1 ug), so that
#: a peak on an edge (2.1 g - 1 g = 1.1000000000000001) lands where its value says.
EDGE_RESOLUTION_G = 1e-6

#: Neugebauer, Collins & Hawkins 2014, PLoS ONE 9(6):e99023, hip-worn accelerometer,
#: adults walking and running: ln(pGRF [N]) = b0 + b_acc ACC + b_mass mass_kg + b_run run
#: + b_acc_run ACC run, ACC the peak vertical acceleration [g, gravity included], run 0/1.
#: Coefficients taken from a secondary source (quoted, not read in the paper itself).
NEUGEBAUER_COEF = {"b0": 5.247, "b_acc": 0.271, "b_mass": 0.014, "b_run": 0.934, "b_acc_run": -0.216}
#: Peaks up to the second band (1.1 g net) use the walking equation (our choice: Vainionpaa's
#: second band is where running begins) ...
NEUGEBAUER_WALK_TO_NET_G = 1.1
#: ... peaks from 2.0 g net (a running hip peak of about 3.0 g with gravity, where the secondary
#: source quotes the running equation's 2.2 BW; the 3.0 g is from memory) the running equation;
#: in between, the equation's own ``run`` term goes linearly from 0 to 1 (our choice), so the two
#: equations join at both ends (see :func:`peak_grf_bw_from_net_g`).
NEUGEBAUER_RUN_FROM_NET_G = 2.0
#: The regression is used up to the top of the third band (3.8 g net; about the largest hip
#: peaks of running, from memory); above it, beyond running, each further g adds one body weight
#: (Newton's second law for the body as one mass), starting from the regression's value there.
NEUGEBAUER_VALID_TO_NET_G = 3.8


def _micro_g(value) -> np.ndarray:
    """Accelerations as whole micro-g, so that comparisons with edges are exact."""
    return np.round(np.asarray(value, dtype=float) / EDGE_RESOLUTION_G).astype(np.int64)


_EDGES_MICRO = _micro_g(BAND_EDGES_G)


def net_resultant_g(x_g, y_g, z_g):
    """Resultant acceleration less the 1 g of gravity [g].

    .. math:: a_{net} = \\sqrt{x^2 + y^2 + z^2} - 1

    Parameters
    ----------
    x_g, y_g, z_g : array_like
        Acceleration along the sensor's three axes [g], gravity included (as a raw
        accelerometer reports it).

    Returns
    -------
    numpy.ndarray
        Net resultant [g]; about 0 at rest whatever the sensor's orientation, negative
        in free fall.

    References
    ----------
    Rest reads 1 g: the standard acceleration of gravity (CGPM 1901).  Band edges net of
    gravity: Vainionpaa et al. 2006, Osteoporos Int 17(3):455-463 (lowest band from
    0.3 g, below the 1 g a sensor at rest reads with gravity in).
    """
    x, y, z = (np.asarray(v, dtype=float) for v in (x_g, y_g, z_g))
    total = x * x
    total += y * y
    total += z * z
    np.sqrt(total, out=total)
    total -= 1.0
    return total


def candidate_peaks(signal_g, threshold_g=IMPACT_THRESHOLD_G):
    """Indices of the local maxima of ``signal_g`` at or above ``threshold_g``.

    A local maximum is a sample higher than the one before and not lower than the one
    after; a flat top counts once, at its first sample.  The first and last samples are
    never peaks (their neighbours are unknown): a chunked reader overlaps chunks by two
    samples so that no peak is lost at a boundary.

    Parameters
    ----------
    signal_g : array_like, shape (n,)
        Net resultant acceleration [g].
    threshold_g : float, default 0.3
        Smallest peak counted [g net].

    Returns
    -------
    numpy.ndarray of int
        Increasing indices into ``signal_g``.
    """
    s = np.asarray(signal_g, dtype=float)
    if s.ndim != 1:
        raise InputError.single("signal_g", s.shape, "a one-dimensional array")
    if s.size < 3:
        return np.zeros(0, dtype=np.int64)
    mid = s[1:-1]
    # Cheap float test first (a margin of one resolution step), the exact micro-g test
    # on the few samples left.  A flat top (rise, equal samples, fall) is one peak.
    ok = mid >= threshold_g - EDGE_RESOLUTION_G
    ok &= mid > s[:-2]
    ok &= mid >= s[2:]
    idx = np.flatnonzero(ok)
    idx = idx[_micro_g(mid[idx]) >= _micro_g(threshold_g)]
    return idx + 1


def group_impacts(peak_time_s, peak_g, refractory_s=REFRACTORY_S):
    """Join peaks closer than ``refractory_s`` into impacts.

    Peaks are taken in time order; a peak less than ``refractory_s`` after the previous
    peak belongs to the same impact (so a chain of close peaks is one impact).  The
    impact's time and size are those of its highest peak (the first of equal ones).

    Parameters
    ----------
    peak_time_s : array_like, shape (n,)
        Times of the candidate peaks [s], increasing.
    peak_g : array_like, shape (n,)
        Their heights [g net].
    refractory_s : float, default 0.2
        Refractory time [s], 0-5.

    Returns
    -------
    (numpy.ndarray, numpy.ndarray)
        Impact times [s] and sizes [g net], one per impact.

    References
    ----------
    Common practice (a refractory time between counted peaks); the 0.2 s value is
    ours (see :data:`REFRACTORY_S`).
    """
    t = np.asarray(peak_time_s, dtype=float)
    g = np.asarray(peak_g, dtype=float)
    if t.shape != g.shape or t.ndim != 1:
        raise InputError.single("peak_g", g.shape, f"one height per peak time ({t.shape})")
    r = float(checked("refractory_s", refractory_s, low=0, high=5,
                      allowed="a refractory time from 0 to 5 s"))
    if t.size == 0:
        return t.copy(), g.copy()
    if np.any(np.diff(t) < 0):
        raise InputError.single("peak_time_s", "decreasing", "increasing peak times")
    # A tolerance of 1 ns keeps peaks exactly the refractory time apart separate despite
    # rounding in sample times (0.2 s between samples 10 and 30 of a 100 Hz clock).
    starts = np.flatnonzero(np.r_[True, np.diff(t) >= r - 1e-9])
    ends = np.r_[starts[1:], t.size]
    best = np.maximum.reduceat(g, starts)
    # The first index in each group whose height equals the group's best.
    group = np.repeat(np.arange(starts.size), ends - starts)
    is_best = g == best[group]
    idx = np.flatnonzero(is_best)
    first_best_pos = np.unique(group[idx], return_index=True)[1]
    first_best = idx[first_best_pos]
    return t[first_best], best


def band_index(peak_g):
    """Band of each peak: 0-4 for Vainionpaa's five bands, 5 above 9.2 g, -1 below 0.3 g.

    Parameters
    ----------
    peak_g : array_like
        Peak heights [g net].

    Returns
    -------
    numpy.ndarray of int
        Same shape as ``peak_g``.

    References
    ----------
    Vainionpaa A, Korpelainen R, Vihriala E, et al. 2006, Osteoporos Int
    17(3):455-463: bands 0.3-1.0, 1.1-2.4, 2.5-3.8, 3.9-5.3 and 5.4-9.2 g.
    """
    return np.searchsorted(_EDGES_MICRO, _micro_g(peak_g), side="right") - 1


def band_counts(peak_g):
    """Number of peaks in each of Vainionpaa's five bands, and above 9.2 g.

    Returns
    -------
    numpy.ndarray of int, shape (6,)
        Counts of bands 0.3-1.0, 1.1-2.4, 2.5-3.8, 3.9-5.3, 5.4-9.2 g, then above 9.2 g.

    References
    ----------
    Vainionpaa et al. 2006, Osteoporos Int 17(3):455-463.
    """
    b = band_index(peak_g)
    return np.bincount(b[b >= 0], minlength=len(BAND_LABELS) + 1)


def count_above(peak_g, threshold_g):
    """Number of peaks strictly above ``threshold_g`` [g net].

    References
    ----------
    Jamsa T, Ahola R, Korpelainen R 2011, Front Physiol 2:73 (more than 4 g); Deere K,
    Sayers A, Rittweger J, Tobias JH 2012, J Bone Miner Res 27(9):1887-1895 (more
    than 4.2 g).
    """
    return int(np.count_nonzero(_micro_g(peak_g) > _micro_g(threshold_g)))


def neugebauer_peak_grf_n(acc_g, body_mass_kg, running):
    """Peak vertical ground reaction force from a hip accelerometer's peak [N].

    .. math:: \\ln F = 5.247 + 0.271\\,a + 0.014\\,m + 0.934\\,r - 0.216\\,a\\,r

    Parameters
    ----------
    acc_g : array_like
        Peak vertical acceleration at the hip [g], gravity included.
    body_mass_kg : float or array_like
        Body mass [kg], 25-300.
    running : bool, float or array_like
        The model's ``run`` term: True (1) for running, False (0) for walking; a value in
        between blends the two equations (:func:`peak_grf_bw_from_net_g`).

    Returns
    -------
    numpy.ndarray
        Peak vertical ground reaction force [N].

    References
    ----------
    Neugebauer JM, Collins KH, Hawkins DA 2014, PLoS ONE 9(6):e99023 (adults walking
    and running, hip-worn accelerometer).  Coefficients taken from a secondary source;
    not valid beyond running.
    """
    a = np.asarray(acc_g, dtype=float)
    m = body_mass(body_mass_kg)
    r = np.asarray(running, dtype=float)
    c = NEUGEBAUER_COEF
    return np.exp(c["b0"] + c["b_acc"] * a + c["b_mass"] * m + c["b_run"] * r + c["b_acc_run"] * a * r)


def peak_grf_bw_from_net_g(peak_g, body_mass_kg):
    """Estimated peak ground reaction force of each impact [BW], from its peak [g net].

    One continuous, increasing curve whose pieces join at their breakpoints:

    * up to 1.1 g net: Neugebauer et al. 2014's walking equation (``run`` = 0);
    * from 2.0 g net to 3.8 g net: its running equation (``run`` = 1);
    * in between: the same equation with ``run`` going linearly from 0 at 1.1 g to 1 at 2.0 g
      (our choice), so it meets the walking equation at 1.1 g and the running one at 2.0 g.
      The log-force rises with the acceleration all the way (its slope is at least
      b_acc + b_acc_run = 0.055 a g, and b_run + b_acc_run ACC stays above 0 below 4.3 g);
    * above 3.8 g net (beyond running, outside the regression's range): the regression's
      value at 3.8 g plus one body weight for each further g: Newton's second law for the
      body as one mass (F / BW = a / g) applied to the increment.  A hip sensor moves more
      than the body's centre of mass, so the increment is an upper estimate (common practice);
      the whole stays below the body-as-one-mass bound a / g.

    Parameters
    ----------
    peak_g : array_like
        Impact peaks [g net].
    body_mass_kg : float
        Body mass [kg], 25-300.

    Returns
    -------
    numpy.ndarray
        Peak ground reaction force [BW].

    References
    ----------
    Neugebauer, Collins & Hawkins 2014, PLoS ONE 9(6):e99023 (coefficients from a
    secondary source: about 1.0 BW walking at 1.2 g and 2.2 BW running at 3.0 g, 70 kg).
    """
    g = np.asarray(peak_g, dtype=float)
    m = float(body_mass(body_mass_kg))
    walk_to, run_from, valid_to = NEUGEBAUER_WALK_TO_NET_G, NEUGEBAUER_RUN_FROM_NET_G, NEUGEBAUER_VALID_TO_NET_G
    within = np.minimum(g, valid_to)
    run = np.clip((within - walk_to) / (run_from - walk_to), 0.0, 1.0)
    regression = neugebauer_peak_grf_n(within + 1.0, m, run) / (m * G)
    return regression + np.maximum(g - valid_to, 0.0)


def banded_osteogenic_index(peak_g, body_mass_kg):
    """A day's osteogenic index from its counted impacts [BW].

    Each band is taken as one kind of loading: its force G_b is the mean estimated
    peak force of its impacts (:func:`peak_grf_bw_from_net_g`) and its cycles N_b the
    number of its impacts; kinds of loading add up:

    .. math:: OI = \\sum_b G_b \\ln(N_b + 1)

    Parameters
    ----------
    peak_g : array_like
        The day's impact peaks [g net] (peaks below 0.3 g are ignored).
    body_mass_kg : float
        Body mass [kg], 25-300.

    Returns
    -------
    float
        Osteogenic index [BW].

    References
    ----------
    Turner CH & Robling AG 2003, Exerc Sport Sci Rev 31(1):45-50 (index per kind of
    loading, summed); Vainionpaa et al. 2006 (bands); Neugebauer et al. 2014 (force).
    """
    g = np.asarray(peak_g, dtype=float).ravel()
    b = band_index(g)
    keep = b >= 0
    if not np.any(keep):
        return 0.0
    g, b = g[keep], b[keep]
    grf = peak_grf_bw_from_net_g(g, body_mass_kg)
    n = np.bincount(b, minlength=len(BAND_LABELS) + 1)
    total = np.bincount(b, weights=grf, minlength=len(BAND_LABELS) + 1)
    mean = np.divide(total, n, out=np.zeros_like(total), where=n > 0)
    return float(np.sum(mean * np.log1p(n)))


#: Non-wear: a 60-minute window in which at least 2 of the 3 axes have a standard
#: deviation under 13 mg and a value range under 50 mg; windows step by 15 minutes.
#: van Hees VT et al. 2013, PLoS ONE 8(4):e61691 (criteria from memory; the 2011
#: paper, PLoS ONE 6(7):e22922, used 30-minute windows and 3 mg).
NONWEAR_BLOCK_S = 15 * 60
NONWEAR_WINDOW_BLOCKS = 4
NONWEAR_SD_G = 0.013
NONWEAR_RANGE_G = 0.050
NONWEAR_MIN_AXES = 2


def still_axes(n, s1, s2, lo, hi):
    """How many axes are still over a window, from its running sums.

    Parameters
    ----------
    n : array_like, shape (w,)
        Samples in each window.
    s1, s2 : array_like, shape (w, 3)
        Sum and sum of squares of each axis [g, g^2].
    lo, hi : array_like, shape (w, 3)
        Smallest and largest value of each axis [g].

    Returns
    -------
    numpy.ndarray of int, shape (w,)
        Axes whose standard deviation is under 13 mg and range under 50 mg.
    """
    n = np.asarray(n, dtype=float)[:, None]
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = s1 / n
        var = np.maximum(s2 / n - mean * mean, 0.0)
    sd = np.sqrt(var)
    still = (sd < NONWEAR_SD_G) & ((np.asarray(hi) - np.asarray(lo)) < NONWEAR_RANGE_G)
    return np.where(n[:, 0] > 1, still.sum(axis=1), 0)


def nonwear_windows(n, s1, s2, lo, hi, window_blocks=NONWEAR_WINDOW_BLOCKS):
    """Which 15-minute blocks are non-wear, from per-block sums.

    A block is non-wear when any full window of ``window_blocks`` consecutive blocks
    that contains it is still (:func:`still_axes`) in at least 2 of 3 axes.

    Parameters
    ----------
    n : array_like, shape (k,)
        Samples in each block (0 for a block the recording does not cover).
    s1, s2, lo, hi : array_like, shape (k, 3)
        Per-block sum, sum of squares, minimum and maximum of each axis.

    Returns
    -------
    numpy.ndarray of bool, shape (k,)

    References
    ----------
    van Hees VT, Gorzelniak L, Dean Leon EC, et al. 2013, PLoS ONE 8(4):e61691
    (60-minute windows, 15-minute steps, 13 mg and 50 mg on 2 of 3 axes; from memory).
    """
    n = np.asarray(n, dtype=float)
    k = n.size
    out = np.zeros(k, dtype=bool)
    if k < window_blocks:
        return out
    s1, s2, lo, hi = (np.asarray(v, dtype=float) for v in (s1, s2, lo, hi))
    csum = lambda v: np.concatenate([np.zeros((1,) + v.shape[1:]), np.cumsum(v, axis=0)])  # noqa: E731
    wn = csum(n)[window_blocks:] - csum(n)[:-window_blocks]
    w1 = csum(s1)[window_blocks:] - csum(s1)[:-window_blocks]
    w2 = csum(s2)[window_blocks:] - csum(s2)[:-window_blocks]
    view = np.lib.stride_tricks.sliding_window_view
    wlo = view(lo, window_blocks, axis=0).min(axis=-1)
    whi = view(hi, window_blocks, axis=0).max(axis=-1)
    covered = view(n > 0, window_blocks).all(axis=-1)
    still = (still_axes(wn, w1, w2, wlo, whi) >= NONWEAR_MIN_AXES) & covered
    for j in range(window_blocks):
        out[j:j + still.size] |= still
    return out
