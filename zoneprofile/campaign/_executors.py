"""Where crystal tasks run: this process, local worker processes, or a Dask cluster.

Each executor takes the list of tasks and a callback ``on_done(index, record)``
called in this process as each crystal finishes (in completion order). Records
depend only on their task (its seed included), so every executor gives the
same records.
"""

from __future__ import annotations

import logging
import multiprocessing
import os
import signal
import sys
import threading
import time
from concurrent.futures import ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool

from zoneprofile._validation import InputError

__all__ = ["execute", "Progress", "PRELOAD", "CONNECT_TIMEOUT"]

#: How long to wait for a Dask scheduler before giving up.
CONNECT_TIMEOUT = "10s"

#: Modules imported once in the fork server, so each worker starts warm.
PRELOAD = [
    "numpy",
    "scipy",
    "pandas",
    "zoneprofile.campaign._pipeline",
    "zoneprofile.traverse",
    "zoneprofile.zoning",
    "zoneprofile.diffusion",
    "zoneprofile.maps",
    "zoneprofile.chronology",
]


_SHOWN = [0]  # length of the progress line on screen (shared: a run draws it from several places)


class Progress:
    """A plain-text progress line on stderr, drawn only on a terminal.

    :meth:`phase` tells what happens before the first crystal is done (reading
    the campaign, checking inputs and the cache), so a large campaign shows a
    line at once. The time left is estimated from the rate at which crystals
    finish *after* the first one (worker start-up and crystals taken from the
    cache do not count), and only once ``2 × workers`` more have finished; before
    that the line says it is still estimating.
    """

    def __init__(self, total: int, *, enabled: bool = True, stream=None, width: int = 28, workers: int = 1):
        self.stream = stream if stream is not None else sys.stderr
        try:
            tty = hasattr(self.stream, "isatty") and self.stream.isatty()
        except (ValueError, OSError):  # a closed stream
            tty = False
        self.enabled = bool(enabled) and tty
        self.total = max(int(total), 0)
        self.width = width
        self.workers = max(int(workers), 1)
        self.start = time.monotonic()
        self._last = 0.0
        self._first = None  # (time, crystals computed) when the first computed crystal was done

    def _write(self, text: str) -> None:
        pad = " " * max(_SHOWN[0] - len(text), 0)  # blank what a longer earlier line left
        _SHOWN[0] = len(text)
        self.stream.write("\r" + text + pad)
        self.stream.flush()

    def phase(self, text: str) -> None:
        """Show what the run is doing before crystals finish (one line, replaced by the next)."""
        if self.enabled:
            self._write(text)

    def eta_seconds(self, done: int, computed: int, now: float) -> float | None:
        """Seconds left, or None while there is too little to go on."""
        if computed <= 0 or done >= self.total:
            return None
        if self._first is None:
            self._first = (now, computed)
            return None
        t0, n0 = self._first
        if computed - n0 < 2 * self.workers or now <= t0:
            return None
        return (now - t0) / (computed - n0) * (self.total - done)

    def update(self, done: int, *, cached: int = 0, failed: int = 0, force: bool = False) -> None:
        if not self.enabled or self.total == 0:
            return
        now = time.monotonic()
        computed = done - cached
        if computed > 0 and self._first is None:
            self._first = (now, computed)
        if not force and now - self._last < 0.1 and done < self.total:
            return
        self._last = now
        frac = done / self.total
        filled = int(round(frac * self.width))
        bar = "#" * filled + "." * (self.width - filled)
        left = self.eta_seconds(done, computed, now)
        eta = ""
        if left is not None:
            eta = f"  about {_duration(left)} left"
        elif 0 < computed and done < self.total:
            eta = "  estimating the time left"
        self._write(f"crystals {done:>{len(str(self.total))}}/{self.total} [{bar}] {100 * frac:3.0f}%"
                    f"  {cached} from cache  {failed} failed{eta}")

    def close(self) -> None:
        if self.enabled and (self.total or _SHOWN[0]):
            self.stream.write("\n")
            self.stream.flush()
            _SHOWN[0] = 0


def _duration(seconds: float) -> str:
    if seconds < 120:
        return f"{seconds:.0f} s"
    if seconds < 7200:
        return f"{seconds / 60:.0f} min"
    return f"{seconds / 3600:.1f} h"


def _failed_record(task: dict, message: str) -> dict:
    from zoneprofile.campaign._pipeline import _base_record

    record = _base_record(task)
    record["error"] = message
    return record


def _guarded(process, task):
    """Run ``process(task)``; an unexpected exception becomes a failed record, interrupts pass."""
    try:
        return process(task)
    except (KeyboardInterrupt, SystemExit):
        raise
    except Exception as exc:  # noqa: BLE001 - one crystal must not sink the campaign
        text = " ".join(str(exc).split()) or "no message"
        return _failed_record(task, f"internal error ({type(exc).__name__}): {text}")


def _serial(tasks, process, on_done):
    for i, task in enumerate(tasks):
        on_done(i, _guarded(process, task))


def _context():
    """Start method for worker processes.

    ``fork`` starts workers instantly with everything already imported; it is
    used where it is safe (Linux, Python < 3.12, no other Python thread
    running). Elsewhere a fork server, preloaded with the pipeline's modules.
    """
    methods = multiprocessing.get_all_start_methods()
    if "fork" in methods and sys.version_info < (3, 12) and threading.active_count() == 1 \
            and sys.platform.startswith("linux"):
        return multiprocessing.get_context("fork")
    if "forkserver" in methods:
        ctx = multiprocessing.get_context("forkserver")
        try:
            ctx.set_forkserver_preload(PRELOAD)
        except (ValueError, RuntimeError):  # pragma: no cover - already started
            pass
        return ctx
    return multiprocessing.get_context("spawn")  # pragma: no cover - Windows, macOS defaults


#: How often a worker checks that its parent still runs (seconds); workers die within about this.
WATCH_INTERVAL = 0.25


def _watch(stop, parent_pid: int) -> None:
    while True:
        if stop.wait(WATCH_INTERVAL) or os.getppid() != parent_pid:
            os._exit(1)  # the run was stopped or its parent died (kill -9): no orphan keeps computing


def _worker_start(stop) -> None:
    """Initialiser of a worker process: die with the parent, leave Ctrl-C to the parent.

    Ctrl-C reaches every process of the terminal's group; the parent alone
    handles it (it sets ``stop``). A daemon thread ends the worker within
    :data:`WATCH_INTERVAL` when ``stop`` is set or when the parent is gone
    (its parent pid changes when the parent is killed, even by ``kill -9``).
    """
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    threading.Thread(target=_watch, args=(stop, os.getppid()), daemon=True,
                     name="zoneprofile-parent-watch").start()


def _processes(tasks, process, on_done, workers):
    ctx = _context()
    stop = ctx.Event()
    executor = ProcessPoolExecutor(max_workers=workers, mp_context=ctx, initializer=_worker_start,
                                   initargs=(stop,))
    try:
        futures = {executor.submit(process, task): i for i, task in enumerate(tasks)}
        for future in as_completed(futures):
            i = futures[future]
            try:
                record = future.result()
            except BrokenProcessPool:
                record = _failed_record(tasks[i], "internal error: the worker process running this crystal died "
                                                  "(out of memory?); run again to retry it")
            except Exception as exc:  # noqa: BLE001 - raised inside the worker
                text = " ".join(str(exc).split()) or "no message"
                record = _failed_record(tasks[i], f"internal error ({type(exc).__name__}): {text}")
            on_done(i, record)
    except BaseException:
        stop.set()  # workers end within WATCH_INTERVAL; finished crystals are already in the cache
        executor.shutdown(wait=False, cancel_futures=True)
        raise
    executor.shutdown(wait=True)


def _dask(tasks, process, on_done, workers, scheduler):
    try:
        from distributed import Client, LocalCluster
        from distributed import as_completed as dask_completed
    except ImportError:
        message = ("--scheduler needs the optional Dask support: pip install 'zoneprofile[distributed]' "
                   "(or run with --workers N instead)")
        raise InputError(message) from None
    cluster = None
    if scheduler == "local-cluster":
        cluster = LocalCluster(n_workers=max(int(workers), 1), threads_per_worker=1, processes=True,
                               host="127.0.0.1", dashboard_address="127.0.0.1:0",  # any free port: no
                               silence_logs=logging.ERROR)  # clash (and warning) with another cluster on 8787
        client = Client(cluster)
    else:
        try:
            client = Client(scheduler, timeout=CONNECT_TIMEOUT)
        except (OSError, TimeoutError, ValueError) as exc:
            message = f"cannot reach the Dask scheduler at '{scheduler}' ({type(exc).__name__}); check the address"
            raise InputError(message) from None
    try:
        keys = [f"zoneprofile-crystal-{task['key']}" for task in tasks]
        futures = client.map(process, tasks, key=keys, pure=False)
        index = {f.key: i for i, f in enumerate(futures)}
        for future in dask_completed(futures):
            i = index[future.key]
            try:
                record = future.result()
            except (KeyboardInterrupt, SystemExit):
                raise
            except Exception as exc:  # noqa: BLE001 - a lost worker; reported per crystal
                text = " ".join(str(exc).split()) or type(exc).__name__
                record = _failed_record(tasks[i], f"internal error on the Dask cluster: {text}")
            on_done(i, record)
    finally:
        client.close()
        if cluster is not None:
            cluster.close()


def execute(tasks, process, on_done, *, workers: int = 1, scheduler: str | None = None) -> None:
    """Run ``process(task)`` for every task and call ``on_done(index, record)`` as each finishes.

    Parameters
    ----------
    tasks : list of dict
    process : callable
        Importable by name in worker processes (a module-level function).
    on_done : callable
    workers : int
        Local worker processes (1 = this process). With ``scheduler =
        "local-cluster"``: the number of Dask workers started.
    scheduler : str, optional
        A Dask scheduler address (``tcp://host:8786``) or ``"local-cluster"``.
    """
    if not tasks:
        return
    if scheduler:
        _dask(tasks, process, on_done, workers, scheduler)
    elif workers > 1 and len(tasks) > 1:
        _processes(tasks, process, on_done, min(int(workers), len(tasks)))
    else:
        _serial(tasks, process, on_done)
