"""Parallel backends for MDAnalysis' analysis machinery (:class:`~MDAnalysis.analysis.backends.BackendBase`).

:meth:`MDAnalysis.analysis.base.AnalysisBase.run` hands every computation group to a
backend's ``apply(func, computations)``.  ``func`` is the analysis object's bound
``_compute``; it carries the object (with its Universe) to the workers.  The two
backends here make that safe and cheap for :class:`qcorr.spectra.analysis.VibrationalSpectrum`:

* :class:`ProcessBackend` starts its worker processes from a *forkserver* (or spawns
  them), never by forking the calling process: a ``fork()`` of a process that runs
  threads (qcorr hashes its inputs in one; BLAS, OpenMM and dask start others) may
  leave the child waiting forever on a lock held by a thread that does not exist in
  the child (POSIX ``fork(2)``: only async-signal-safe calls are allowed in such a
  child).  The forkserver imports qcorr and MDAnalysis once (preload) and forks the
  workers from that clean process, so each worker starts in milliseconds instead of
  importing everything again.  The calling process computes parts too: workers and
  caller take the next untaken part from a shared counter, so the caller starts at
  once and the workers join as soon as they are up.
* :class:`DaskBackend` runs the parts as dask tasks: on the current
  ``distributed`` client when there is one (a ``LocalCluster``, or a cluster of batch
  jobs such as dask-jobqueue's ``SLURMCluster``), otherwise on dask's local process
  scheduler.

Both hand each worker a pickled copy of ``func`` made before any work starts, so no
two parts ever share one analysis object (or one trajectory reader), whatever the
scheduler does with threads.  Scripts that use :class:`ProcessBackend` must start
their work under ``if __name__ == "__main__":`` (a started process imports the main
script again, as with Python's "spawn").
"""

from __future__ import annotations

import pickle
from collections.abc import Callable, Sequence

import numpy as np
from MDAnalysis.analysis.backends import (
    BackendBase,
    BackendDask,
    BackendMultiprocessing,
    BackendSerial,
)

from qcorr.errors import ConfigError
from qcorr.spectra.worker_server import FORKSERVER_PRELOAD

__all__ = ["BACKENDS", "FORKSERVER_PRELOAD", "DaskBackend", "ProcessBackend", "requested_workers", "resolve_backend"]

#: backends named by a string in :meth:`qcorr.spectra.analysis.VibrationalSpectrum.run`
BACKENDS = ("serial", "multiprocessing", "dask")

#: the shared part counter of :class:`ProcessBackend` (set in every process that takes parts)
_PART_COUNTER = None


def _share_counter(counter) -> None:
    global _PART_COUNTER
    _PART_COUNTER = counter


def _run_pickled(payload: bytes, computation):
    """Unpickle a function and apply it to one computation (a dask task)."""
    return pickle.loads(payload)(computation)


def _take_parts(payload: bytes | None, computations: Sequence, func: Callable | None = None) -> list:
    """Compute the next untaken part until none is left; ``[(index, result), ...]``.

    A worker gets the pickled function (*payload*); the calling process passes its own
    *func*.  The first failure stops everyone from taking another part.
    """
    if func is None:
        func = pickle.loads(payload)
    counter, done = _PART_COUNTER, []
    while True:
        with counter.get_lock():
            k = counter.value
            counter.value += 1
        if k >= len(computations):
            return done
        try:
            done.append((k, func(computations[k])))
        except BaseException:
            with counter.get_lock():
                counter.value = len(computations)  # nobody takes another one
            raise


class ProcessBackend(BackendBase):
    """Worker processes from a forkserver; the calling process computes parts as well.

    Parameters
    ----------
    n_workers : int
        Processes computing parts, the calling process included (so ``n_workers - 1``
        are started).
    start_method : {"forkserver", "spawn"}
        How workers start (never "fork"; see the module docstring).
    preload : sequence of str
        Modules the forkserver imports before forking workers.
    while_waiting : callable, optional
        Called by the calling process when it has no part left but workers still compute
        (:class:`~qcorr.spectra.analysis.VibrationalSpectrum` imports xarray there, which
        it needs next).

    Notes
    -----
    Pass it to :meth:`MDAnalysis.analysis.base.AnalysisBase.run` with
    ``unsupported_backend=True``; :meth:`qcorr.spectra.analysis.VibrationalSpectrum.run`
    does that itself and uses this backend for ``backend="multiprocessing"``.
    """

    def __init__(self, n_workers: int, *, start_method: str = "forkserver",
                 preload: Sequence[str] = FORKSERVER_PRELOAD,
                 while_waiting: Callable[[], object] | None = None) -> None:
        if start_method not in ("forkserver", "spawn"):
            raise ConfigError(f"start_method {start_method!r}: choose forkserver or spawn")
        self.start_method = start_method
        self.preload = tuple(preload)
        self.while_waiting = while_waiting
        super().__init__(n_workers=n_workers)

    def apply(self, func: Callable, computations: list) -> list:
        """``[func(c) for c in computations]``, computed by up to ``n_workers`` processes.

        Raises
        ------
        ConfigError
            If a worker process died before returning (e.g. out of memory, or a script
            without the ``__main__`` guard).
        Exception
            The first error a part raised (e.g. a TrajectoryError naming a frame).
        """
        import multiprocessing
        from concurrent.futures import ProcessPoolExecutor
        from concurrent.futures.process import BrokenProcessPool

        started = min(self.n_workers, len(computations)) - 1
        if started < 1:
            return [func(c) for c in computations]
        payload = pickle.dumps(func, protocol=pickle.HIGHEST_PROTOCOL)  # before this process starts working
        context = multiprocessing.get_context(self.start_method)
        if self.start_method == "forkserver":
            context.set_forkserver_preload(list(self.preload))
        counter = context.Value("i", 0)
        pool = ProcessPoolExecutor(started, mp_context=context, initializer=_share_counter,
                                   initargs=(counter,))
        results: list = [None] * len(computations)
        # Starting a worker blocks until the forkserver has imported its preload (about 2 s);
        # a thread starts them, so this process computes its first part meanwhile.
        starter = _WorkerStarter(pool, started, payload, computations)
        try:
            _share_counter(counter)
            done = _take_parts(None, computations, func)
            if len(done) < len(computations):  # workers took the others: collect them
                if self.while_waiting is not None:
                    self.while_waiting()
                for future in starter.futures():
                    done += future.result()
        except BrokenProcessPool:
            raise ConfigError(
                f"{self.n_workers} processes: a worker process stopped before it finished (out of "
                "memory, or a Python script without an 'if __name__ == \"__main__\":' guard, which "
                "started workers need); use fewer processes or fix that"
            ) from None
        finally:
            # every part is done (or failed); do not wait for workers still starting or exiting
            starter.release()
        for k, result in done:
            results[k] = result
        return results


class _WorkerStarter:
    """Submits the worker tasks of a :class:`ProcessBackend` run from a background thread.

    :meth:`futures` waits for the submissions (a worker has already taken a part, so the
    forkserver is up); :meth:`release` shuts the pool down without waiting, from whichever
    thread comes last, so the calling process never waits for a worker that is still
    starting when it has computed every part itself.
    """

    def __init__(self, pool, count: int, payload: bytes, computations: list) -> None:
        import threading

        self._pool, self._count = pool, count
        self._payload, self._computations = payload, computations
        self._submitted: list = []
        self._error: list[BaseException] = []
        self._lock = threading.Lock()
        self._finished = self._released = False
        self._thread = threading.Thread(target=self._submit, name="qcorr-worker-start", daemon=True)
        self._thread.start()

    def _submit(self) -> None:
        try:
            for _ in range(self._count):
                self._submitted.append(self._pool.submit(_take_parts, self._payload, self._computations))
        except BaseException as err:  # noqa: BLE001 -- re-raised by futures() if anyone waits
            self._error.append(err)
        with self._lock:
            self._finished = True
            if self._released:
                self._pool.shutdown(wait=False, cancel_futures=True)

    def futures(self) -> list:
        """The submitted futures (waits for the submissions)."""
        self._thread.join()
        if self._error:
            raise self._error[0]
        return list(self._submitted)

    def release(self) -> None:
        """Shut the pool down without waiting (now if the submissions are done, else after them)."""
        with self._lock:
            self._released = True
            if self._finished:
                self._pool.shutdown(wait=False, cancel_futures=True)


class DaskBackend(BackendBase):
    """Parts as dask tasks: on a ``distributed`` client, or on dask's local process scheduler.

    Parameters
    ----------
    n_workers : int, optional
        Processes of the local scheduler; with a client, default its worker count.
    client : distributed.Client, optional
        Default: the current client (``distributed.default_client()``) if one exists.

    Notes
    -----
    With a client, the parts run wherever its workers run, e.g. as SLURM jobs started by
    dask-jobqueue's ``SLURMCluster``; the trajectory files must be readable there under
    the same paths.
    """

    def __init__(self, n_workers: int | None = None, *, client=None) -> None:
        if client is None:
            client = _current_client()
        self.client = client
        if n_workers is None:
            n_workers = 1 if client is None else (len(client.scheduler_info().get("workers", {})) or 1)
        super().__init__(n_workers=n_workers)

    def apply(self, func: Callable, computations: list) -> list:
        """``[func(c) for c in computations]`` as dask tasks (each unpickles its own copy of *func*)."""
        payload = pickle.dumps(func, protocol=pickle.HIGHEST_PROTOCOL)
        if self.client is not None:
            futures = self.client.map(_run_pickled, [payload] * len(computations), computations, pure=False)
            return self.client.gather(futures)
        import dask
        from dask.delayed import delayed

        tasks = [delayed(_run_pickled)(payload, c) for c in computations]
        return list(dask.compute(tasks, scheduler="processes", num_workers=self.n_workers, chunksize=1)[0])


def _current_client():
    """The current ``distributed`` client, or None (also when distributed is not installed)."""
    try:
        from distributed import default_client
    except ImportError:
        return None
    try:
        return default_client()
    except ValueError:
        return None


def requested_workers(backend, n_workers: int | None, n_parts: int | None, *, verbose: bool = False) -> int:
    """Workers a run asks for (1 by default, or the backend object's), after checking the arguments.

    Parameters
    ----------
    backend : str or BackendBase
        One of :data:`BACKENDS` or a backend object.
    n_workers, n_parts : int, optional
        As given to ``run``.
    verbose : bool
        A progress bar was asked for (serial runs only).

    Raises
    ------
    ConfigError
        Unknown backend name, a progress bar with a parallel backend, or a worker or
        part count that is not a whole number of at least 1.
    """
    if isinstance(backend, str) and backend not in BACKENDS:
        raise ConfigError(f"backend {backend!r}: choose one of {', '.join(BACKENDS)} or give a backend object")
    if not isinstance(backend, (str, BackendBase)):
        raise ConfigError(f"backend {backend!r}: give a name or an MDAnalysis BackendBase object")
    if verbose and not (backend == "serial" or isinstance(backend, BackendSerial)):
        raise ConfigError("verbose: a progress bar is drawn only with backend='serial'")
    for name, value in (("n_workers", n_workers), ("n_parts", n_parts)):
        if value is not None and (isinstance(value, bool) or not isinstance(value, (int, np.integer))
                                  or value < 1):
            raise ConfigError(f"{name} {value!r}: must be a whole number of at least 1")
    if n_workers is None and isinstance(backend, BackendBase):
        n_workers = getattr(backend, "n_workers", None)
    return 1 if n_workers is None else int(n_workers)


def resolve_backend(backend, n_workers: int | None, parts: int, *,
                    while_waiting: Callable[[], object] | None = None):
    """The backend object and ``run`` arguments for *parts* parts.

    "multiprocessing" becomes a :class:`ProcessBackend` (with *while_waiting*) and "dask" a
    :class:`DaskBackend` (both with at most *parts* workers); "serial" and backend objects are kept.

    Returns
    -------
    backend : str or BackendBase
    run_workers : int or None
        ``n_workers`` to pass to :meth:`MDAnalysis.analysis.base.AnalysisBase.run`
        (None: the backend object's own).
    unsupported : bool
        Whether ``unsupported_backend=True`` is needed: for qcorr's own backends and for
        objects of MDAnalysis' built-in backend classes (MDAnalysis accepts those only by
        name otherwise); other backend objects need the caller's ``unsupported_backend``.
    processes : int
        Processes (or dask workers) that compute parts, at most *parts*.
    """
    workers = 1 if n_workers is None else int(n_workers)
    if backend == "multiprocessing":
        backend = ProcessBackend(min(workers, parts), while_waiting=while_waiting)
    elif backend == "dask":
        backend = DaskBackend(None if n_workers is None else min(workers, parts))
    if backend == "serial":
        return backend, n_workers, False, 1
    unsupported = isinstance(backend, (ProcessBackend, DaskBackend, BackendMultiprocessing, BackendDask,
                                       BackendSerial))
    if isinstance(backend, BackendSerial):
        return backend, None, unsupported, 1
    return backend, None, unsupported, max(1, min(parts, int(getattr(backend, "n_workers", 1) or 1)))
