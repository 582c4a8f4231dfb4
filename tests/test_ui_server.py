"""The app server's sizing and limits (prescribe.ui.server), without a browser."""

from __future__ import annotations

import asyncio
import concurrent.futures
from pathlib import Path

import pytest
from tornado import web

from prescribe.cli import app_cmd
from prescribe.errors import InputError
from prescribe.ui import server


def test_limits_follow_the_machine():
    # Half of 24 GiB at 150 MB a page: 81 pages; a preheated kernel for every 8 of them (10).
    big = server.server_limits(memory_mb=24 * 1024, cpus=2)
    assert (big.max_kernels, big.pool_size, big.max_starting) == (81, 10, 1)
    # 4 GiB: 13 pages, and one preheated kernel per processor.
    assert (server.server_limits(memory_mb=4096, cpus=2).pool_size) == 2
    # A small machine still serves two pages and keeps one preheated.
    small = server.server_limits(memory_mb=600, cpus=1)
    assert (small.max_kernels, small.pool_size, small.max_starting) == (2, 1, 1)
    assert server.server_limits(memory_mb=24 * 1024, cpus=8).max_starting == 7
    assert server.server_limits(memory_mb=10**7, cpus=64).max_kernels == server.MAX_KERNELS
    assert server.server_limits(memory_mb=10**7, cpus=64).pool_size == server.MAX_POOL
    assert server.memory_available_mb() > 0


def test_voila_gets_each_option_once_with_timeouts_that_fit_a_loaded_machine():
    cmd = app_cmd.voila_command(8866, Path("clinic.ipynb"), max_pages=5, pool=2)
    names = [a.split("=")[0] for a in cmd if a.startswith("--")]
    assert len(names) == len(set(names))  # Voila exits when one option is given twice
    assert "--LimitedKernelManager.max_kernels=5" in cmd and "--pool_size=2" in cmd
    assert any(a.startswith("--LimitedKernelManager.max_starting=") for a in cmd)
    assert f"--VoilaExecutor.iopub_timeout={server.IOPUB_TIMEOUT_S}" in cmd
    assert server.IOPUB_TIMEOUT_S >= 30  # Voila's 4 s default is what left pages blank
    no_pool = app_cmd.voila_command(8866, Path("clinic.ipynb"), max_pages=5, pool=0)
    assert not any(a.startswith("--preheat_kernel") for a in no_pool)


@pytest.mark.parametrize("kwargs, field", [({"max_pages": 0}, "--max-pages"), ({"pool": 99}, "--pool"),
                                           ({"max_pages": 2, "pool": 2}, "--pool"),
                                           ({"cell_timeout_s": 0}, app_cmd.CELL_TIMEOUT_ENV)])
def test_bad_limits_are_bad_input_naming_the_option(kwargs, field):
    with pytest.raises(InputError, match=f"^{field}"):
        app_cmd.voila_command(8866, Path("clinic.ipynb"), **kwargs)


def _run(coroutine):
    """Run a coroutine on a loop of its own in another thread (other tests may leave a loop
    running in this one)."""
    with concurrent.futures.ThreadPoolExecutor(max_workers=1) as pool:
        return pool.submit(asyncio.run, coroutine).result()


def test_no_kernel_is_started_past_the_limit():
    manager = server.LimitedKernelManager(max_kernels=2)
    started = []

    async def fake_start(self, *args, **kwargs):
        started.append(kwargs)
        return "k"

    base = server.LimitedKernelManager.__mro__[1]
    original = base.start_kernel
    base.start_kernel = fake_start
    try:
        manager.list_kernel_ids = lambda: ["a"]
        assert _run(manager.start_kernel(env={})) == "k"
        manager.list_kernel_ids = lambda: ["a", "b"]
        with pytest.raises(web.HTTPError) as refused:
            _run(manager.start_kernel(env={"VOILA_PREHEAT": "True"}))
        assert refused.value.status_code == 503
    finally:
        base.start_kernel = original
    assert len(started) == 1


def test_kernels_start_a_few_at_a_time_first_come_first_served():
    # Ten kernel starts at once (a pool refilling after a burst of pages) through a gate of 1:
    # never two at once, and in the order they asked.
    gate = server.StartGate(1)
    order = []

    async def start(i):
        async with gate:
            assert gate.starting == 1
            await asyncio.sleep(0.01)
            order.append(i)

    async def burst():
        await asyncio.gather(*(start(i) for i in range(10)))
    _run(burst())
    assert order == list(range(10)) and gate.most_at_once == 1
    wide = server.StartGate(3)

    async def many():
        async def one():
            async with wide:
                await asyncio.sleep(0.02)
        await asyncio.gather(*(one() for _ in range(9)))
    _run(many())
    assert wide.most_at_once == 3


def test_the_manager_starts_kernels_through_its_gate():
    manager = server.LimitedKernelManager(max_kernels=50, max_starting=2)
    running = []
    most = []

    async def fake_start(self, *args, **kwargs):
        running.append(1)
        most.append(len(running))
        await asyncio.sleep(0.02)
        running.pop()
        return "k"

    base = server.LimitedKernelManager.__mro__[1]
    original = base.start_kernel
    base.start_kernel = fake_start
    try:
        manager.list_kernel_ids = lambda: []

        async def burst():
            return await asyncio.gather(*(manager.start_kernel(env={}) for _ in range(8)))
        assert _run(burst()) == ["k"] * 8
    finally:
        base.start_kernel = original
    assert max(most) == 2 and manager.start_gate.most_at_once == 2
