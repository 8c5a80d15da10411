"""ProcessBackend: the calling process starts at once and never waits for a late worker (issue 16).

The workers' forkserver here preloads a module that takes 2 s to import, so no worker can
be ready before the calling process has taken every (trivial) part: the results must be
complete, in order, all computed by the calling process, and apply() must return without a
worker ever having run (the pool is released by the thread that was still starting it).
Results against a serial loop (common practice: the backend contract of MDAnalysis'
BackendBase.apply is [func(c) for c in computations]).
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

import pytest

pytest.importorskip("MDAnalysis")

from qcorr.spectra.backends import ProcessBackend  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
import late_worker_module  # noqa: E402  (2 s here too, once)


def test_caller_takes_every_part_when_the_worker_is_late():
    backend = ProcessBackend(2, preload=("late_worker_module",))
    computations = list(range(6))
    results = backend.apply(late_worker_module.computing_process, computations)
    assert [value for value, _ in results] == [c * c for c in computations]
    assert {pid for _, pid in results} == {os.getpid()}


def test_a_worker_that_arrives_in_time_takes_parts():
    """Parts that take long enough (20 of 0.5 s) are shared with the worker once it is up."""
    backend = ProcessBackend(2, preload=("late_worker_module",))
    computations = [0.5] * 20
    results = backend.apply(_slow_pid, computations)
    assert len(results) == 20
    assert len({pid for pid in results}) == 2


def _slow_pid(seconds: float) -> int:
    import time

    time.sleep(seconds)
    return os.getpid()
