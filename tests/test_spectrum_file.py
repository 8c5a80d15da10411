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
from qcorr.spectra.spectrum_file import (
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


# --------------------------------------------------------------------------- assembling and diagnostics
from types import SimpleNamespace

from qcorr.spectra import diagnostics
from qcorr.spectra.assemble import assemble_spectrum, group_table
from qcorr.spectra.blocks import combine_blocks
from qcorr.spectra.spectrum_file import raw_segments_of


def _assembled(raw_scale=1.0, n_segments=6, shape="line", com_mv2=0.0, temperature=300.0, first_segment=0,
               window_segments=None, block=(1, 1)):
    """A spectrum built by assemble_spectrum from hand-made raw data with a known integral.

    Group 'total' has 9 dof; its raw spectrum per segment integrates to 9 * raw_scale * (1 + small
    per-segment variation that averages to zero), so raw_integral = 9 * raw_scale exactly.
    """
    wn = np.linspace(0.0, 1000.0, 101)  # cm-1, Nyquist 1000
    if shape == "line":
        base = np.exp(-0.5 * ((wn - 300.0) / 20.0) ** 2)
    else:  # flat up to Nyquist
        base = np.ones_like(wn)
    base /= np.trapezoid(base, wn)
    wiggle = np.linspace(-0.1, 0.1, n_segments)  # sums to zero
    raw = (9.0 * raw_scale * (1.0 + wiggle))[None, :, None] * base[None, None, :]
    corr = np.ones((1, n_segments, 5)) * np.linspace(2.0, 1.0, 5)
    groups = [SimpleNamespace(name="total", selection="all", degrees_of_freedom=9.0, constraints=0.0,
                              atom_count=4, molecule_count=1, mass=40.0)]
    window_segments = window_segments or n_segments
    attrs = dict(minimal_spectrum_dataset().attrs)
    attrs.update(temperature_K=temperature, nyquist_wavenumber=1000.0, resolution_wavenumber=10.0,
                 segment_length_ps=3.3, frames_used=100, timestep_ps=0.002, frame_step=1, segment_frames=10,
                 velocity_source="stored", block_index=block[0], block_count=block[1],
                 segment_count_window=window_segments, statistics_frames=10 * n_segments,
                 centre_of_mass_mv2_u_A2_per_ps2=com_mv2, finite_difference_correction="none",
                 mean_box_volume_A3=1000.0)
    return assemble_spectrum(
        raw_segments=raw, correlation_segments=corr, wavenumber=wn, lag_ps=np.arange(5) * 0.002,
        table=group_table(groups), segment_index=np.arange(first_segment, first_segment + n_segments),
        segment_first_frame=np.arange(first_segment, first_segment + n_segments) * 5, attrs=attrs,
    )


def test_assembled_normalisation():
    # sum rule (Lin, Blanco, Goddard 2003): integral = dof; T_kin = T * raw/dof
    ds = _assembled(raw_scale=1.05)
    assert float(ds["raw_integral"][0]) == pytest.approx(9.45, rel=1e-12)
    assert float(ds["vdos"].integrate("wavenumber")[0]) == pytest.approx(9.0, rel=1e-12)
    np.testing.assert_allclose(ds["vdos_segments"].mean("segment"), ds["vdos"], rtol=1e-12)
    assert float(ds["kinetic_temperature"][0]) == pytest.approx(315.0, rel=1e-12)
    assert float(ds["vacf"][0, 0]) == 1.0 and float(ds["vacf"][0, -1]) == pytest.approx(0.5)
    np.testing.assert_allclose(np.trapezoid(raw_segments_of(ds), ds["wavenumber"].values, axis=-1),
                               ds["raw_integral_segments"], rtol=1e-12)


def test_diagnostics_fire_on_their_thresholds():
    status = lambda ds: {d.check: d.status for d in diagnostics.run_diagnostics(ds)}
    assert status(_assembled()) == {"aliasing": "ok", "resolution": "ok", "temperature": "ok",
                                    "centre_of_mass_drift": "ok", "sum_rule": "ok", "time_axis": "ok",
                                    "position_noise": "ok", "kinetic_energy_series": "ok"}
    assert status(_assembled(shape="flat"))["aliasing"] == "warning"  # 5 % of the weight near Nyquist
    assert status(_assembled(n_segments=3))["resolution"] == "warning"
    # temperature and sum rule: limits from the segment scatter, tested in tests/test_diagnostics.py
    # COM: M V^2 = 3kT * 11 at 300 K (kT in u A^2 ps^-2 from CODATA via scipy)
    from scipy import constants as sc

    kT = sc.k * 300.0 / (sc.atomic_mass * (sc.angstrom / sc.pico) ** 2)
    assert status(_assembled(com_mv2=3 * kT * 11))["centre_of_mass_drift"] == "warning"
    assert status(_assembled(com_mv2=3 * kT * 9))["centre_of_mass_drift"] == "ok"
    with pytest.warns(diagnostics.QcorrWarning) as caught:
        diagnostics.announce(diagnostics.run_diagnostics(_assembled(raw_scale=0.5)))
    assert sorted(str(w.message).split(":")[0] for w in caught) == ["sum_rule", "temperature"]


def test_combine_blocks_rebuilds_the_whole():
    whole = _assembled(n_segments=6)
    # the same six segments split 2 + 4: raw spectra and correlations per segment are identical
    raw = raw_segments_of(whole)
    a = _assembled(n_segments=6)
    blocks = []
    for (first, stop), index in (((0, 2), 1), ((2, 6), 2)):
        b = assemble_spectrum(
            raw_segments=raw[:, first:stop], correlation_segments=whole["vacf_segments_raw"].values[:, first:stop],
            wavenumber=whole["wavenumber"].values, lag_ps=whole["lag"].values,
            table={"group": whole["group"].values, **{k: whole[k].values for k in
                   ("degrees_of_freedom", "constraint_count", "atom_count", "molecule_count", "group_mass", "selection")}},
            segment_index=np.arange(first, stop), segment_first_frame=np.arange(first, stop) * 5,
            attrs={**a.attrs, "block_index": index, "block_count": 2, "statistics_frames": 10 * (stop - first)},
        )
        blocks.append(b)
    joined = combine_blocks(blocks[::-1], ["b2.nc", "b1.nc"], "qcorr combine b2.nc b1.nc")
    for name in ("vdos", "vdos_segments", "vacf", "raw_integral", "kinetic_temperature"):
        np.testing.assert_allclose(joined[name], whole[name], rtol=1e-12)
    assert joined.attrs["block_count"] == 1 and joined.attrs["statistics_frames"] == 60
    with pytest.raises(SpectrumFileError, match="missing \\[1\\]"):
        combine_blocks([blocks[1]], ["b2.nc"], "x")


def test_file_records_of_blocks_must_cover_each_file_once():
    from qcorr.spectra.blocks import combine_file_records

    def block(first, stop, size=10, name="run.trr", sample="s1"):
        return [{"name": name, "size_bytes": size, "sha256_sample": sample,
                 "sha256_parts": [{"first_byte": first, "stop_byte": stop, "sha256": f"{first}"}]}]

    names = ["b1.nc", "b2.nc"]
    joined = combine_file_records([block(0, 5), block(5, 10)], names)
    assert [p["first_byte"] for p in joined[0]["sha256_parts"]] == [0, 5]
    assert joined[0]["sha256_sample"] == "s1"
    # a copy under another name is the same input (hashes, not names, are compared)
    assert combine_file_records([block(0, 5), block(5, 10, name="copy.trr")], names)
    with pytest.raises(SpectrumFileError, match="do not cover"):
        combine_file_records([block(0, 4), block(5, 10)], names)  # gap
    with pytest.raises(SpectrumFileError, match="do not cover"):
        combine_file_records([block(0, 5), block(0, 5)], names)  # the same part twice
    with pytest.raises(SpectrumFileError, match="b2.nc.*another input.*sizes differ"):
        combine_file_records([block(0, 5), block(5, 11, size=11)], names)  # another file size
    with pytest.raises(SpectrumFileError, match="b2.nc.*another input.*same size.*different SHA-256 of sampled"):
        combine_file_records([block(0, 5), block(5, 10, sample="s2")], names)  # same name and size
    with pytest.raises(SpectrumFileError, match="b1.nc.*records no SHA-256"):
        combine_file_records([block(0, 5, sample=None), block(5, 10)], names)
    whole = [{"name": "top.gro", "size_bytes": 3, "sha256": "ab"}]
    with pytest.raises(SpectrumFileError, match="another input"):
        combine_file_records([whole, [{"name": "top.gro", "size_bytes": 3, "sha256": "cd"}]], names)