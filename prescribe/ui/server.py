"""How the app's Voila server shares the machine: a kernel limit, a preheated pool, timeouts.

Each open page of the app is its own Python kernel (about 130 MB).  Opened all at once on a
small machine, pages used to stall behind one another until Voila gave up waiting for a slow
kernel and left a blank page.  This module holds the server side of the cure (see
docs/app.md, "Under load"):

* :func:`server_limits` sizes the server to the machine: how many kernels may be alive at
  once (from the memory the server may use) and how many are kept preheated (from the
  processor count);
* :class:`LimitedKernelManager` refuses a page's kernel past that limit with
  "503 busy", which the page template turns into a "the clinic's server is busy, retrying"
  page that retries by itself, instead of starting a kernel that would slow everyone;
* :data:`CELL_TIMEOUT_S` and :data:`IOPUB_TIMEOUT_S` are the execution timeouts, long
  enough for a loaded machine; past them the page shows a message with a way to try again.

Only the Voila server process imports this module (it imports jupyter_server and tornado).
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

#: Memory one idle app page costs [MB]: its kernel measured at about 128 MB resident after
#: the page opened and the engines loaded (benchmarks/bench_app_load.py prints the figure).
KERNEL_MB = 150
#: Share of the memory the server may use that kernels may take (the rest: the server, the
#: browser of a local user, the store) (common practice: leave room for the rest).
KERNEL_MEMORY_SHARE = 0.5
#: Bounds on the kernel limit, whatever the memory.
MIN_KERNELS, MAX_KERNELS = 2, 200
#: Preheated kernels: one per processor, at most this many (each costs KERNEL_MB idle).
MAX_POOL = 4
#: A cell may run this long before the page is told it timed out [s]; opening the app
#: executes two short cells, which take 1-3 s alone and up to about 40 s on a swamped 2-core
#: machine (measured: ten pages opened at once).
CELL_TIMEOUT_S = 120
#: How long Voila waits for a cell's output after the kernel said it finished [s].  Voila's
#: default (4 s) is what left pages blank under load: the output came later and was lost.
IOPUB_TIMEOUT_S = 60
#: A kernel with no open page is stopped after this long idle [s], checked this often.
#: A page closed in the browser stops its kernel at once (Voila's unload beacon); this
#: catches the rest (a dropped connection, a crashed tab).  A connected kernel is never culled.
CULL_IDLE_TIMEOUT_S = 180
CULL_INTERVAL_S = 30
#: Seconds before a used preheated kernel is replaced.  Pages wait for the pool's next
#: kernel in turn, so a longer delay would only make them wait.
POOL_REFILL_DELAY_S = 0


@dataclass(frozen=True)
class ServerLimits:
    """How many kernels may be alive at once, and how many are kept preheated."""

    max_kernels: int
    pool_size: int
    memory_mb: int
    cpus: int


def memory_available_mb() -> int:
    """Memory this server may use [MB]: the container's limit where one is set, else the machine's."""
    for path in ("/sys/fs/cgroup/memory.max", "/sys/fs/cgroup/memory/memory.limit_in_bytes"):
        try:
            text = Path(path).read_text().strip()
        except OSError:
            continue
        if text.isdigit() and int(text) < 1 << 60:
            return int(text) // (1 << 20)
    return os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES") // (1 << 20)


def server_limits(memory_mb: int | None = None, cpus: int | None = None) -> ServerLimits:
    """The kernel limit and pool size for a machine.

    ``max_kernels`` = KERNEL_MEMORY_SHARE x memory / KERNEL_MB, within
    [MIN_KERNELS, MAX_KERNELS]; ``pool_size`` = one preheated kernel per processor, at most
    MAX_POOL and always below the kernel limit.

    Examples: 24 GiB and 2 processors give 81 kernels and a pool of 2; 1 GiB and 1 processor
    give 3 kernels and a pool of 1.
    """
    memory_mb = memory_available_mb() if memory_mb is None else int(memory_mb)
    cpus = (os.cpu_count() or 1) if cpus is None else int(cpus)
    max_kernels = int(memory_mb * KERNEL_MEMORY_SHARE // KERNEL_MB)
    max_kernels = max(MIN_KERNELS, min(MAX_KERNELS, max_kernels))
    pool = max(1, min(MAX_POOL, cpus, max_kernels - 1))
    return ServerLimits(max_kernels=max_kernels, pool_size=pool, memory_mb=memory_mb, cpus=cpus)



def _build_limited():
    from tornado import web
    from traitlets import Integer

    from jupyter_server.services.kernels.kernelmanager import AsyncMappingKernelManager as base

    class LimitedKernelManager(base):
        """A kernel manager that starts no kernel once ``max_kernels`` are alive.

        A page that would need one gets HTTP 503; the app's page template turns it into "the
        clinic's server is busy, retrying", and the page retries by itself.  With Voila's
        preheated pool, pages take the pool's kernels in turn and the pool refills through
        :meth:`start_kernel`; at the limit a refill fails with the same 503, which the page
        that would have taken it receives.  When a kernel stops, the pool is refilled.
        """

        max_kernels = Integer(0, config=True, help="Kernels alive at once at most (0: no limit).")

        async def start_kernel(self, *args, **kwargs):
            alive = len(self.list_kernel_ids())
            if self.max_kernels and alive >= self.max_kernels:
                self.log.warning("prescribe: %d kernels alive, the limit is %d: a page is told the server "
                                 "is busy (503) and retries by itself", alive, self.max_kernels)
                raise web.HTTPError(503, "%d pages open, the limit is %d", alive, self.max_kernels,
                                    reason="The clinic's server is busy")
            return await super().start_kernel(*args, **kwargs)

        async def shutdown_kernel(self, *args, **kwargs):
            result = await super().shutdown_kernel(*args, **kwargs)
            refill = getattr(self, "fill_if_needed", None)  # Voila's preheated pool, when on
            if refill is not None:
                for notebook in list(getattr(self, "notebook_data", {})):
                    refill(delay=0, notebook_name=notebook)
            return result

    LimitedKernelManager.__module__ = __name__
    return LimitedKernelManager


def __getattr__(name: str):
    if name == "LimitedKernelManager":
        cls = _build_limited()
        globals()["LimitedKernelManager"] = cls
        return cls
    raise AttributeError(name)


def voila_options(limits: ServerLimits, cell_timeout_s: int = CELL_TIMEOUT_S) -> list[str]:
    """The Voila command-line options for these limits (each option once: Voila exits on a repeat)."""
    return [
        "--preheat_kernel=True", f"--pool_size={limits.pool_size}",
        f"--VoilaKernelManager.fill_delay={POOL_REFILL_DELAY_S}",
        f"--VoilaConfiguration.multi_kernel_manager_class={__name__}.LimitedKernelManager",
        f"--LimitedKernelManager.max_kernels={limits.max_kernels}",
        f"--VoilaExecutor.timeout={int(cell_timeout_s)}",
        f"--VoilaExecutor.iopub_timeout={IOPUB_TIMEOUT_S}",
        f"--MappingKernelManager.cull_idle_timeout={CULL_IDLE_TIMEOUT_S}",
        f"--MappingKernelManager.cull_interval={CULL_INTERVAL_S}",
        "--MappingKernelManager.cull_connected=False",
    ]
