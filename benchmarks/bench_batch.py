"""Benchmark: the whole caseload command, ``prescribe screen --batch IN.csv --out OUT.csv``, in
process, against the bare pandas read and write of the same CSV, measured alike in the same run.

Both sides read the same invented caseload file (1,000 and 100,000 rows) and write a CSV:

- command: ``prescribe.cli.main(["screen", "--batch", IN, "--out", OUT])`` (reading, column-wise
  validation, screening, the results CSV written atomically, the JSON summary);
- baseline: ``pandas.read_csv(IN).to_csv(OUT2, index=False)``.

Each side: one warm-up call, then REPEATS timed calls; medians compared (min and max shown).
Goal: the extra cost of 99,000 more rows through the command is at most 4x the extra cost of
the same rows through the bare pandas read and write.

Memory: 1,000,000 rows through the command in a fresh interpreter, peak resident memory
(``resource.getrusage``) against the file size, beside the same for 100,000 rows, for the bare
pandas read and write of the 1,000,000-row file, and for an interpreter that only imports.

With ``--v2`` the caseload also has the version-2 columns (``bench_screening.invented_caseload``).

Run: ``.venv/bin/python benchmarks/bench_batch.py [--no-million] [--v2]``
"""

from __future__ import annotations

import contextlib
import io
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pandas as pd

sys.path.insert(0, str(Path(__file__).parent))
from bench_screening import invented_caseload  # noqa: E402

from prescribe.screening.batch_io import frame_to_csv_text  # noqa: E402
from prescribe.cli import main  # noqa: E402

REPEATS = 5
SIZES = (1_000, 100_000)
MILLION = 1_000_000


V2 = "--v2" in sys.argv


def write_caseload(n: int, folder: Path, v2: bool = False) -> Path:
    path = folder / f"caseload_{n}.csv"
    path.write_text(frame_to_csv_text(invented_caseload(n, v2=v2)), encoding="utf-8")
    return path


def write_caseload_elsewhere(n: int, folder: Path) -> Path:
    """:func:`write_caseload` in a child interpreter (this process stays small)."""
    code = (f"import sys; sys.path.insert(0, {str(Path(__file__).parent)!r})\n"
            f"from bench_batch import write_caseload; from pathlib import Path\n"
            f"print(write_caseload({n}, Path({str(folder)!r}), v2={V2}))")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return Path(proc.stdout.strip())


def run_command(src: Path, out: Path) -> None:
    with contextlib.redirect_stdout(io.StringIO()):
        code = main(["screen", "--batch", str(src), "--out", str(out)])
    if code != 0:
        raise SystemExit(f"the command failed on {src} (exit {code})")


def run_pandas(src: Path, out: Path) -> None:
    pd.read_csv(src).to_csv(out, index=False)


def timed_alike(sides: dict) -> dict[str, tuple[list[float], list[float]]]:
    """Wall and CPU seconds of REPEATS calls of each side after one warm-up call each; the sides
    take turns within each repeat, so a change in the machine's load falls on both alike."""
    for fn in sides.values():
        fn()
    out = {name: ([], []) for name in sides}
    for _ in range(REPEATS):
        for name, fn in sides.items():
            t0, c0 = time.perf_counter(), time.process_time()
            fn()
            out[name][0].append(time.perf_counter() - t0)
            out[name][1].append(time.process_time() - c0)
    return out


def span(xs: list[float]) -> str:
    return f"median {statistics.median(xs):.3f} s (min {min(xs):.3f}, max {max(xs):.3f})"


def peak_in_fresh_interpreter(what: str, src: Path, out: Path) -> int:
    """Peak resident memory [bytes] of a fresh interpreter doing ``what`` (command | pandas | imports).

    On Linux a child's ``ru_maxrss`` starts at the resident size of the process that forked it,
    so these children are started while this process is still small (before any caseload is
    made here) and the "imports" child shows that floor.
    """
    code = (
        "import contextlib, io, resource, sys\n"
        "import pandas as pd\n"
        "from prescribe.cli import main\n"
        f"what, src, out = {what!r}, {str(src)!r}, {str(out)!r}\n"
        "if what == 'command':\n"
        "    with contextlib.redirect_stdout(io.StringIO()):\n"
        "        assert main(['screen', '--batch', src, '--out', out]) == 0\n"
        "elif what == 'pandas':\n"
        "    pd.read_csv(src).to_csv(out, index=False)\n"
        "print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024)\n"
    )
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return int(proc.stdout.strip())


def mb(n: float) -> str:
    return f"{n / 1e6:,.0f} MB"


def main_bench() -> int:
    million = "--no-million" not in sys.argv
    with tempfile.TemporaryDirectory(prefix="bench-batch-") as tmp:
        folder = Path(tmp)
        files = {n: write_caseload_elsewhere(n, folder) for n in SIZES}
        peaks = {}
        if million:
            big = write_caseload_elsewhere(MILLION, folder)
            imports = peak_in_fresh_interpreter("imports", big, folder / "o.csv")
            peaks = {
                "command, 100,000 rows": (peak_in_fresh_interpreter("command", files[SIZES[-1]], folder / "o.csv"),
                                          files[SIZES[-1]].stat().st_size),
                "command, 1,000,000 rows": (peak_in_fresh_interpreter("command", big, folder / "o.csv"),
                                            big.stat().st_size),
            }
            out_size = (folder / "o.csv").stat().st_size
            peaks["bare pandas read+write, 1,000,000 rows"] = (peak_in_fresh_interpreter("pandas", big, folder / "o.csv"),
                                                               big.stat().st_size)
            load_memory = os.getloadavg()[0]
        runs = {}
        for n, src in files.items():
            runs[n] = timed_alike({"command": lambda: run_command(src, folder / "out_cmd.csv"),
                                   "pandas": lambda: run_pandas(src, folder / "out_pd.csv")})
        print(("caseload with the version-2 columns; " if V2 else "") + f"each side: 1 warm-up call, then {REPEATS} timed calls taking turns with the other side; "
              "medians compared; in process")
        for n in SIZES:
            size = files[n].stat().st_size
            (cw, cc), (bw, bc) = runs[n]["command"], runs[n]["pandas"]
            print(f"{n:>9,} rows ({size / 1e6:.2f} MB in): command wall {span(cw)}, CPU {span(cc)}; "
                  f"bare pandas read+write wall {span(bw)}, CPU {span(bc)}")
        small, large = SIZES
        med = statistics.median
        ratios = {}
        for k, kind in enumerate(("wall", "CPU")):
            extra_cmd = med(runs[large]["command"][k]) - med(runs[small]["command"][k])
            extra_base = med(runs[large]["pandas"][k]) - med(runs[small]["pandas"][k])
            ratios[kind] = extra_cmd / extra_base
            print(f"extra {kind} time of {large - small:,} more rows: command {extra_cmd:.3f} s, bare pandas "
                  f"{extra_base:.3f} s; ratio {ratios[kind]:.2f}x  goal <= 4x: "
                  f"{'met' if ratios[kind] <= 4 else 'NOT met'}")
        print(f"load average while timing: {os.getloadavg()[0]:.1f} (2-core machine shared with other work)")
        if million:
            print(f"peak resident memory, ru_maxrss of a fresh interpreter each (imports alone: {mb(imports)}; "
                  f"load average {load_memory:.1f}):")
            for label, (peak, nbytes) in peaks.items():
                print(f"  {label}: {mb(peak)} peak, {mb(peak - imports)} above the imports; "
                      f"input file {mb(nbytes)} ({(peak - imports) / nbytes:.2f}x the file)")
            print(f"results file of 1,000,000 rows: {mb(out_size)}")
    return 0 if max(ratios.values()) <= 4 else 1


if __name__ == "__main__":
    sys.exit(main_bench())
