"""Where cells run: in this process, in a local process pool (default), or as Ray tasks.

Every backend calls the same `cell.run_cell` on the same plain payloads and yields the
records as they finish, so results do not depend on the backend, only on the cells' seeds.
The driver (this process) writes each record; workers never touch the results folder.
"""
from __future__ import annotations

import concurrent.futures as cf
import multiprocessing as mp
import os
import signal
import sys
import threading
import time
from typing import Any, Iterable, Iterator

from invbench.envs.errors import SpecError

from .cell import run_cell
from .reaper import start_reaper

BACKENDS = ("local", "ray")


def _failed(payload: dict[str, Any], message: str) -> dict[str, Any]:
    pol = payload["policy"]
    return {"cell_id": payload["cell_id"], "suite": payload["suite"], "policy": pol["label"],
            "kind": pol["kind"], "seed": payload["seed"],
            "instance": payload["instance"].get("name", ""), "status": "failed", "error": message}


#: Seconds between two checks of the watchdog thread that looks for the driver's death.
WATCHDOG_SECONDS = 1.0
PR_SET_PDEATHSIG = 1  # from <linux/prctl.h>


def _die_with_parent() -> bool:
    """Ask Linux to SIGKILL this process when its parent dies (prctl PR_SET_PDEATHSIG).

    Linux fires this when the *thread* that started the process ends; the pool starts its
    workers from `submit`, i.e. from the driver's main thread, which lives as long as the run.
    """
    if not sys.platform.startswith("linux"):
        return False
    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        return libc.prctl(PR_SET_PDEATHSIG, int(signal.SIGKILL), 0, 0, 0) == 0
    except (OSError, AttributeError):
        return False


def _watch_parent(driver_pid: int) -> None:
    # The fallback where prctl is missing (or the parent thread, not the process, ended):
    # once the driver is gone this process is re-parented, and nobody will collect its result.
    while True:
        time.sleep(WATCHDOG_SECONDS)
        if os.getppid() != driver_pid:
            os._exit(70)


def _init_worker(driver_pid: int) -> None:
    # The driver owns the run: Ctrl-C and SIGTERM are its to handle (it stops the workers);
    # no traceback from every worker, and no half-finished cell reported as a crash.
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_IGN)
    _die_with_parent()
    if os.getppid() != driver_pid:  # the driver died before the line above took effect
        os._exit(70)
    threading.Thread(target=_watch_parent, args=(driver_pid,), name="invbench-watchdog", daemon=True).start()
    # One BLAS/torch thread per worker: N workers on N cores, no oversubscription.
    for var in ("OMP_NUM_THREADS", "MKL_NUM_THREADS", "OPENBLAS_NUM_THREADS"):
        os.environ.setdefault(var, "1")
    try:
        import torch
        torch.set_num_threads(1)
    except ImportError:
        pass
    # tqdm takes a multiprocessing lock (a named semaphore) for any bar, even a disabled one; a
    # worker stopped mid-cell (Ctrl-C, SIGTERM) cannot release it, and Python's resource
    # tracker then prints a "leaked semaphore" warning after the one-line message. Workers
    # draw no bars, so a thread lock serves.
    from tqdm import tqdm
    tqdm.set_lock(threading.RLock())


def run_inline(payloads: Iterable[dict[str, Any]]) -> Iterator[dict[str, Any]]:
    for p in payloads:
        yield run_cell(p)


def run_pool(payloads: list[dict[str, Any]], workers: int) -> Iterator[dict[str, Any]]:
    """A pool of `workers` fresh processes ("spawn": no state inherited from the driver)."""
    ctx = mp.get_context("spawn")
    ex = cf.ProcessPoolExecutor(max_workers=workers, mp_context=ctx, initializer=_init_worker,
                                initargs=(os.getpid(),))
    clean = False
    try:
        futures = {ex.submit(run_cell, p): p for p in payloads}
        for fut in cf.as_completed(futures):
            try:
                yield fut.result()
            except cf.process.BrokenProcessPool as e:
                yield _failed(futures[fut], f"worker process died (out of memory, killed, or a script "
                                            f"without an `if __name__ == '__main__':` guard): {e}")
            except Exception as e:  # e.g. a result that could not be sent back
                yield _failed(futures[fut], f"{type(e).__name__}: {e}")
        clean = True
    finally:
        if not clean:  # interrupted: drop queued cells and stop the running ones (they ignore SIGTERM)
            for proc in list((getattr(ex, "_processes", None) or {}).values()):
                proc.kill()
        ex.shutdown(wait=clean, cancel_futures=True)


def run_ray(payloads: list[dict[str, Any]], address: str | None, workers: int | None = None) -> Iterator[dict[str, Any]]:
    """Cells as Ray tasks on the cluster at `address` (None: a private local Ray instance with
    `workers` CPUs). Every node needs the same invbench installed; on a cluster, the cluster
    decides how many cells run at once (one CPU each)."""
    try:
        import ray
    except ImportError:
        raise SpecError("--backend: ray is not installed (pip install 'invbench[cluster]')") from None
    kw: dict[str, Any] = {"log_to_driver": False, "logging_level": "ERROR"}
    reaper = None
    if address is None:  # "local": always a new private instance, never someone's running cluster
        kw.update(address="local", include_dashboard=False, num_cpus=workers)
        # if this driver is killed outright, the watcher ends the Ray processes it started
        reaper = start_reaper()
    else:
        kw["address"] = address
    try:
        ray.init(**kw)
    except BaseException:
        if reaper is not None:
            reaper.kill()
            reaper.wait()
        raise
    try:
        task = ray.remote(num_cpus=1, max_retries=0)(run_cell)
        refs = {task.remote(p): p for p in payloads}
        while refs:
            ready, _ = ray.wait(list(refs), num_returns=1)
            for ref in ready:
                p = refs.pop(ref)
                try:
                    yield ray.get(ref)
                except Exception as e:  # task crashed or its node was lost
                    yield _failed(p, f"ray task failed: {type(e).__name__}: {str(e).splitlines()[0]}")
    finally:
        ray.shutdown()
        if reaper is not None:  # a clean end: Ray stopped its own processes
            reaper.kill()
            reaper.wait()


def execute(payloads: list[dict[str, Any]], backend: str = "local", workers: int = 1,
            address: str | None = None) -> Iterator[dict[str, Any]]:
    """Records of the given cells in the order they finish."""
    if backend not in BACKENDS:
        raise SpecError(f"--backend: must be one of {', '.join(BACKENDS)}, got {backend!r}")
    if backend == "ray":
        return run_ray(payloads, address, workers)
    if address:
        raise SpecError("--address: only used with --backend ray")
    if workers < 1:
        raise SpecError(f"--workers: must be >= 1, got {workers}")
    if workers == 1 or len(payloads) <= 1:
        return run_inline(payloads)
    return run_pool(payloads, min(workers, len(payloads)))
