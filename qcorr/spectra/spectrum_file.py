"""The spectrum file: the NetCDF contract between ``qcorr spectrum`` and every later step.

The layout (variables, coordinates, attributes, units) is described in
``DEVELOPERS.md`` ("The spectrum file").  This module writes it (h5netcdf engine,
atomically, byte-reproducible: no wall-clock time is stored), reads it back and
checks that a file really is a qcorr spectrum file before anything uses it.

Everything here is I/O and the contract itself; the dataset is built by
:mod:`qcorr.spectra.assemble` (normalisation to the degrees of freedom) and frame-block
files are joined by :mod:`qcorr.spectra.blocks`.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np

from qcorr import units
from qcorr.errors import SpectrumFileError
from qcorr.lazy_modules import lazy
from qcorr.safe_write import write_bytes_atomic

xr = lazy("xarray")  # imported on first use: workers never need it (qcorr.lazy_modules)

__all__ = [
    "COMBINE_ATTRIBUTES",
    "COMBINE_VARIABLES",
    "FILE_KIND",
    "FORMAT_VERSION",
    "GROUP_TABLE",
    "REQUIRED_ATTRIBUTES",
    "REQUIRED_COORDINATES",
    "REQUIRED_VARIABLES",
    "check_spectrum",
    "group_names",
    "json_attribute",
    "raw_segments_of",
    "read_spectrum",
    "write_netcdf_atomic",
    "write_spectrum",
]

#: value of the global attribute ``qcorr_file_kind`` in a spectrum file
FILE_KIND = "spectrum"
#: current layout version (global attribute ``qcorr_format_version``)
FORMAT_VERSION = 1

#: global attributes every spectrum file carries (DEVELOPERS.md, "The spectrum file")
REQUIRED_ATTRIBUTES: tuple[str, ...] = (
    "qcorr_file_kind",
    "qcorr_format_version",
    "Conventions",
    "temperature_K",
    "timestep_ps",
    "frames_used",
    "frame_start",
    "frame_stop",
    "frame_step",
    "segment_frames",
    "segment_length_ps",
    "segment_overlap",
    "taper",
    "resolution_wavenumber",
    "nyquist_wavenumber",
    "velocity_source",
    "input_files",
    "diagnostics",
    "qcorr_version",
    "mdanalysis_version",
    "command_line",
    "mean_box_volume_A3",
)

#: coordinates every spectrum file carries
REQUIRED_COORDINATES: tuple[str, ...] = ("group", "wavenumber", "frequency", "lag", "segment")

#: data variables every spectrum file carries, with their dimensions
REQUIRED_VARIABLES: dict[str, tuple[str, ...]] = {
    "vdos": ("group", "wavenumber"),
    "vdos_segments": ("group", "segment", "wavenumber"),
    "vacf": ("group", "lag"),
    "degrees_of_freedom": ("group",),
    "constraint_count": ("group",),
    "kinetic_temperature": ("group",),
    "raw_integral": ("group",),
    "atom_count": ("group",),
    "molecule_count": ("group",),
    "group_mass": ("group",),
    "selection": ("group",),
}


def _describe(path: str | os.PathLike[str]) -> str:
    return f"spectrum file '{os.fspath(path)}'"


def check_spectrum(ds: xr.Dataset, path: str | os.PathLike[str] = "<in memory>") -> None:
    """Check that *ds* follows the spectrum-file contract.

    Parameters
    ----------
    ds : xarray.Dataset
        Dataset to check.
    path : str or path-like
        File name used in the error message.

    Raises
    ------
    SpectrumFileError
        If the dataset was not made by qcorr as a spectrum file, or lacks a required
        attribute, coordinate or variable, or a variable has the wrong dimensions.
    """
    where = _describe(path)
    kind = ds.attrs.get("qcorr_file_kind")
    if kind != FILE_KIND:
        raise SpectrumFileError(
            f"{where} was not written by 'qcorr spectrum' (attribute qcorr_file_kind is "
            f"{kind!r}, expected {FILE_KIND!r}); make it with 'qcorr spectrum' or 'qcorr combine'"
        )
    version = int(ds.attrs.get("qcorr_format_version", -1))
    if version != FORMAT_VERSION:
        raise SpectrumFileError(
            f"{where} has layout version {version}, this qcorr reads version {FORMAT_VERSION}; "
            "remake it with this qcorr's 'qcorr spectrum'"
        )
    for name in REQUIRED_ATTRIBUTES:
        if name not in ds.attrs:
            raise SpectrumFileError(
                f"{where} lacks the global attribute '{name}'; remake it with 'qcorr spectrum'"
            )
    for name in REQUIRED_COORDINATES:
        if name not in ds.coords:
            raise SpectrumFileError(
                f"{where} lacks the coordinate '{name}'; remake it with 'qcorr spectrum'"
            )
    for name, dims in REQUIRED_VARIABLES.items():
        if name not in ds.variables:
            raise SpectrumFileError(
                f"{where} lacks the variable '{name}'; remake it with 'qcorr spectrum'"
            )
        if tuple(ds[name].dims) != dims:
            raise SpectrumFileError(
                f"{where}: variable '{name}' has dimensions {tuple(ds[name].dims)}, expected "
                f"{dims}; remake it with 'qcorr spectrum'"
            )
    if "total" not in [str(g) for g in ds["group"].values]:
        raise SpectrumFileError(f"{where} has no group 'total'; remake it with 'qcorr spectrum'")


def read_spectrum(path: str | os.PathLike[str]) -> xr.Dataset:
    """Load a spectrum file written by qcorr and check it against the contract.

    Parameters
    ----------
    path : str or path-like
        NetCDF file written by ``qcorr spectrum`` or ``qcorr combine``.

    Returns
    -------
    xarray.Dataset
        Fully loaded into memory (the file is closed again), attributes included.

    Raises
    ------
    SpectrumFileError
        If the file does not exist, is not readable NetCDF/HDF5, or does not follow the
        spectrum-file contract (the message names the missing item).
    """
    path = Path(path)
    if not path.is_file():
        raise SpectrumFileError(f"{_describe(path)} does not exist; check the path")
    try:
        with xr.open_dataset(path, engine="h5netcdf") as opened:
            ds = opened.load()
    except SpectrumFileError:
        raise
    except Exception as err:  # h5py/h5netcdf raise OSError, ValueError, KeyError, ...
        raise SpectrumFileError(
            f"{_describe(path)} is not a readable NetCDF-4 file ({type(err).__name__}: "
            f"{str(err).splitlines()[0] if str(err) else 'no detail'}); is it truncated? "
            "remake it with 'qcorr spectrum'"
        ) from err
    check_spectrum(ds, path)
    # string coordinates come back as fixed-width unicode; keep them plain str
    return ds


def write_netcdf_atomic(ds: xr.Dataset, path: str | os.PathLike[str], encoding: dict | None = None,
                        option: str | None = None) -> Path:
    """Write *ds* as NetCDF-4 (h5netcdf engine) to *path*: built in memory, then written atomically.

    The HDF5 library is never given the target's file system: it builds the file image in
    memory and qcorr writes the bytes (:func:`qcorr.safe_write.write_bytes_atomic`).  HDF5
    writing to a full device can crash the process (a segmentation fault inside the library
    left a ``.part`` file behind); a full device, a read-only file system or a missing
    permission now give one :class:`~qcorr.errors.OutputError` line and nothing on disk.
    Peak memory grows by the size of the file (compressed variables are compressed in
    memory).  The same dataset gives the same bytes.

    Parameters
    ----------
    ds : xarray.Dataset
    path : str or path-like
    encoding : dict, optional
        Per-variable encoding, as for :meth:`xarray.Dataset.to_netcdf`.
    option : str, optional
        The option that named *path*, for messages.
    """
    image = ds.to_netcdf(None, engine="h5netcdf", encoding=encoding or {})
    return write_bytes_atomic(path, image, option)


def write_spectrum(ds: xr.Dataset, path: str | os.PathLike[str], option: str | None = None) -> Path:
    """Write a spectrum dataset to NetCDF-4 (h5netcdf engine) atomically.

    The dataset is checked against the contract first, so an incomplete dataset
    never reaches the disk.  Writing the same dataset twice gives byte-identical
    files (no time stamps are stored).

    Parameters
    ----------
    ds : xarray.Dataset
        Spectrum dataset (see ``DEVELOPERS.md``).
    path : str or path-like
        Target file; replaced only once the new file is complete (never a directory,
        symbolic link or other non-regular file).
    option : str, optional
        The option that named *path*, for messages (e.g. ``"--output"``).

    Returns
    -------
    pathlib.Path
        The path written.

    Raises
    ------
    SpectrumFileError
        If *ds* does not follow the contract.
    OutputError
        If the file cannot be written (see :func:`write_netcdf_atomic`).
    """
    check_spectrum(ds, "<dataset to be written to " + os.fspath(path) + ">")
    path = Path(path)
    # CF conventions 1.11 §2.5.1: coordinates hold no missing values, so no _FillValue
    encoding: dict[str, dict] = {name: {"_FillValue": None} for name in ds.coords}
    for name in ("vdos_segments", "vacf_segments_raw", "vdos"):
        if name in ds.variables:
            encoding[name] = {"zlib": True, "complevel": 4}
    return write_netcdf_atomic(ds, path, encoding, option)


def provenance_attributes(ds: xr.Dataset) -> dict[str, str]:
    """The CF global attributes ``history`` and ``source`` of a spectrum (CF 1.11 §2.6.2).

    Set by :func:`qcorr.spectra.assemble.assemble_spectrum` (so a spectrum in memory and
    its file carry the same attributes).  ``history`` is the command or call that made the file with the qcorr version (no
    wall-clock time, so the file stays byte-reproducible); ``source`` names the input
    files and the reader.
    """
    try:
        names = [str(record.get("name", "?")) for record in json.loads(ds.attrs.get("input_files", "[]"))]
    except (TypeError, ValueError, AttributeError):
        names = []
    return {
        "history": f"{ds.attrs.get('command_line', '')} (qcorr {ds.attrs.get('qcorr_version', '?')})",
        "source": (
            "classical molecular dynamics trajectory"
            + (f" ({', '.join(names)})" if names else "")
            + f", read with MDAnalysis {ds.attrs.get('mdanalysis_version', '?')}; mass-weighted "
            "velocity spectrum by qcorr"
        ),
    }


def json_attribute(ds: xr.Dataset, name: str) -> object:
    """Decode a JSON-string attribute (``input_files``, ``diagnostics``, ...).

    Raises
    ------
    SpectrumFileError
        If the attribute is missing or is not valid JSON.
    """
    try:
        return json.loads(ds.attrs[name])
    except KeyError as err:
        raise SpectrumFileError(f"spectrum dataset lacks the attribute '{name}'") from err
    except (TypeError, json.JSONDecodeError) as err:
        raise SpectrumFileError(f"spectrum attribute '{name}' is not valid JSON") from err


def group_names(ds: xr.Dataset) -> list[str]:
    """Group names of a spectrum dataset as plain Python strings."""
    return [str(g) for g in np.asarray(ds["group"].values)]


#: items qcorr keeps so that ``qcorr combine`` can rebuild the single-job result from frame
#: blocks (not needed by readers of the spectrum)
COMBINE_ATTRIBUTES: tuple[str, ...] = (
    "block_index",
    "block_count",
    "segment_count_window",
    "statistics_frames",
    "centre_of_mass_mv2_u_A2_per_ps2",
    "finite_difference_correction",
)
COMBINE_VARIABLES: dict[str, tuple[str, ...]] = {
    "raw_integral_segments": ("group", "segment"),
    "vacf_segments_raw": ("group", "segment", "lag"),
    "segment_first_frame": ("segment",),
}

#: group-table variables copied unchanged between files: name -> (units, long_name)
GROUP_TABLE: dict[str, tuple[str | None, str]] = {
    "degrees_of_freedom": ("1", "degrees of freedom: 3N - constraints - centre-of-mass share"),
    "constraint_count": ("1", "holonomic constraints subtracted"),
    "atom_count": ("1", "atoms in the group (virtual sites excluded)"),
    "molecule_count": ("1", "residues (molecules) in the group"),
    "group_mass": (units.MOLAR_MASS, "total mass of the group's atoms"),
    "selection": (None, "MDAnalysis selection string"),
}


def raw_segments_of(ds: xr.Dataset) -> np.ndarray:
    """Recover the raw (unnormalised) per-segment spectra, cm, from a spectrum dataset.

    ``vdos_segments × raw_integral / degrees_of_freedom``, shape (group, segment, wavenumber).
    """
    scale = (ds["raw_integral"] / ds["degrees_of_freedom"]).values
    return ds["vdos_segments"].values * scale[:, None, None]
