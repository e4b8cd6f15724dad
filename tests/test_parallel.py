"""A run in several processes gives exactly the results of a run in one."""
import os
import shutil
from dataclasses import replace

from rewrite import parallel
from rewrite.api import rewrite_paths
from rewrite.config import Options

from conftest import FIXTURES


def _summary(results):
    return [(r.path, r.text, r.edits, r.findings, r.problems, r.notice) for r in results]


def test_two_jobs_give_the_results_of_one(tmp_path):
    for name in ("reservoir", "chains", "python", "bad", "build"):
        shutil.copytree(FIXTURES / name, tmp_path / name)
    one = rewrite_paths([str(tmp_path)], replace(Options(), jobs=1))
    two = rewrite_paths([str(tmp_path)], replace(Options(), jobs=2))
    assert len(one) > parallel.MIN_ITEMS
    assert _summary(one) == _summary(two)


def _dies_in_a_worker(item, parent):
    if os.getpid() != parent:
        os._exit(3)  # a worker that dies (as a crash in a C extension would)
    return item * 2


def test_a_dead_worker_falls_back_to_this_process():
    items = list(range(20))
    assert parallel.ordered_map(_dies_in_a_worker, items, os.getpid(), 2) == [i * 2 for i in items]


def test_order_is_kept_and_jobs_resolve():
    assert parallel.ordered_map(lambda item, shared: item + shared, list(range(50)), 7, 2) == \
        [i + 7 for i in range(50)]
    assert parallel.jobs_for(3) == 3 and parallel.jobs_for(0) >= 1
