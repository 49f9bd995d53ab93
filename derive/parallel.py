"""Both cores of a laptop for independent numeric work, and worker processes that end with their parent.

:func:`split_map` runs a function on fixed parts of a job in forked worker processes (the parent's loaded
kernels and solver state are inherited, nothing is pickled but the parts' arguments and results).  The parts
are fixed by the job, not by the number of workers, so a result does not depend on how many workers ran it.
``DERIVE_WORKERS`` sets the number of processes (default: the cores, at most 2; 1 runs everything here).
Workers ask the kernel to end them when their parent dies (Linux), so a killed run leaves none behind.
"""

from __future__ import annotations

import os
import signal

MAX_DEFAULT_WORKERS = 2


def die_with_parent(parent: int) -> None:
    """In a worker process: ask the kernel (Linux) to end this process when its parent dies, so a killed run
    leaves no workers behind; elsewhere, check once that the parent still runs."""
    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        pr_set_pdeathsig = 1
        libc.prctl(pr_set_pdeathsig, signal.SIGTERM)
    except (OSError, AttributeError):
        pass
    if os.getppid() != parent:   # the parent died before the request took effect
        os._exit(1)


def worker_count() -> int:
    """Processes for numeric work: DERIVE_WORKERS, else the cores (at most 2)."""
    text = os.environ.get("DERIVE_WORKERS", "")
    cores = os.cpu_count() or 1
    if text.strip().isdigit() and int(text) >= 1:
        return min(int(text), cores)
    return min(cores, MAX_DEFAULT_WORKERS)


_TASK = None


def _run_part(index):
    function, parts = _TASK
    return function(*parts[index])


def split_map(function, parts: list[tuple], workers: int | None = None) -> list:
    """[function(*part) for part in parts], the parts run in forked workers where that helps."""
    global _TASK
    workers = worker_count() if workers is None else workers
    if workers <= 1 or len(parts) <= 1 or not hasattr(os, "fork"):
        return [function(*part) for part in parts]
    import multiprocessing

    _TASK = (function, parts)
    try:
        context = multiprocessing.get_context("fork")
        with context.Pool(min(workers, len(parts)), initializer=die_with_parent, initargs=(os.getpid(),)) as pool:
            return pool.map(_run_part, range(len(parts)))
    finally:
        _TASK = None
