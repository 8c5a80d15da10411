"""The spectrum pipeline imports without xarray and pandas (qcorr.lazy_modules).

The forkserver that parallel workers are forked from preloads
``qcorr.spectra.backends.FORKSERVER_PRELOAD``; it must not pull in xarray or pandas,
which only the calling process needs (issue 16).  Checked in a fresh interpreter
(common practice: ``sys.modules`` after the import).
"""

from __future__ import annotations

import subprocess
import sys

from qcorr.lazy_modules import lazy


def test_worker_preload_leaves_xarray_and_pandas_out():
    code = (
        "import sys\n"
        "from qcorr.spectra.worker_server import FORKSERVER_PRELOAD\n"
        "import importlib\n"
        "for name in FORKSERVER_PRELOAD: importlib.import_module(name)\n"
        "print(sorted(m for m in ('xarray', 'pandas') if m in sys.modules))\n"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert done.stdout.strip() == "[]", done.stdout + done.stderr


def test_lazy_module_imports_on_first_use_and_forwards():
    import json

    proxy = lazy("json")
    assert "not imported yet" in repr(proxy)
    assert proxy.dumps({"a": 1}) == json.dumps({"a": 1})
    assert proxy.loads is json.loads
    assert "imported" in repr(proxy) and "not" not in repr(proxy)
