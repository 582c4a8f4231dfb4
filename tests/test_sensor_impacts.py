"""Impact counting on synthetic signals with known peaks (made here), against the sources'
bands and thresholds.

Sources: Vainionpaa et al. 2006, Osteoporos Int 17(3):455-463 (bands 0.3-1.0 / 1.1-2.4 /
2.5-3.8 / 3.9-5.3 / 5.4-9.2 g); Jamsa et al. 2011, Front Physiol 2:73 (more than 4 g);
Deere et al. 2012, J Bone Miner Res 27(9):1887-1895 (more than 4.2 g); Neugebauer et al.
2014, PLoS ONE 9(6):e99023 (coefficients from a secondary source); Turner & Robling 2003,
Exerc Sport Sci Rev 31(1):45-50 (osteogenic index).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from prescribe.errors import InputError
from prescribe.sensor import impacts as im
from prescribe.sensor.summary import ImpactCounter

from sensor_signals import MONDAY_2026_03_02, recording


def count(t, acc, chunk=None, **kwargs):
    counter = ImpactCounter(**kwargs)
    step = chunk or len(t)
    for i in range(0, len(t), step):
        counter.feed(t[i:i + step], acc[i:i + step])
    return counter.finish()


@pytest.mark.parametrize("axis", [0, 1, 2])
def test_gravity_at_rest_is_never_an_impact_whatever_the_orientation(axis):
    # A still sensor reads 1 g (standard gravity); the net resultant is 0 g.
    t, acc = recording(600, gravity_axis=axis, noise_g=0.01)
    s = count(t, acc)
    assert s["impacts"] == 0
    assert s["impacts_by_band"] == {"0.3-1.0": 0, "1.1-2.4": 0, "2.5-3.8": 0, "3.9-5.3": 0, "5.4-9.2": 0,
                                    "above_9.2": 0}


# Vainionpaa et al. 2006's bands, reported to 0.1 g: a peak between 1.0 and 1.1 g is in
# the first band, 1.1 g opens the second (our reading of the 0.1 g resolution, docs/sensors.md).
EDGES = [
    (0.29, None), (0.30, "0.3-1.0"), (1.0, "0.3-1.0"), (1.05, "0.3-1.0"), (1.1, "1.1-2.4"),
    (2.4, "1.1-2.4"), (2.5, "2.5-3.8"), (3.8, "2.5-3.8"), (3.9, "3.9-5.3"), (4.0, "3.9-5.3"),
    (4.1, "3.9-5.3"), (4.2, "3.9-5.3"), (4.25, "3.9-5.3"), (5.3, "3.9-5.3"), (5.4, "5.4-9.2"),
    (9.2, "5.4-9.2"), (9.3, "above_9.2"),
]


def test_peaks_on_band_edges_fall_in_the_band_their_value_says():
    peaks = [p for p, _ in EDGES]
    times = [5.0 + 2.0 * i for i in range(len(peaks))]
    t, acc = recording(60, peaks, times)
    s = count(t, acc)
    expected = {label: 0 for label in s["impacts_by_band"]}
    for _, band in EDGES:
        if band:
            expected[band] += 1
    assert s["impacts_by_band"] == expected
    assert s["impacts"] == len(EDGES) - 1  # 0.29 g is below the lowest band
    # Jamsa et al. 2011: more than 4 g -> 4.1, 4.2, 4.25, 5.3, 5.4, 9.2, 9.3 (4.0 itself is not more).
    assert s["impacts_above_4g"] == 7
    # Deere et al. 2012: more than 4.2 g -> 4.25, 5.3, 5.4, 9.2, 9.3.
    assert s["impacts_above_4_2g"] == 5


def test_band_index_matches_the_published_table_directly():
    # Vainionpaa et al. 2006: lower edges 0.3, 1.1, 2.5, 3.9, 5.4 g.
    assert list(im.band_index([0.2999, 0.3, 1.0999, 1.1, 2.5, 3.9, 5.4, 9.2999, 9.3])) == [-1, 0, 0, 1, 2, 3, 4, 4, 5]


def test_peaks_closer_than_the_refractory_time_count_once_sized_by_the_highest():
    # Common practice: one impact per refractory time (0.2 s, docs/sensors.md).
    # Pair 1: 0.10 s apart (one impact, 2.6 g -> band 2.5-3.8); pair 2: 0.20 s apart (two);
    # a chain 0.15 s apart x 3 (one, sized 1.5 g); a lone 0.5 g.
    peaks = [2.0, 2.6, 1.2, 1.3, 0.8, 1.5, 0.9, 0.5]
    times = [10.0, 10.1, 20.0, 20.2, 30.0, 30.15, 30.3, 40.0]
    t, acc = recording(60, peaks, times)
    s = count(t, acc)
    assert s["impacts"] == 5
    assert s["impacts_by_band"]["2.5-3.8"] == 1
    assert s["impacts_by_band"]["1.1-2.4"] == 3  # 1.2, 1.3, the chain's 1.5
    assert s["impacts_by_band"]["0.3-1.0"] == 1
    times_out, sizes = im.group_impacts(np.array(times), np.array(peaks))
    assert list(np.round(times_out, 3)) == [10.1, 20.0, 20.2, 30.15, 40.0]
    assert list(sizes) == [2.6, 1.2, 1.3, 1.5, 0.5]


def test_noise_adds_no_impact_and_known_peaks_are_all_counted():
    # 0.02 g of noise on each axis (a worn sensor between steps) stays far below 0.3 g.
    rng = np.random.default_rng(3)
    peaks = list(np.round(rng.uniform(0.5, 8.0, size=120), 2))
    times = [3.0 + 0.7 * i for i in range(120)]
    t, acc = recording(100, peaks, times, noise_g=0.02)
    s = count(t, acc)
    assert s["impacts"] == 120
    assert s["impacts_above_4g"] == sum(p > 4.0 for p in peaks)


def test_counting_in_chunks_gives_the_same_result_as_all_at_once():
    # Peaks that straddle chunk boundaries (chunks of 7 samples) must not be lost or doubled.
    peaks = [0.5, 1.4, 3.0, 4.5, 6.0] * 10
    times = [2.0 + 0.37 * i for i in range(50)]
    t, acc = recording(30, peaks, times, noise_g=0.01)
    whole, chunked = count(t, acc), count(t, acc, chunk=7)
    assert chunked["impacts_by_band"] == whole["impacts_by_band"]
    assert chunked["impacts"] == whole["impacts"] == 50
    assert chunked["days"][0]["osteogenic_index"] == whole["days"][0]["osteogenic_index"]


def test_non_wear_is_found_and_kept_out_of_wear_time():
    # One hour worn (noise, 30 impacts), then two hours still on a table (2 mg of noise):
    # non-wear by the 13 mg / 50 mg criteria on 2 of 3 axes over 60-minute windows
    # (after van Hees et al. 2013, PLoS ONE 8(4):e61691; criteria from memory).
    peaks = [1.5] * 30
    times = [60.0 + 100.0 * i for i in range(30)]
    t, acc = recording(3 * 3600, peaks, times, noise_g=0.05, still=[(3600, 3 * 3600)])
    s = count(t, acc)
    assert s["impacts"] == 30
    assert s["wear_time_h"] == pytest.approx(1.0, abs=0.01)
    assert s["nonwear_time_h"] == pytest.approx(2.0, abs=0.01)
    assert s["days"][0]["wear_time_h"] == pytest.approx(1.0, abs=0.01)


def test_days_split_at_midnight_utc_each_with_its_own_counts():
    # Start at 23:59:00 on Monday 2 March 2026; 3 impacts before midnight, 5 after.
    start = MONDAY_2026_03_02 + 86400 - 60
    peaks = [2.0] * 8
    times = [10, 20, 30, 70, 80, 90, 100, 110]
    t, acc = recording(120, peaks, times, start_s=start)
    s = count(t, acc)
    assert [d["date"] for d in s["days"]] == ["2026-03-02", "2026-03-03"]
    assert [d["impacts"] for d in s["days"]] == [3, 5]


def test_relative_times_without_a_start_have_numbered_days_and_no_dates():
    t, acc = recording(20, [1.0], [5.0], start_s=0.0)
    s = count(t, acc)
    assert s["days"][0]["date"] is None and s["days"][0]["day"] == 1
    assert s["start"] is None
    assert any("relative" in n for n in s["notes"])


def test_neugebauer_regression_uses_the_published_coefficients():
    # Neugebauer, Collins & Hawkins 2014 (coefficients from a secondary source):
    # ln(pGRF) = 5.247 + 0.271 ACC + 0.014 mass + 0.934 run - 0.216 ACC run.
    walking = im.neugebauer_peak_grf_n(1.2, 70.0, False)
    running = im.neugebauer_peak_grf_n(3.0, 70.0, True)
    assert float(walking) == pytest.approx(math.exp(5.247 + 0.271 * 1.2 + 0.014 * 70), rel=1e-12)
    assert float(running) == pytest.approx(math.exp(5.247 + 0.271 * 3 + 0.014 * 70 + 0.934 - 0.216 * 3), rel=1e-12)
    # The secondary page's summary: about 1.0 BW walking and 2.2 BW running (at hip peaks of
    # about 1.2 g and 3.0 g, typical values from memory).
    bw = 70.0 * 9.80665
    assert float(walking) / bw == pytest.approx(1.0, abs=0.05)
    assert float(running) / bw == pytest.approx(2.2, abs=0.05)


def test_the_secondary_sources_walking_and_running_figures_come_out_of_the_estimate():
    # Neugebauer, Collins & Hawkins 2014 (via a secondary source): about 1.0 BW walking at a hip
    # peak of about 1.2 g and 2.2 BW running at about 3.0 g (gravity in; 70 kg; peaks from memory).
    # The estimate is the walking equation there and the running equation here, exactly.
    bw = 70.0 * 9.80665
    walk, run = im.peak_grf_bw_from_net_g([0.2, 2.0], 70.0)
    assert walk == pytest.approx(float(im.neugebauer_peak_grf_n(1.2, 70.0, False)) / bw, rel=1e-12)
    assert run == pytest.approx(float(im.neugebauer_peak_grf_n(3.0, 70.0, True)) / bw, rel=1e-12)
    assert walk == pytest.approx(1.0, abs=0.05) and run == pytest.approx(2.2, abs=0.05)


@settings(max_examples=200, deadline=None)
@given(mass=st.floats(25, 300), a=st.floats(0.3, 12.0), b=st.floats(0.3, 12.0))
def test_the_force_estimate_rises_with_the_peak_for_every_body_mass(mass, a, b):
    # A harder landing is never estimated as a smaller force (monotone in the peak).
    lo, hi = sorted((a, b))
    f_lo, f_hi = im.peak_grf_bw_from_net_g([lo, hi], mass)
    assert f_lo <= f_hi + 1e-12
    if hi - lo > 1e-6:
        assert f_lo < f_hi


@pytest.mark.parametrize("mass", [25.0, 45.0, 64.0, 100.0, 180.0, 300.0])
def test_the_force_estimate_joins_at_its_breakpoints(mass):
    # Continuity: on a 1 mg grid over every band no step is larger than the curve's steepest
    # slope allows (at most 8 BW per g over the record's body masses), and at each breakpoint
    # (1.1 g walking/blend, 2.0 g blend/running, 3.8 g running/beyond running) the two sides meet.
    grid = np.arange(0.3, 12.0, 0.001)
    f = im.peak_grf_bw_from_net_g(grid, mass)
    assert np.all(np.diff(f) > 0) and np.max(np.diff(f)) < 8.0 * 0.001
    for edge in (im.NEUGEBAUER_WALK_TO_NET_G, im.NEUGEBAUER_RUN_FROM_NET_G, im.NEUGEBAUER_VALID_TO_NET_G):
        below, above = im.peak_grf_bw_from_net_g([edge - 1e-9, edge + 1e-9], mass)
        assert abs(above - below) < 1e-6, edge
    # Around the old jump: 3.8 and 3.9 g differ by a tenth of a g's worth of force, not 2.4 BW.
    f38, f39 = im.peak_grf_bw_from_net_g([3.8, 3.9], mass)
    assert f39 - f38 == pytest.approx(0.1, abs=1e-9)


def test_beyond_running_each_further_g_adds_one_body_weight_and_never_passes_newtons_bound():
    # Newton's second law for the body as one mass: F / BW = a / g (a with gravity).  Beyond the
    # regression's range (above 3.8 g net) the increment is 1 BW a g; for adult body masses the whole
    # estimate stays below the body-as-one-mass figure (a hip peak overstates the centre of mass's).
    for mass in (50.0, 64.0, 80.0, 100.0):
        g = np.array([3.8, 4.4, 5.4, 9.2])
        f = im.peak_grf_bw_from_net_g(g, mass)
        assert np.diff(f) == pytest.approx(np.diff(g), abs=1e-9)
        assert np.all(f < g + 1.0)


def test_daily_osteogenic_index_is_turners_index_per_band():
    # Turner & Robling 2003: OI = G ln(N + 1) per kind of loading, kinds add up; here each band is
    # one kind and G its impacts' mean estimated force.  60 impacts of 4.4 g net (band 3.9-5.3).
    g44, g60 = (float(x) for x in im.peak_grf_bw_from_net_g([4.4, 6.0], 64.0))
    t, acc = recording(100, [4.4] * 60, [2.0 + 1.5 * i for i in range(60)])
    s = count(t, acc, body_mass_kg=64.0)
    assert s["days"][0]["osteogenic_index"] == pytest.approx(round(g44 * math.log(61), 2))
    # Two bands add up: 60 at 4.4 g and 10 at 6.0 g (band 5.4-9.2): G44 ln 61 + G60 ln 11.
    assert im.banded_osteogenic_index([4.4] * 60 + [6.0] * 10, 64.0) == pytest.approx(
        g44 * math.log(61) + g60 * math.log(11))


def test_wrist_recordings_are_counted_but_get_no_force_or_index():
    t, acc = recording(20, [1.5], [5.0])
    s = count(t, acc, site="wrist")
    assert s["impacts"] == 1
    assert s["days"][0]["osteogenic_index"] is None
    assert any("wrist" in n for n in s["notes"])


@pytest.mark.parametrize("change, words", [
    ("slow", "at least 10 Hz"),
    ("huge", "at most 100 g"),
    ("gap", "at most one day"),
    ("backwards", "increase"),
    ("nan", "a number"),
])
def test_implausible_signals_are_refused_with_what_is_wrong(change, words):
    t, acc = recording(30, [1.0], [5.0])
    if change == "slow":
        t, acc = recording(600, [], [], rate_hz=5.0)
    elif change == "huge":
        acc[100, 1] = 150.0
    elif change == "gap":
        t = t.copy()
        t[1000:] += 25 * 3600
    elif change == "backwards":
        t = t.copy()
        t[50] = t[10]
    elif change == "nan":
        acc[20, 0] = np.nan
    with pytest.raises(InputError) as err:
        count(t, acc)
    assert words in str(err.value)


def test_counting_imports_neither_the_store_the_handout_nor_the_vendor_reader():
    import subprocess
    import sys
    code = ("import sys, prescribe.sensor, prescribe.sensor.summary, prescribe.sensor.compare\n"
            "bad = sorted(m for m in sys.modules if m.startswith(('prescribe.store', 'prescribe.handout', "
            "'prescribe.ui', 'skdh', 'sqlalchemy', 'ipywidgets')))\nprint(','.join(bad))")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip() == ""
