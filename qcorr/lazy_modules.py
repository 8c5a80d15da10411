"""Modules imported on first use, so that qcorr's worker processes never import them.

A worker process of a parallel spectrum (:class:`qcorr.spectra.backends.ProcessBackend`)
only reads frames and runs the estimators; xarray, and pandas with it, are needed
only to build and check the spectrum dataset afterwards, in the calling process.
Importing them costs 0.45-0.55 s (``python -X importtime``, machine of
``docs/performance.md``), so the modules of the spectrum pipeline hold ``xr = lazy("xarray")``
instead of ``import xarray as xr``: the forkserver that workers are forked from
imports the pipeline without them and is ready that much sooner (issue 16).

The proxy imports the module at the first attribute access and forwards every access
to it; :data:`sys.modules` is not touched.  Type annotations that name ``xr.Dataset``
stay strings (``from __future__ import annotations``).
"""

from __future__ import annotations

import importlib
from types import ModuleType

__all__ = ["LazyModule", "lazy"]


class LazyModule:
    """Stands for module *name*; imports it when an attribute is first asked for."""

    __slots__ = ("_name", "_module")

    def __init__(self, name: str) -> None:
        self._name = name
        self._module: ModuleType | None = None

    def __getattr__(self, attribute: str):
        module = self._module
        if module is None:
            module = self._module = importlib.import_module(self._name)
        return getattr(module, attribute)

    def __repr__(self) -> str:
        state = "imported" if self._module is not None else "not imported yet"
        return f"<lazy module {self._name!r} ({state})>"


def lazy(name: str) -> LazyModule:
    """A :class:`LazyModule` for *name* (e.g. ``xr = lazy("xarray")``)."""
    return LazyModule(name)
