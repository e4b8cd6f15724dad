"""Files of one run in several processes: an ordered map that falls back to one process.

Each file is independent once the batch's Fortran modules are known, so a run over many files
uses every core. Workers are forked (they inherit the imported front ends and the batch's
context, nothing is re-imported); where fork is not available, where there are few items or
one job, or when a worker dies, the work is done in this process, in order. The results are the
same either way: tests compare them.
"""
from __future__ import annotations

import os

MIN_ITEMS = 8  # below this, starting workers costs more than it saves

_context: tuple = ()  # (function, shared) of the running map, inherited by forked workers


def jobs_for(requested: int) -> int:
    """The number of processes for ``requested`` (0: one per available core)."""
    if requested > 0:
        return requested
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def _call(item):
    function, shared = _context
    return function(item, shared)


def ordered_map(function, items: list, shared, jobs: int) -> list:
    """``[function(item, shared) for item in items]``, in up to ``jobs`` processes.

    ``function`` must catch its own errors (a raised exception falls back to this process)."""
    global _context
    jobs = min(jobs_for(jobs), len(items))
    if jobs <= 1 or len(items) < MIN_ITEMS:
        return [function(item, shared) for item in items]
    import multiprocessing  # here: a run over one file (an editor's call) does not pay for it
    from concurrent.futures import ProcessPoolExecutor
    from concurrent.futures.process import BrokenProcessPool
    if "fork" not in multiprocessing.get_all_start_methods():
        return [function(item, shared) for item in items]
    _context = (function, shared)
    try:
        with ProcessPoolExecutor(max_workers=jobs, mp_context=multiprocessing.get_context("fork")) as pool:
            return list(pool.map(_call, items, chunksize=max(1, len(items) // (jobs * 4))))
    except (BrokenProcessPool, Exception):  # a dead worker, or a result that cannot be sent back
        return [function(item, shared) for item in items]
    finally:
        _context = ()
