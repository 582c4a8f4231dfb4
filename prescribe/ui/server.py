"""How the app's Voila server shares the machine: a kernel limit, a preheated pool, timeouts.

Each open page of the app is its own Python kernel (about 130 MB).  Opened all at once on a
small machine, pages used to stall behind one another until Voila gave up waiting for a slow
kernel and left a blank page.  This module holds the server side of the cure (see
docs/app.md, "Under load"):

* :func:`server_limits` sizes the server to the machine: how many kernels may be alive at
  once and how many are kept preheated (both from the memory the server may use);
* :class:`LimitedKernelManager` starts kernels a few at a time (:class:`StartGate`: the
  processors less one), so a pool refilling after a burst leaves the open pages a
  processor, and refuses a page's kernel past the limit with
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
#: Preheated kernels: one for every POOL_PER_KERNELS pages the memory allows, at least one per
#: processor, at most MAX_POOL (each costs KERNEL_MB idle: 10 x 150 MB on a 24 GiB machine is
#: 6 % of its memory).  A page served from the pool costs only its rendering; a clinic's
#: morning (several clinicians opening the app together) is served from it, while the pool
#: refills in the background (measured: ten pages at once, benchmarks/bench_app_load.py).
POOL_PER_KERNELS = 8
MAX_POOL = 10
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
#: Seconds before a used preheated kernel is replaced.  Replacing the ten kernels of a burst
#: at once took the processors from the ten pages being drawn (measured: 33 s until the
#: slowest was usable, against 9 s with the refill 20 s later); a page beyond the pool waits
#: this long more, which the page's loading notice covers.
POOL_REFILL_DELAY_S = 20
#: Kernels starting at once at most: the processors less one, at least one.  Starting ten
#: kernels together (a pool refilling after a burst of pages) took every processor and
#: left the open pages waiting for 30 s; one at a time, they queue behind the pages.
def starts_at_once(cpus: int) -> int:
    return max(1, int(cpus) - 1)


@dataclass(frozen=True)
class ServerLimits:
    """How many kernels may be alive at once, and how many are kept preheated."""

    max_kernels: int
    pool_size: int
    memory_mb: int
    cpus: int

    @property
    def max_starting(self) -> int:
        """Kernels starting at once at most (:func:`starts_at_once`)."""
        return starts_at_once(self.cpus)


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
    [MIN_KERNELS, MAX_KERNELS]; ``pool_size`` = max_kernels / POOL_PER_KERNELS, at least one
    per processor, at most MAX_POOL and always below the kernel limit.

    Examples: 24 GiB and 2 processors give 81 kernels and a pool of 10; 4 GiB and 2
    processors give 13 kernels and a pool of 2; 1 GiB and 1 processor give 3 kernels and a
    pool of 1.
    """
    memory_mb = memory_available_mb() if memory_mb is None else int(memory_mb)
    cpus = (os.cpu_count() or 1) if cpus is None else int(cpus)
    max_kernels = int(memory_mb * KERNEL_MEMORY_SHARE // KERNEL_MB)
    max_kernels = max(MIN_KERNELS, min(MAX_KERNELS, max_kernels))
    pool = max(1, min(MAX_POOL, max(cpus, max_kernels // POOL_PER_KERNELS), max_kernels - 1))
    return ServerLimits(max_kernels=max_kernels, pool_size=pool, memory_mb=memory_mb, cpus=cpus)



class StartGate:
    """At most ``limit`` kernels starting at once; the others wait their turn, first come first served."""

    def __init__(self, limit: int) -> None:
        self.limit = max(1, int(limit))
        self.starting = 0
        self.most_at_once = 0  # the most ever starting together (what the tests check)
        self._semaphore = None

    async def __aenter__(self):
        import asyncio
        if self._semaphore is None:  # made on the server's loop, when the first kernel starts
            self._semaphore = asyncio.Semaphore(self.limit)
        await self._semaphore.acquire()
        self.starting += 1
        self.most_at_once = max(self.most_at_once, self.starting)
        return self

    async def __aexit__(self, *exc) -> None:
        self.starting -= 1
        self._semaphore.release()


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
        max_starting = Integer(1, config=True, help="Kernels starting at once at most (the others wait).")

        @property
        def start_gate(self) -> StartGate:
            if getattr(self, "_start_gate", None) is None:
                self._start_gate = StartGate(self.max_starting)
            return self._start_gate

        def _refuse_past_the_limit(self) -> None:
            alive = len(self.list_kernel_ids())
            if self.max_kernels and alive >= self.max_kernels:
                self.log.warning("prescribe: %d kernels alive, the limit is %d: a page is told the server "
                                 "is busy (503) and retries by itself", alive, self.max_kernels)
                raise web.HTTPError(503, "%d pages open, the limit is %d", alive, self.max_kernels,
                                    reason="The clinic's server is busy")

        async def start_kernel(self, *args, **kwargs):
            self._refuse_past_the_limit()
            async with self.start_gate:  # a few starts at a time: open pages keep a processor
                self._refuse_past_the_limit()  # others may have started while this one waited
                kernel_id = await super().start_kernel(*args, **kwargs)
                await self._booted(kernel_id)  # the gate covers the kernel's own start-up too
                return kernel_id

        async def _booted(self, kernel_id: str, timeout_s: float = 60.0) -> None:
            """Wait until the kernel answers (its Python has started and imported ipykernel).

            Launching the process takes milliseconds; the kernel's own start-up (about a
            second of processor) comes after, and is what the gate has to keep in turn.  A
            kernel that does not answer in ``timeout_s`` is left to Voila's own timeouts."""
            try:
                client = self.get_kernel(kernel_id).client()
                client.start_channels()
                try:
                    await client.wait_for_ready(timeout=timeout_s)
                finally:
                    client.stop_channels()
            except Exception as exc:  # noqa: BLE001 - the start itself succeeded; Voila reports the rest
                self.log.warning("prescribe: kernel %s did not answer within %.0f s of starting (%s)",
                                 kernel_id, timeout_s, exc)

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
        f"--LimitedKernelManager.max_starting={limits.max_starting}",
        f"--VoilaExecutor.timeout={int(cell_timeout_s)}",
        f"--VoilaExecutor.iopub_timeout={IOPUB_TIMEOUT_S}",
        f"--MappingKernelManager.cull_idle_timeout={CULL_IDLE_TIMEOUT_S}",
        f"--MappingKernelManager.cull_interval={CULL_INTERVAL_S}",
        "--MappingKernelManager.cull_connected=False",
    ]
