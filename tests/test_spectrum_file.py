"""Spectrum-file contract: write/read round trip, byte reproducibility, rejection of foreign files.

The contract itself is DEVELOPERS.md ("The spectrum file"); the NetCDF rules used here
(no bool/dict attributes, h5netcdf byte-reproducible) are from the xarray/h5netcdf
documentation (common practice).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import xarray as xr

from qcorr.errors import SpectrumFileError
from qcorr.spectrum_file import (
    REQUIRED_ATTRIBUTES,
    REQUIRED_VARIABLES,
    read_spectrum,
    write_spectrum,
)


def minimal_spectrum_dataset() -> xr.Dataset:
    """A hand-made dataset holding exactly the contract's required items (2 groups)."""
    groups = ["total", "oxygen"]
    wn = np.linspace(0.0, 100.0, 11)
    lag = np.arange(4) * 0.01
    vdos = np.ones((2, 11)) * 0.03
    attrs = {name: 0 for name in REQUIRED_ATTRIBUTES}
    attrs.update(
        qcorr_file_kind="spectrum",
        qcorr_format_version=1,
        Conventions="CF-1.11",
        temperature_K=300.0,
        taper="hann",
        velocity_source="stored",
        input_files=json.dumps([{"name": "a.trr", "size_bytes": 1, "sha256": "00"}]),
        diagnostics=json.dumps([]),
        qcorr_version="0",
        mdanalysis_version="0",
        command_line="qcorr spectrum",
    )
    data = {
        "vdos": (("group", "wavenumber"), vdos, {"units": "cm", "long_name": "VDOS"}),
        "vdos_segments": (("group", "segment", "wavenumber"), vdos[:, None, :], {"units": "cm", "long_name": "x"}),
        "vacf": (("group", "lag"), np.ones((2, 4)), {"units": "1", "long_name": "x"}),
        "selection": (("group",), np.array(["all", "name O"]), {"long_name": "x"}),
    }
    for name in REQUIRED_VARIABLES:
        if name not in data:
            data[name] = (("group",), np.array([3.0, 1.0]), {"units": "1", "long_name": name})
    coords = {
        "group": ("group", groups, {"long_name": "atom group"}),
        "wavenumber": ("wavenumber", wn, {"units": "cm-1", "long_name": "wavenumber"}),
        "frequency": ("wavenumber", wn * 0.03, {"units": "THz", "long_name": "frequency"}),
        "lag": ("lag", lag, {"units": "ps", "long_name": "lag time"}),
        "segment": ("segment", np.array([0]), {"units": "1", "long_name": "segment index"}),
    }
    return xr.Dataset(data, coords=coords, attrs=attrs)


def test_round_trip_identical_and_byte_reproducible(tmp_path):
    # xarray's coder rule (style.md): write then read gives an identical Dataset, attrs included
    ds = minimal_spectrum_dataset()
    a, b = tmp_path / "a.nc", tmp_path / "b.nc"
    write_spectrum(ds, a)
    write_spectrum(ds, b)
    back = read_spectrum(a)
    xr.testing.assert_identical(back, ds)
    assert a.read_bytes() == b.read_bytes()
    # plain xarray reads it without qcorr's help (contract: "xarray.open_dataset(path) reads it")
    with xr.open_dataset(a) as plain:
        assert plain.attrs["qcorr_file_kind"] == "spectrum"


@pytest.mark.parametrize("missing", ["temperature_K", "input_files", "mean_box_volume_A3"])
def test_missing_attribute_named(tmp_path, missing):
    ds = minimal_spectrum_dataset()
    del ds.attrs[missing]
    path = tmp_path / "s.nc"
    ds.to_netcdf(path, engine="h5netcdf")
    with pytest.raises(SpectrumFileError, match=rf"s\.nc.*'{missing}'"):
        read_spectrum(path)


@pytest.mark.parametrize("missing", ["vdos", "degrees_of_freedom", "raw_integral"])
def test_missing_variable_named(tmp_path, missing):
    ds = minimal_spectrum_dataset().drop_vars(missing)
    path = tmp_path / "s.nc"
    ds.to_netcdf(path, engine="h5netcdf")
    with pytest.raises(SpectrumFileError, match=rf"s\.nc.*'{missing}'"):
        read_spectrum(path)


def test_foreign_netcdf_rejected(tmp_path):
    path = tmp_path / "other.nc"
    xr.Dataset({"x": ("t", np.arange(3.0))}).to_netcdf(path, engine="h5netcdf")
    with pytest.raises(SpectrumFileError, match=r"other\.nc.*qcorr_file_kind"):
        read_spectrum(path)


def test_truncated_and_missing_files(tmp_path):
    ds = minimal_spectrum_dataset()
    good = tmp_path / "good.nc"
    write_spectrum(ds, good)
    cut = tmp_path / "cut.nc"
    cut.write_bytes(good.read_bytes()[:200])
    with pytest.raises(SpectrumFileError, match=r"cut\.nc.*not a readable"):
        read_spectrum(cut)
    with pytest.raises(SpectrumFileError, match=r"absent\.nc.*does not exist"):
        read_spectrum(tmp_path / "absent.nc")


def test_incomplete_dataset_never_written(tmp_path):
    ds = minimal_spectrum_dataset().drop_vars("vacf")
    target = tmp_path / "out.nc"
    with pytest.raises(SpectrumFileError, match="'vacf'"):
        write_spectrum(ds, target)
    assert list(tmp_path.iterdir()) == []
