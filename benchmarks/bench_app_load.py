"""Benchmark: the app under load, in one run on this machine, loopback only, bounded.

Serves the app with `prescribe app`'s own Voila command (preheated pool, kernel limit and
timeouts sized to the machine: prescribe.ui.server) and drives Debian's chromium:

1. single page: a fresh page until the intake form is usable, closed as a browser closes it
   (its unload beacon stops the kernel), three times; the median is the baseline;
2. burst: ten pages opened at once, each until the app is usable; a page that shows the
   busy notice is counted and waited for (it retries by itself); none may stay blank;
   goal: the slowest within 4x the single page's median, and within 1.5x the slowest of ten
   bare pages opened at once in the same run (5.);
3. churn: thirty page opens and closes in a row; afterwards no more kernels alive than the
   pool (no page is open);
4. cost: memory (resident) of each idle page's kernel, CPU seconds per extra page (the
   kernels' and the server's CPU over the burst, divided by its pages), and the processor
   time of the server, the kernels and the browser over the burst, for the app and the bare page;
5. baseline: a bare one-widget Voila page served with the same command, opened alone and ten
   at once in the same run, so the burst's cost of the app itself shows apart from what any
   Voila page costs on this machine.

Run: ``.venv/bin/python benchmarks/bench_app_load.py [--burst 10] [--churn 30]``.  Exits 0
either way (a benchmark, not a test); prints the figures and whether each goal was met.
"""

from __future__ import annotations

import argparse
import asyncio
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from playwright.async_api import async_playwright

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from prescribe.cli.app_cmd import notebook_path, voila_command, voila_environment  # noqa: E402
from prescribe.ui.server import POOL_REFILL_DELAY_S, server_limits  # noqa: E402

CHROMIUM = "/usr/bin/chromium"
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage", "--disable-background-networking",
        "--disable-component-update", "--disable-sync", "--no-first-run",
        "--host-resolver-rules=MAP * ~NOTFOUND, EXCLUDE 127.0.0.1"]
READY = ".pr-intake-submit"
PAGE_LIMIT_S = 180  # a page not usable by then counts as blank
GOAL_BURST = 4.0
#: The app's slowest page of the burst against the bare page's slowest of the same burst.
GOAL_VS_BARE = 1.5


def free_port() -> int:
    import socket
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def kernels(server_pid: int) -> list[int]:
    """Process ids of the server's kernels (its children running ipykernel)."""
    out = []
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            stat = (entry / "stat").read_text()
            ppid = int(stat.rsplit(")", 1)[1].split()[1])
            if ppid == server_pid and b"ipykernel" in (entry / "cmdline").read_bytes():
                out.append(int(entry.name))
        except (OSError, ValueError, IndexError):
            continue
    return out


def cpu_s(pid: int) -> float:
    try:
        fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
        return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")
    except (OSError, ValueError, IndexError):
        return 0.0


def browser_cpu_s() -> float:
    """Processor time of the chromium processes this benchmark started (its descendants)."""
    parent: dict[int, int] = {}
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                parent[int(entry.name)] = int((entry / "stat").read_text().rsplit(")", 1)[1].split()[1])
            except (OSError, ValueError, IndexError):
                continue
    me, total = os.getpid(), 0.0
    for pid in parent:
        p, seen = pid, 0
        while p in parent and p != me and seen < 64:
            p, seen = parent[p], seen + 1
        if p == me:
            try:
                if b"chromium" in Path(f"/proc/{pid}/cmdline").read_bytes():
                    total += cpu_s(pid)
            except OSError:
                continue
    return total


def burst_cpu(server_pid: int) -> dict[str, float]:
    """Processor seconds so far: the server, its kernels alive now, and the browser."""
    return {"server": cpu_s(server_pid), "kernels": sum(cpu_s(k) for k in kernels(server_pid)),
            "browser": browser_cpu_s()}


def spent(before: dict[str, float], after: dict[str, float]) -> dict[str, float]:
    return {k: after[k] - before[k] for k in before}


def rss_mb(pid: int) -> float:
    try:
        for line in Path(f"/proc/{pid}/status").read_text().splitlines():
            if line.startswith("VmRSS:"):
                return int(line.split()[1]) / 1024
    except OSError:
        pass
    return 0.0


async def settle(server_pid: int, pool: int, limit_s: float = 300.0) -> None:
    """Wait until the server has its pool of kernels and they are quiet (preheated): the pool's
    refill delay passed, at least ``pool`` kernels alive and under 0.2 CPU seconds spent by the
    server and its kernels in 2 s.  (A kernel count alone can include a closed page's kernel
    while the pool's replacement still waits out its delay.)"""
    await asyncio.sleep(POOL_REFILL_DELAY_S + 1)
    deadline = time.monotonic() + limit_s
    while time.monotonic() < deadline:
        ids = kernels(server_pid)
        before = cpu_s(server_pid) + sum(cpu_s(k) for k in ids)
        await asyncio.sleep(2)
        after = cpu_s(server_pid) + sum(cpu_s(k) for k in kernels(server_pid))
        if len(ids) >= pool and after - before < 0.2:
            return


async def guard(context, outside: list) -> None:
    async def handler(route):
        url = route.request.url
        if url.startswith(("data:", "blob:")) or url.startswith("http://127.0.0.1"):
            await route.continue_()
        else:
            outside.append(url)
            await route.abort()
    await context.route("**/*", handler)


async def open_page(context, url: str) -> tuple[float, bool, object]:
    """Seconds until the app is usable, whether the busy notice was seen, and the page."""
    page = await context.new_page()
    t0 = time.perf_counter()
    busy = False
    await page.goto(url, timeout=PAGE_LIMIT_S * 1000)
    deadline = t0 + PAGE_LIMIT_S
    while time.perf_counter() < deadline:
        if await page.locator(READY).is_visible():
            return time.perf_counter() - t0, busy, page
        if await page.locator(".pr-busy").count():
            busy = True
        await asyncio.sleep(0.1)
    return float("inf"), busy, page


BARE_NOTEBOOK = {
    "cells": [{"cell_type": "code", "execution_count": None, "id": "bare", "metadata": {}, "outputs": [],
               "source": "import ipywidgets as w\nb = w.Button(description='Go')\nb.add_class('bench-button')\nb"}],
    "metadata": {"kernelspec": {"display_name": "Python 3", "language": "python", "name": "python3"}},
    "nbformat": 4, "nbformat_minor": 5}


async def bare_baseline(burst: int) -> tuple[float, list[float], dict[str, float]]:
    """A bare one-widget page served alike: one page alone (median of 3), then ``burst`` at once."""
    global READY
    import json
    with tempfile.TemporaryDirectory(prefix="bench-bare-") as tmp:
        notebook = Path(tmp) / "bare.ipynb"
        notebook.write_text(json.dumps(BARE_NOTEBOOK))
        port = free_port()
        proc = subprocess.Popen(voila_command(port, notebook), env=voila_environment(str(Path(tmp) / "b.db")),
                                stdout=subprocess.DEVNULL, stderr=subprocess.STDOUT, start_new_session=True)
        ready, READY = READY, ".bench-button"
        pool = server_limits().pool_size
        try:
            await settle(proc.pid, pool)
            url = f"http://127.0.0.1:{port}/"
            async with async_playwright() as p:
                browser = await p.chromium.launch(executable_path=CHROMIUM, args=ARGS, headless=True)
                context = await browser.new_context()
                single = []
                for _ in range(3):
                    t, _, page = await open_page(context, url)
                    single.append(t)
                    await page.close(run_before_unload=True)
                    await settle(proc.pid, pool)
                cpu0 = burst_cpu(proc.pid)
                results = await asyncio.gather(*(open_page(context, url) for _ in range(burst)))
                cpu = spent(cpu0, burst_cpu(proc.pid))
                await browser.close()
        finally:
            READY = ready
            proc.terminate()
            try:
                proc.wait(timeout=30)
            except subprocess.TimeoutExpired:
                proc.kill()
    return statistics.median(single), sorted(t for t, _, _ in results), cpu


async def run(args) -> dict:
    limits = server_limits()
    with tempfile.TemporaryDirectory(prefix="bench-load-") as tmp:
        env = voila_environment(str(Path(tmp) / "load.db"))
        port = free_port()
        url = f"http://127.0.0.1:{port}/"
        log = open(Path(tmp) / "server.log", "w")
        proc = subprocess.Popen(voila_command(port, notebook_path()), env=env, stdout=log,
                                stderr=subprocess.STDOUT, start_new_session=True)
        outside: list[str] = []
        try:
            await settle(proc.pid, limits.pool_size)  # the server up and its pool preheated
            async with async_playwright() as p:
                browser = await p.chromium.launch(executable_path=CHROMIUM, args=ARGS, headless=True)
                context = await browser.new_context()
                await guard(context, outside)
                single = []
                for _ in range(3):
                    t, _, page = await open_page(context, url)
                    single.append(t)
                    await page.close(run_before_unload=True)
                    await settle(proc.pid, limits.pool_size)  # the pool refilled
                cpu0 = burst_cpu(proc.pid)
                before = set(kernels(proc.pid))
                results = await asyncio.gather(*(open_page(context, url) for _ in range(args.burst)))
                burst_kernels = [k for k in kernels(proc.pid) if k not in before]
                cpu = spent(cpu0, burst_cpu(proc.pid))
                await asyncio.sleep(3)
                idle_mb = [rss_mb(k) for k in kernels(proc.pid)]
                for _, _, page in results:
                    await page.close(run_before_unload=True)
                await settle(proc.pid, limits.pool_size)
                for _ in range(args.churn):
                    _, _, page = await open_page(context, url)
                    await page.close(run_before_unload=True)
                await asyncio.sleep(10)  # unload beacons handled
                await settle(proc.pid, limits.pool_size)  # pool refilled
                alive_after_churn = len(kernels(proc.pid))
                await browser.close()
        finally:
            proc.terminate()
            try:
                proc.wait(timeout=30)
            except subprocess.TimeoutExpired:
                proc.kill()
    times = [t for t, _, _ in results]
    med_single = statistics.median(single)
    bare_single, bare_burst, bare_cpu = await bare_baseline(args.burst)
    return {
        "machine": {"cpus": limits.cpus, "memory_mb": limits.memory_mb},
        "limits": {"max_kernels": limits.max_kernels, "pool": limits.pool_size},
        "single_s": single, "single_median_s": med_single,
        "burst": args.burst, "burst_s": sorted(times), "burst_busy_seen": sum(b for _, b, _ in results),
        "burst_blank": sum(t == float("inf") for t in times),
        "burst_slowest_ratio": max(times) / med_single,
        "churn": args.churn, "kernels_alive_after_churn": alive_after_churn,
        "idle_page_mb": idle_mb, "cpu_s_per_extra_page": (cpu["server"] + cpu["kernels"]) / args.burst,
        "burst_cpu_s": cpu, "bare_burst_cpu_s": bare_cpu,
        "burst_new_kernels": len(burst_kernels), "outside_requests": len(outside),
        "bare_single_s": bare_single, "bare_burst_s": bare_burst,
        "bare_burst_ratio": max(bare_burst) / bare_single,
        "app_vs_bare_burst": max(times) / max(bare_burst),
    }


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--burst", type=int, default=10)
    parser.add_argument("--churn", type=int, default=30)
    args = parser.parse_args(argv)
    if not os.path.exists(CHROMIUM):
        raise SystemExit(f"{CHROMIUM} is needed (apt-get install --no-install-recommends chromium)")
    f = asyncio.run(run(args))
    print(f"machine: {f['machine']['cpus']} processors, {f['machine']['memory_mb']} MB; server limits: "
          f"{f['limits']['max_kernels']} pages at once, {f['limits']['pool']} preheated; "
          f"load average {os.getloadavg()[0]:.1f}")
    print(f"single page open -> usable: median {f['single_median_s']:.2f} s "
          f"({', '.join(f'{t:.2f}' for t in f['single_s'])})")
    ok = f["burst_blank"] == 0 and f["burst_slowest_ratio"] <= GOAL_BURST
    print(f"{f['burst']} pages at once: usable after {', '.join(f'{t:.1f}' for t in f['burst_s'])} s; "
          f"blank {f['burst_blank']}, busy notice seen on {f['burst_busy_seen']}; slowest "
          f"{f['burst_slowest_ratio']:.1f}x the single page (goal <= {GOAL_BURST:g}x, none blank): "
          f"{'MET' if ok else 'NOT MET'}")
    print(f"baseline, a bare one-widget Voila page served alike: alone {f['bare_single_s']:.2f} s; "
          f"{f['burst']} at once, slowest {max(f['bare_burst_s']):.1f} s = {f['bare_burst_ratio']:.1f}x alone; "
          f"the app's slowest burst page is {f['app_vs_bare_burst']:.2f}x the bare burst's slowest "
          f"({max(f['burst_s']):.1f} s against {max(f['bare_burst_s']):.1f} s; goal <= {GOAL_VS_BARE:g}x, none "
          f"blank): {'MET' if f['burst_blank'] == 0 and f['app_vs_bare_burst'] <= GOAL_VS_BARE else 'NOT MET'}")
    print(f"{f['churn']} opens and closes in a row: {f['kernels_alive_after_churn']} kernels alive after "
          f"(pool {f['limits']['pool']}, no page open): "
          f"{'MET' if f['kernels_alive_after_churn'] <= f['limits']['pool'] else 'NOT MET'}")
    idle = f["idle_page_mb"]
    if idle:
        print(f"memory per idle page (kernel resident set): median {statistics.median(idle):.0f} MB "
              f"(min {min(idle):.0f}, max {max(idle):.0f}, {len(idle)} kernels)")
    print(f"CPU per extra page over the burst (kernels and server): {f['cpu_s_per_extra_page']:.2f} s; "
          f"requests off 127.0.0.1: {f['outside_requests']}")
    app, bare = f["burst_cpu_s"], f["bare_burst_cpu_s"]
    print(f"processor time over the burst of {f['burst']}: app server {app['server']:.2f} s, kernels "
          f"{app['kernels']:.2f} s, browser {app['browser']:.2f} s; bare page server {bare['server']:.2f} s, "
          f"kernels {bare['kernels']:.2f} s, browser {bare['browser']:.2f} s (the browser runs on the same "
          f"processors as the server here)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
