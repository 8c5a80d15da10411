"""The forkserver that qcorr's worker processes are forked from, started early.

A worker of :class:`qcorr.spectra.backends.ProcessBackend` is forked from a
*forkserver*: a clean process that imported qcorr and MDAnalysis once (its preload).
That import is most of a worker's start-up (about 2.4 s of wall time on the machine of
``docs/performance.md``, issue 16).  :func:`start_worker_server` starts the forkserver
at once, so that it imports on a second core while the calling process imports and
opens the trajectory itself; by the time the frames are split the workers fork in
milliseconds.  This module imports only the standard library, so calling it first
costs nothing.
"""

from __future__ import annotations

from collections.abc import Sequence

__all__ = ["FORKSERVER_PRELOAD", "start_worker_server"]

#: modules the forkserver imports once for all workers
FORKSERVER_PRELOAD = ("qcorr.spectra.analysis",)


def start_worker_server(preload: Sequence[str] = FORKSERVER_PRELOAD) -> None:
    """Start this process's forkserver (if not running) with *preload* imported; returns at once.

    Later ``ProcessPoolExecutor``\\ s with the "forkserver" context (as
    :class:`~qcorr.spectra.backends.ProcessBackend` makes) fork their workers from it.
    """
    import multiprocessing
    from multiprocessing import forkserver

    multiprocessing.get_context("forkserver").set_forkserver_preload(list(preload))
    forkserver.ensure_running()
