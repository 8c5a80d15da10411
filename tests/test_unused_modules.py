"""qcorr.unused_modules.leave_out: packages absent inside the block, importable again after it.

Outside reference: Python's import system (The Python Language Reference, section 5.3.1,
"The module cache": a ``None`` entry in ``sys.modules`` makes ``import`` raise ImportError).
"""

import importlib.util
import subprocess
import sys

import numpy as np
import pytest
import xarray as xr

from qcorr.unused_modules import leave_out

HAVE_DASK = importlib.util.find_spec("dask") is not None


def test_blocked_inside_and_restored_after_in_a_fresh_process():
    # a fresh interpreter, so that dask is not yet imported whatever other tests did
    code = (
        "import sys, xarray as xr, numpy as np\n"
        "from qcorr.unused_modules import leave_out\n"
        "with leave_out(('dask',)):\n"
        "    xr.Dataset({'a': ('x', np.arange(3.0))}, coords={'x': [1, 2, 3]}).to_netcdf(None, engine='h5netcdf')\n"
        "    assert 'dask' not in {m.split('.')[0] for m in sys.modules if sys.modules[m] is not None}\n"
        "    try:\n"
        "        import dask\n"
        "        raise SystemExit('dask imported inside the block')\n"
        "    except ImportError:\n"
        "        pass\n"
        "assert 'dask' not in sys.modules\n"
        "print('ok')\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=False)
    assert out.returncode == 0 and out.stdout.strip() == "ok", out.stderr


@pytest.mark.skipif(not HAVE_DASK, reason="dask not installed")
def test_xarray_sees_dask_again_after_the_block():
    with leave_out(("dask",)):
        xr.Dataset({"a": ("x", np.arange(3.0))}, coords={"x": [1, 2, 3]})
    chunked = xr.Dataset({"a": ("x", np.arange(4.0))}).chunk({"x": 2})  # needs dask
    assert chunked["a"].chunks == ((2, 2),)
    assert float(chunked["a"].sum().compute()) == 6.0


def test_already_imported_modules_are_left_alone():
    import json  # noqa: F401  (imported: must stay usable inside the block)

    with leave_out(("json",)):
        assert sys.modules["json"] is not None
