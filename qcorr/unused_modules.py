"""Keep xarray from importing array libraries a command never uses.

Every time xarray makes a variable it asks whether the data is a dask or pint array,
and to ask it imports those packages when they are installed
(``xarray.namedarray.pycompat``); writing a NetCDF file also asks dask for its
scheduler, which imports ``distributed``.  qcorr's commands hold only numpy arrays, so
these imports are pure start-up cost: about 1 s of CPU time per ``qcorr spectrum`` run
on the machine of ``docs/performance.md`` (issue 16).

:func:`leave_out` marks such packages as absent for the duration of a command (Python's
import system raises ImportError for a ``None`` entry in :data:`sys.modules`; xarray
then treats the package as not installed) and undoes that afterwards, so a library
user's later dask or pint work in the same process is unaffected.  Packages already
imported are left alone.
"""

from __future__ import annotations

import sys
from collections.abc import Iterator, Sequence
from contextlib import contextmanager

__all__ = ["ARRAY_PACKAGES_NOT_USED", "leave_out"]

#: duck-array packages xarray probes for and qcorr's commands never hand it
ARRAY_PACKAGES_NOT_USED = ("dask", "pint", "cupy", "sparse", "cubed")


@contextmanager
def leave_out(names: Sequence[str] = ARRAY_PACKAGES_NOT_USED) -> Iterator[None]:
    """Within the block, ``import name`` fails for every not-yet-imported package of *names*.

    xarray's cached answers for them are dropped on entering (they may say "installed")
    and on leaving (they say "not installed"), so nothing crosses the block's edges.
    """
    blocked = [name for name in names if name not in sys.modules]
    for name in blocked:
        sys.modules[name] = None  # type: ignore[assignment]
    _forget_xarray_answers(blocked)  # answers cached before the block (a long-lived process)
    try:
        yield
    finally:
        for name in blocked:
            if name in sys.modules and sys.modules[name] is None:
                del sys.modules[name]
        _forget_xarray_answers(blocked)


def _forget_xarray_answers(names: Sequence[str]) -> None:
    """Drop xarray's cached answers to "is *name* installed?" (xarray's private caches; skipped if absent).

    xarray remembers them in ``xarray.namedarray.pycompat._cached_duck_array_modules`` and
    in the ``functools.lru_cache`` of ``xarray.namedarray.utils.module_available``.
    """
    if not names:
        return
    pycompat = sys.modules.get("xarray.namedarray.pycompat")
    cache = getattr(pycompat, "_cached_duck_array_modules", None)
    if isinstance(cache, dict):
        for name in names:
            cache.pop(name, None)
    utils = sys.modules.get("xarray.namedarray.utils")
    clear = getattr(getattr(utils, "module_available", None), "cache_clear", None)
    if callable(clear):
        clear()
