"""The spectrum file: the NetCDF contract between ``qcorr spectrum`` and every later step.

The layout (variables, coordinates, attributes, units) is described in
``DEVELOPERS.md`` ("The spectrum file").  This module writes it (h5netcdf engine,
atomically, byte-reproducible: no wall-clock time is stored), reads it back and
checks that a file really is a qcorr spectrum file before anything uses it.

Everything here is I/O and bookkeeping; the physics (the segment-averaged
spectrum estimator) lives in :mod:`qcorr.spectra.estimator`, the normalisation to the
degrees of freedom in :func:`normalise_spectrum`.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np
import xarray as xr

from qcorr.errors import SpectrumFileError
from qcorr.safe_write import atomic_path

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


def write_spectrum(ds: xr.Dataset, path: str | os.PathLike[str]) -> Path:
    """Write a spectrum dataset to NetCDF-4 (h5netcdf engine) atomically.

    The dataset is checked against the contract first, so an incomplete dataset
    never reaches the disk.  Writing the same dataset twice gives byte-identical
    files (no time stamps are stored).

    Parameters
    ----------
    ds : xarray.Dataset
        Spectrum dataset (see ``DEVELOPERS.md``).
    path : str or path-like
        Target file; replaced only once the new file is complete.

    Returns
    -------
    pathlib.Path
        The path written.

    Raises
    ------
    SpectrumFileError
        If *ds* does not follow the contract.
    """
    check_spectrum(ds, "<dataset to be written to " + os.fspath(path) + ">")
    path = Path(path)
    encoding = {}
    for name in ("vdos_segments", "vacf_segments_raw", "vdos"):
        if name in ds.variables:
            encoding[name] = {"zlib": True, "complevel": 4}
    with atomic_path(path) as tmp:
        ds.to_netcdf(tmp, engine="h5netcdf", encoding=encoding)
    return path


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


# --------------------------------------------------------------------------- building
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
    "group_mass": ("g mol-1", "total mass of the group's atoms"),
    "selection": (None, "MDAnalysis selection string"),
}


def group_table(groups) -> dict[str, np.ndarray]:
    """Arrays of the group table from objects with ``name``, ``selection``, ``degrees_of_freedom``,
    ``constraints``, ``atom_count``, ``molecule_count``, ``mass`` (see :class:`qcorr.reading.trajectory.GroupInfo`)."""
    return {
        "group": np.array([g.name for g in groups]),
        "degrees_of_freedom": np.array([g.degrees_of_freedom for g in groups], dtype=float),
        "constraint_count": np.array([g.constraints for g in groups], dtype=float),
        "atom_count": np.array([g.atom_count for g in groups], dtype=np.int64),
        "molecule_count": np.array([g.molecule_count for g in groups], dtype=np.int64),
        "group_mass": np.array([g.mass for g in groups], dtype=float),
        "selection": np.array([g.selection for g in groups]),
    }


def assemble_spectrum(
    *,
    raw_segments: np.ndarray,
    correlation_segments: np.ndarray,
    wavenumber: np.ndarray,
    lag_ps: np.ndarray,
    table: dict[str, np.ndarray],
    segment_index: np.ndarray,
    segment_first_frame: np.ndarray,
    attrs: dict[str, object],
) -> xr.Dataset:
    """Normalise raw per-segment spectra to the degrees of freedom and lay out the spectrum file.

    Parameters
    ----------
    raw_segments : ndarray, shape (n_groups, n_segments, n_wavenumber)
        Raw VDOS per segment in cm (per cm⁻¹), i.e. (2/kT)·mass-weighted velocity power
        with the stated temperature, already divided by any finite-difference transfer
        function.  Its integral over wavenumber is Σm⟨v²⟩/kT of the segment.
    correlation_segments : ndarray, shape (n_groups, n_segments, n_lag)
        Unnormalised mass-weighted velocity autocorrelation Σ m⟨v(0)·v(t)⟩, u Å² ps⁻².
    wavenumber : ndarray (n_wavenumber,), cm⁻¹
    lag_ps : ndarray (n_lag,), ps
    table : dict
        Group table from :func:`group_table` (``group`` names first).
    segment_index : ndarray (n_segments,)
        Index of each segment among all segments of the frame window.
    segment_first_frame : ndarray (n_segments,)
        Trajectory frame at which each segment starts.
    attrs : dict
        Global attributes (contract + :data:`COMBINE_ATTRIBUTES`); ``temperature_K``
        must be among them.  ``diagnostics`` is left to the caller.

    Returns
    -------
    xarray.Dataset

    Notes
    -----
    With R_s(ν̃) the raw spectrum of segment s and dof the degrees of freedom,
    raw_integral = mean_s ∫R_s dν̃ (trapezoid), the normalisation factor is
    dof/raw_integral, ``vdos = factor · mean_s R_s`` and
    ``vdos_segments = factor · R_s``; the kinetic temperature is
    T · raw_integral/dof = Σm⟨v²⟩/(dof k) (sum rule of the VDOS, S.-T. Lin,
    M. Blanco, W. A. Goddard III, J. Chem. Phys. 119, 11792 (2003)).
    The VACF is mean_s C_s(t) / mean_s C_s(0).
    """
    raw_segments = np.asarray(raw_segments, dtype=float)
    correlation_segments = np.asarray(correlation_segments, dtype=float)
    temperature = float(attrs["temperature_K"])
    dof = table["degrees_of_freedom"]
    seg_integrals = np.trapezoid(raw_segments, wavenumber, axis=-1)
    raw_integral = seg_integrals.mean(axis=1)
    factor = dof / raw_integral
    raw_mean = raw_segments.mean(axis=1)
    corr_mean = correlation_segments.mean(axis=1)
    vacf = corr_mean / corr_mean[:, :1]
    from qcorr.constants import wavenumber_to_THz

    coords = {
        "group": ("group", table["group"], {"long_name": "atom group"}),
        "wavenumber": ("wavenumber", np.asarray(wavenumber, float), {"units": "cm-1", "long_name": "wavenumber"}),
        "frequency": (
            "wavenumber",
            wavenumber_to_THz(wavenumber),
            {"units": "THz", "long_name": "frequency (same grid as wavenumber)"},
        ),
        "lag": ("lag", np.asarray(lag_ps, float), {"units": "ps", "long_name": "correlation lag time"}),
        "segment": (
            "segment",
            np.asarray(segment_index, dtype=np.int64),
            {"units": "1", "long_name": "segment index within the frame window"},
        ),
    }
    data = {
        "vdos": (
            ("group", "wavenumber"),
            raw_mean * factor[:, None],
            {"units": "cm", "long_name": "vibrational density of states per unit wavenumber, one-sided; integral = degrees of freedom"},
        ),
        "vdos_segments": (
            ("group", "segment", "wavenumber"),
            raw_segments * factor[:, None, None],
            {"units": "cm", "long_name": "vibrational density of states of each segment (same normalisation factor as vdos)"},
        ),
        "vacf": (
            ("group", "lag"),
            vacf,
            {"units": "1", "long_name": "mass-weighted velocity autocorrelation, normalised to 1 at lag 0"},
        ),
        "kinetic_temperature": (
            ("group",),
            temperature * raw_integral / dof,
            {"units": "K", "long_name": "kinetic temperature sum(m <v^2>)/(dof k)"},
        ),
        "raw_integral": (
            ("group",),
            raw_integral,
            {"units": "1", "long_name": "integral of the spectrum before normalisation, sum(m <v^2>)/(k T)"},
        ),
        "raw_integral_segments": (
            ("group", "segment"),
            seg_integrals,
            {"units": "1", "long_name": "integral of each segment's spectrum before normalisation"},
        ),
        "vacf_segments_raw": (
            ("group", "segment", "lag"),
            correlation_segments,
            {"units": "g mol-1 Angstrom2 ps-2", "long_name": "unnormalised mass-weighted velocity autocorrelation of each segment"},
        ),
        "segment_first_frame": (
            ("segment",),
            np.asarray(segment_first_frame, dtype=np.int64),
            {"units": "1", "long_name": "trajectory frame at which the segment starts"},
        ),
    }
    for name, (units, long_name) in GROUP_TABLE.items():
        var_attrs = {"long_name": long_name}
        if units is not None:
            var_attrs["units"] = units
        data[name] = (("group",), table[name], var_attrs)
    ds = xr.Dataset(data, coords=coords, attrs=dict(attrs))
    ds.attrs.setdefault("diagnostics", "[]")
    return ds


def raw_segments_of(ds: xr.Dataset) -> np.ndarray:
    """Recover the raw (unnormalised) per-segment spectra, cm, from a spectrum dataset."""
    scale = (ds["raw_integral"] / ds["degrees_of_freedom"]).values
    return ds["vdos_segments"].values * scale[:, None, None]


def raw_spectra(power: np.ndarray, frequency_Hz: np.ndarray, temperature_K: float, *,
                finite_difference_timestep_ps: float | None = None) -> np.ndarray:
    """Raw VDOS per cm⁻¹ from mass-weighted velocity power, corrected for finite differences.

    Parameters
    ----------
    power : ndarray (..., n_freq)
        One-sided mass-weighted velocity PSD, (u Å² ps⁻²)/Hz (:class:`qcorr.spectra.estimator.SegmentPowers`).
    frequency_Hz : ndarray (n_freq,), Hz
    temperature_K : float
        Stated temperature, K.
    finite_difference_timestep_ps : float, optional
        If the velocities were forward differences of positions this far apart (ps),
        the spectrum is divided by the power transfer function sinc²(πνΔt) *before*
        any normalisation, so that the kinetic-energy deficit of the differences is
        restored where it was lost (methods notes §2.7; A. V. Oppenheim, R. W. Schafer,
        *Discrete-Time Signal Processing*, 3rd ed., 2010, first-difference response).

    Returns
    -------
    ndarray, same shape as *power*, cm
    """
    from qcorr.spectra.estimator import finite_difference_power_transfer, vdos_per_wavenumber

    raw = vdos_per_wavenumber(power, temperature_K)
    if finite_difference_timestep_ps is not None:
        raw = raw / finite_difference_power_transfer(frequency_Hz, finite_difference_timestep_ps, "forward")
    return raw


def _same(values: list, what: str, names: list[str]) -> None:
    first = values[0]
    for value, name in zip(values[1:], names[1:]):
        equal = np.array_equal(value, first) if isinstance(first, np.ndarray) else value == first
        if not equal:
            raise SpectrumFileError(
                f"block '{name}' differs from block '{names[0]}' in {what}; combine only the blocks "
                "of one 'qcorr spectrum --block I-of-N' set"
            )


def combine_file_records(records: list, names: list[str]) -> list[dict]:
    """Join the input-file records of N block files into one record per file.

    Each block job hashes its own share of every input file (``sha256_parts``, see
    :func:`qcorr.reading.trajectory.describe_files`); the joined record lists the parts of all
    blocks in block order.  The blocks must name the same files with the same sizes and
    their parts must cover each file from its first to its last byte without gap or
    overlap.  Records of files hashed whole (``sha256``) must be identical.

    Parameters
    ----------
    records : list
        ``input_files`` of each block, in block order.
    names : list of str
        Block file names, for messages.

    Raises
    ------
    SpectrumFileError
        Different files or sizes, or parts that do not cover a file.
    """
    first = records[0]
    for record, name in zip(records[1:], names[1:]):
        same = isinstance(record, list) and len(record) == len(first) and all(
            isinstance(a, dict) and a.get("name") == b.get("name") and a.get("size_bytes") == b.get("size_bytes")
            for a, b in zip(record, first)
        )
        if not same:
            raise SpectrumFileError(
                f"block '{name}' was computed from other input files (names or sizes) than block "
                f"'{names[0]}'; combine only the blocks of one 'qcorr spectrum --block I-of-N' set"
            )
    joined = []
    for k, entry in enumerate(first):
        if "sha256_parts" not in entry:
            _same([r[k] for r in records], f"input file record of '{entry.get('name')}'", names)
            joined.append(dict(entry))
            continue
        parts = [part for r in records for part in r[k].get("sha256_parts", [])]
        position = 0
        for part in parts:
            if part.get("first_byte") != position:
                break
            position = part.get("stop_byte")
        if position != entry["size_bytes"] or len(parts) != len(records):
            raise SpectrumFileError(
                f"the SHA-256 parts of input file '{entry['name']}' in the block files do not cover "
                f"its {entry['size_bytes']} bytes once in order; the block files come from "
                "different runs"
            )
        joined.append({"name": entry["name"], "size_bytes": entry["size_bytes"], "sha256_parts": parts})
    return joined


def combine_blocks(datasets: list[xr.Dataset], names: list[str], command_line: str) -> xr.Dataset:
    """Rebuild the single-job spectrum from the frame-block files of one run.

    The blocks must come from the same inputs (names and sizes; their SHA-256 parts must
    cover every file), settings and groups, with block indices 1..N each present once
    and their segments covering the frame window without gap or repeat.  Raw
    per-segment spectra and correlations are concatenated in segment order and
    normalised again (:func:`assemble_spectrum`), which gives the single-job result up
    to floating-point rounding.  Frame statistics (box volume, centre-of-mass motion)
    are frame-weighted means: each block counts the frames from its first segment's
    start up to the next block's (the last block to its end), as the single job does.
    Molecular variables are joined by :func:`qcorr.spectra.molecular_file.combine_molecular_parts`.

    Parameters
    ----------
    datasets : list of xarray.Dataset
        Block files as read by :func:`read_spectrum`.
    names : list of str
        File names, for messages.
    command_line : str
        Recorded as ``command_line`` of the result.

    Raises
    ------
    SpectrumFileError
        Mismatching blocks, missing or repeated block indices, or gaps/repeats in the
        segments (names the block file and the item).
    """
    count = _check_blocks(datasets, names)
    datasets, names = _in_block_order(datasets, names, count)
    input_files = combine_file_records([json_attribute(ds, "input_files") for ds in datasets], names)
    n_window = int(datasets[0].attrs["segment_count_window"])
    joined = join_blocks(datasets, names, command_line, (0, n_window), 1, 1)
    joined.attrs["input_files"] = json.dumps(input_files)
    joined.attrs["combined_from"] = json.dumps(
        [{"name": Path(n).name, "block_index": int(ds.attrs["block_index"])} for n, ds in zip(names, datasets)]
    )
    return joined


def _check_blocks(datasets: list[xr.Dataset], names: list[str]) -> int:
    """Check that *datasets* are blocks of one run; return their block count."""
    for ds, name in zip(datasets, names):
        for attr in COMBINE_ATTRIBUTES:
            if attr not in ds.attrs:
                raise SpectrumFileError(f"{_describe(name)} lacks '{attr}'; it is not a qcorr block file")
        for var in COMBINE_VARIABLES:
            if var not in ds.variables:
                raise SpectrumFileError(f"{_describe(name)} lacks '{var}'; it is not a qcorr block file")
    same_attrs = (
        "temperature_K", "timestep_ps", "frame_start", "frame_stop", "frame_step",
        "segment_frames", "segment_overlap", "taper", "velocity_source",
        "finite_difference_correction", "block_count", "segment_count_window",
    )
    for attr in same_attrs:
        _same([ds.attrs[attr] for ds in datasets], f"attribute '{attr}'", names)
    for var in ("group", "wavenumber", "lag", *GROUP_TABLE):
        _same([ds[var].values for ds in datasets], f"'{var}'", names)
    return int(datasets[0].attrs["block_count"])


def _in_block_order(datasets: list[xr.Dataset], names: list[str], count: int):
    """*datasets* and *names* sorted by block index; the indices must be exactly 1..*count*."""
    expected = range(1, count + 1)
    indices = [int(ds.attrs["block_index"]) for ds in datasets]
    if sorted(indices) != list(expected):
        missing = sorted(set(expected) - set(indices))
        repeated = sorted({i for i in indices if indices.count(i) > 1})
        raise SpectrumFileError(
            f"the blocks given are {sorted(indices)} of {count}: missing {missing}, repeated "
            f"{repeated}; give each block 1..{count} exactly once"
        )
    order = np.argsort(indices)
    return [datasets[i] for i in order], [names[i] for i in order]


def join_blocks(datasets: list[xr.Dataset], names: list[str], command_line: str,
                segment_range: tuple[int, int], block_index: int, block_count: int) -> xr.Dataset:
    """Join consecutive frame blocks (in block order) covering *segment_range* into one.

    The result is block *block_index* (1-based) of *block_count* (1 of 1: the whole
    window) with its segments ``segment_range[0] .. segment_range[1]-1``.  Used by
    :func:`combine_blocks` and by ``qcorr spectrum --threads`` for the worker
    processes' sub-blocks.  ``input_files`` is left as the first block's.
    """
    segments = np.concatenate([ds["segment"].values for ds in datasets])
    if not np.array_equal(segments, np.arange(*segment_range)):
        raise SpectrumFileError(
            f"the segments of the blocks do not cover {segment_range[0]}..{segment_range[1] - 1} "
            "once each in order; the block files come from different runs"
        )
    first = datasets[0]
    table = {"group": first["group"].values}
    table.update({name: first[name].values for name in GROUP_TABLE})
    frames = np.array([float(ds.attrs["statistics_frames"]) for ds in datasets])
    box = np.array([float(ds.attrs["mean_box_volume_A3"]) for ds in datasets])
    com = np.array([float(ds.attrs["centre_of_mass_mv2_u_A2_per_ps2"]) for ds in datasets])
    attrs = dict(first.attrs)
    attrs.update(
        block_index=int(block_index),
        block_count=int(block_count),
        command_line=command_line,
        frames_used=int(datasets[-1]["segment_first_frame"].values[-1]
                        - first["segment_first_frame"].values[0]) // int(attrs["frame_step"])
        + int(attrs["segment_frames"]) + (1 if attrs["velocity_source"] == "finite_difference" else 0),
        statistics_frames=int(frames.sum()),
        mean_box_volume_A3=float((box * frames).sum() / frames.sum()),
        centre_of_mass_mv2_u_A2_per_ps2=float((com * frames).sum() / frames.sum()),
    )
    attrs["diagnostics"] = "[]"
    for name in ("principal_moment_frames", "molecular_decomposition", "molecule_definition"):
        attrs.pop(name, None)  # set again below for molecular blocks
    combined = assemble_spectrum(
        raw_segments=np.concatenate([raw_segments_of(ds) for ds in datasets], axis=1),
        correlation_segments=np.concatenate([ds["vacf_segments_raw"].values for ds in datasets], axis=1),
        wavenumber=first["wavenumber"].values,
        lag_ps=first["lag"].values,
        table=table,
        segment_index=segments,
        segment_first_frame=np.concatenate([ds["segment_first_frame"].values for ds in datasets]),
        attrs=attrs,
    )
    from qcorr.spectra.molecular_file import add_molecular_variables, combine_molecular_parts

    parts = combine_molecular_parts(datasets, names)
    return combined if parts is None else add_molecular_variables(combined, parts)
