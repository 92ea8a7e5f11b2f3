"""Independent tasks run in this process, in local processes, or on a dask.distributed cluster,
their results returned in the order of the tasks.

The simulations of :mod:`pooler.planning` (simulated power of path designs,
:mod:`~pooler.planning.simdesign`; the stress test, :mod:`~pooler.planning.simulate`; the
stress check of the path-sheet route, :mod:`~pooler.planning.pathstress`) cut their work into
tasks that each carry their own seed, so where a task runs never changes what it returns:
one process, several local processes and a cluster give identical results.

Examples
--------
>>> with ParallelRunner(workers=1) as runner:
...     runner.map(abs, [-2, 3, -5])
[2, 3, 5]
"""
from __future__ import annotations

from typing import Callable

from pooler.errors import OptionError


class ParallelRunner:
    """Runs ``fn`` over a list of tasks and returns the results in the tasks' order.

    Use it as a context manager: entering starts the local processes or connects to the
    cluster, leaving stops them (a client passed in is left open for its owner).

    Parameters
    ----------
    workers : int
        Local processes (1 = in this process). Ignored when ``scheduler`` is given.
    scheduler : str or dask.distributed.Client, optional
        A dask.distributed scheduler address (``tcp://host:8786``) or a connected Client.
        An address that cannot be reached within dask's connect timeout
        (``distributed.comm.timeouts.connect``, 30 s by default) raises :class:`OptionError`.
    """

    def __init__(self, workers: int = 1, scheduler=None):
        self.workers, self.scheduler = workers, scheduler
        self._pool = self._client = None
        self._own_client = False

    def __enter__(self) -> "ParallelRunner":
        if self.scheduler is not None:
            try:
                from dask.distributed import Client
            except ImportError as exc:  # pragma: no cover - depends on the installation
                raise OptionError("running on a cluster needs dask.distributed: "
                                  "pip install 'pooler[cluster]'",
                                  parameter="scheduler") from exc
            if isinstance(self.scheduler, str):
                self._client = _connect(Client, self.scheduler)
                self._own_client = True
            else:
                self._client = self.scheduler
        elif self.workers > 1:
            from concurrent.futures import ProcessPoolExecutor
            self._pool = ProcessPoolExecutor(max_workers=self.workers)
        return self

    def __exit__(self, *exc) -> bool:
        if self._pool is not None:
            self._pool.shutdown()
        if self._own_client:
            self._client.close()
        return False

    def map(self, fn: Callable, tasks, progress: Callable | None = None, offset: int = 0,
            total: int | None = None) -> list:
        """``[fn(t) for t in tasks]``, spread over the workers or the cluster.

        ``fn`` must be importable by the workers (a module-level function). ``progress``
        (done, total) is called as tasks finish, counting from ``offset`` out of ``total``
        (default: the number of tasks), so several calls can share one progress bar.
        """
        tasks = list(tasks)
        total = total or len(tasks)
        if self._client is not None:
            from dask.distributed import as_completed
            futs = self._client.map(fn, tasks, pure=False)
            for done, _ in enumerate(as_completed(futs), start=1):
                if progress:
                    progress(offset + done, total)
            return self._client.gather(futs)
        if self._pool is not None:
            from concurrent.futures import as_completed
            futs = [self._pool.submit(fn, t) for t in tasks]
            for done, _ in enumerate(as_completed(futs), start=1):
                if progress:
                    progress(offset + done, total)
            return [f.result() for f in futs]
        out = []
        for done, t in enumerate(tasks, start=1):
            out.append(fn(t))
            if progress:
                progress(offset + done, total)
        return out


def _connect(client_class, address: str):
    """A Client connected to ``address``, or an OptionError saying why not.

    A plain or ``tcp://`` address is tried first with one bare connection: a Client whose
    start fails leaves an object whose clean-up prints a traceback when it is collected.
    """
    import asyncio
    from concurrent.futures import ThreadPoolExecutor

    import dask
    from distributed.comm import connect

    async def probe():
        comm = await connect(address, timeout=dask.config.get(
            "distributed.comm.timeouts.connect"))
        await comm.close()

    fix = ("start a scheduler there (`dask scheduler`) or leave `scheduler` unset to run on "
           "local processes")
    try:
        if "://" not in address or address.startswith("tcp://"):
            # in a thread of its own: the caller may already run an event loop (a notebook)
            with ThreadPoolExecutor(1) as thread:
                thread.submit(asyncio.run, probe()).result()
        return client_class(address)
    except ValueError as exc:
        raise OptionError(f"`scheduler` {address!r} is not a scheduler address ({exc}); "
                          "write it as tcp://HOST:PORT", parameter="scheduler") from None
    except (OSError, TimeoutError) as exc:
        raise OptionError(f"`scheduler` {address!r} cannot be reached ({exc}): {fix}",
                          parameter="scheduler") from None
