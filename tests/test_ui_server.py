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
    # Half of 24 GiB at 150 MB a page: 81 pages; one preheated kernel per processor.
    big = server.server_limits(memory_mb=24 * 1024, cpus=2)
    assert (big.max_kernels, big.pool_size) == (81, 2)
    # A small machine still serves two pages and keeps one preheated.
    small = server.server_limits(memory_mb=600, cpus=1)
    assert (small.max_kernels, small.pool_size) == (2, 1)
    assert server.server_limits(memory_mb=10**7, cpus=64).max_kernels == server.MAX_KERNELS
    assert server.server_limits(memory_mb=10**7, cpus=64).pool_size == server.MAX_POOL
    assert server.memory_available_mb() > 0


def test_voila_gets_each_option_once_with_timeouts_that_fit_a_loaded_machine():
    cmd = app_cmd.voila_command(8866, Path("clinic.ipynb"), max_pages=5, pool=2)
    names = [a.split("=")[0] for a in cmd if a.startswith("--")]
    assert len(names) == len(set(names))  # Voila exits when one option is given twice
    assert "--LimitedKernelManager.max_kernels=5" in cmd and "--pool_size=2" in cmd
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
