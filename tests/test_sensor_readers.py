"""The worn-sensor readers on the two real files in ../shared/data/sensors/ and on CSVs made
here; bad files exit 2 naming what is wrong.

The real files' facts come from that folder's README (the scikit-digital-health project's
test data): the .cwa holds about 58,800 tri-axial samples at 200 Hz, the .bin about 900
at 50 Hz.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np
import pytest

from prescribe.cli import main
from prescribe.errors import InputError
from prescribe.sensor import summarise_file
from prescribe.sensor.readers import open_recording, write_csv
from sensor_signals import MONDAY_2026_03_02, recording

ROOT = Path(__file__).resolve().parents[1]
SENSORS = ROOT.parent / "shared" / "data" / "sensors"
CWA = SENSORS / "ax3_sample.cwa"
BIN = SENSORS / "gnactv_sample.bin"


def run(capsys, *args):
    capsys.readouterr()
    try:
        code = main(list(args))
    except SystemExit as exc:
        code = exc.code
    out, err = capsys.readouterr()
    assert "Traceback" not in err
    return code, out, err


def test_the_real_files_are_there():
    # Fail loudly (never skip) when the shared data are missing: CI has them beside the repository.
    assert CWA.is_file() and BIN.is_file(), f"the real sensor files are missing from {SENSORS}"


def test_axivity_cwa_sample_count_and_rate(capsys):
    # ../shared/data/sensors/README.md: about 58,800 tri-axial samples at 200 Hz.
    code, out, err = run(capsys, "sensor", str(CWA))
    assert code == 0, err
    s = json.loads(out)
    assert s["format"] == "cwa"
    assert s["samples"] == 58_800
    assert s["sample_rate_hz"] == 200.0
    # 58,800 samples at about 200 Hz span about 294 s.
    assert s["duration_s"] == pytest.approx(58_800 / 200, rel=0.02)
    assert s["days"] and s["days"][0]["date"] == s["start"][:10]
    assert sum(s["impacts_by_band"].values()) == s["impacts"]


def test_geneactiv_bin_sample_count_and_rate():
    # README: about 900 tri-axial samples at 50 Hz.
    s = summarise_file(BIN)
    assert s["format"] == "bin"
    assert s["samples"] == 900
    assert s["sample_rate_hz"] == 50.0
    assert s["measured_sample_rate_hz"] == pytest.approx(50.0, rel=0.01)


def test_vendor_chunks_cover_every_sample_once():
    rec = open_recording(CWA, chunk_rows=10_000)
    sizes = [len(t) for t, _ in rec.chunks]
    assert sum(sizes) == 58_800 and max(sizes) == 10_000


def test_csv_round_trip_counts_what_was_put_in(tmp_path, capsys):
    peaks = [0.5, 1.5, 3.0, 4.5, 6.0]
    t, acc = recording(30, peaks, [3, 8, 13, 18, 23], noise_g=0.01)
    path = tmp_path / "walk.csv"
    write_csv(path, t, acc)
    code, out, err = run(capsys, "sensor", str(path), "--body-mass-kg", "64")
    assert code == 0, err
    s = json.loads(out)
    assert s["sample_rate_hz"] == pytest.approx(100.0)
    assert s["samples"] == 3000
    assert s["impacts_by_band"] == {"0.3-1.0": 1, "1.1-2.4": 1, "2.5-3.8": 1, "3.9-5.3": 1, "5.4-9.2": 1,
                                    "above_9.2": 0}
    assert s["impacts_above_4g"] == 2 and s["days"][0]["date"] == "2026-03-02"
    assert s["cautions"] and s["sources"]


def test_csv_in_small_chunks_counts_the_same(tmp_path):
    t, acc = recording(20, [2.0, 5.0, 0.7], [4, 9, 14])
    path = tmp_path / "x.csv"
    write_csv(path, t, acc)
    whole = summarise_file(path)
    rec = open_recording(path, chunk_rows=13)
    assert sum(len(c[0]) for c in rec.chunks) == 2000
    assert whole["impacts"] == 3


def _csv(tmp_path, text: str, name="bad.csv") -> Path:
    path = tmp_path / name
    path.write_text(text)
    return path


def _rows(t, acc) -> str:
    return "time_s,x_g,y_g,z_g\n" + "".join(f"{a},{b},{c},{d}\n" for a, (b, c, d) in zip(t, acc))


@pytest.mark.parametrize("case, words", [
    ("no_time", "time_s"),
    ("slow", "at least 10 Hz"),
    ("huge", "at most 100 g"),
    ("gap", "at most one day"),
    ("text", "numbers in every cell"),
    ("empty", "at least 3 samples"),
    ("metres", "m/s^2"),
])
def test_bad_csv_files_exit_2_naming_what_is_wrong(tmp_path, capsys, case, words):
    t, acc = recording(5, [], [], rate_hz=50)
    if case == "no_time":
        text = "seconds,x_g,y_g,z_g\n0,0,0,1\n0.02,0,0,1\n0.04,0,0,1\n"
    elif case == "slow":
        t, acc = recording(60, [], [], rate_hz=4)
        text = _rows(t, acc)
    elif case == "huge":
        acc[30, 2] = 120.5
        text = _rows(t, acc)
    elif case == "gap":
        t = t.copy()
        t[100:] += 2 * 86_400
        text = _rows(t, acc)
    elif case == "text":
        text = _rows(t[:5], acc[:5]) + "0.5,abc,0,1\n"
    elif case == "metres":  # the same recording in m/s^2 (a sensor at rest reads 9.81)
        text = _rows(t, acc * 9.80665)
    else:
        text = "time_s,x_g,y_g,z_g\n"
    code, out, err = run(capsys, "sensor", str(_csv(tmp_path, text)))
    assert code == 2, err
    assert out == "" and words in err, err


def test_an_unreadable_vendor_file_exits_2(tmp_path, capsys):
    path = tmp_path / "broken.cwa"
    path.write_bytes(b"not an accelerometer file" * 50)
    code, out, err = run(capsys, "sensor", str(path))
    assert code == 2 and out == ""
    assert "readable Axivity .cwa file" in err


def test_without_the_optional_readers_a_vendor_file_exits_2_saying_how_to_install(monkeypatch, capsys):
    # Simulate a core install: scikit-digital-health cannot be imported.
    monkeypatch.setitem(sys.modules, "skdh", None)
    monkeypatch.setitem(sys.modules, "skdh.io", None)
    code, out, err = run(capsys, "sensor", str(CWA))
    assert code == 2 and out == ""
    assert "pip install 'prescribe[sensors]'" in err


def test_the_core_install_reads_csv_without_scikit_digital_health(tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "skdh", None)
    monkeypatch.setitem(sys.modules, "skdh.io", None)
    t, acc = recording(10, [1.2], [5])
    path = tmp_path / "ok.csv"
    write_csv(path, t, acc)
    assert summarise_file(path)["impacts"] == 1


def test_unknown_suffix_needs_a_format(tmp_path):
    path = tmp_path / "x.dat"
    path.write_text("time_s,x_g,y_g,z_g\n")
    with pytest.raises(InputError, match="--format"):
        summarise_file(path)


def test_a_csv_saved_with_a_byte_order_mark_reads(tmp_path):
    t, acc = recording(10, [1.2], [5])
    path = tmp_path / "bom.csv"
    write_csv(path, t, acc)
    path.write_bytes(b"\xef\xbb\xbf" + path.read_bytes())
    assert summarise_file(path)["impacts"] == 1
