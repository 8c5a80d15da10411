"""Joining frame blocks: the parts of one frame window, in memory or from block files.

Block I of N of a frame window holds the segments :func:`qcorr.spectra.segments.block_range`
gives it.  :func:`join_spectrum_parts` joins the :class:`~qcorr.spectra.assemble.SpectrumParts`
of consecutive blocks (the aggregator of a parallel run of
:class:`qcorr.spectra.analysis.VibrationalSpectrum`); :func:`combine_blocks` does the same
for the block files of ``qcorr spectrum --block I-of-N`` after checking that they belong
to one run, and joins their input-file records (:func:`combine_file_records`).
"""

from __future__ import annotations

import dataclasses
import itertools
import json
import os
from collections.abc import Sequence
from pathlib import Path

import numpy as np

from qcorr.errors import SpectrumFileError
from qcorr.lazy_modules import lazy
from qcorr.spectra.assemble import SpectrumParts, spectrum_from_parts
from qcorr.spectra.molecular_file import (
    combine_molecular_parts,
    join_molecular_parts,
)
from qcorr.spectra.position_noise import NoiseParts
from qcorr.spectra.spectrum_file import (
    COMBINE_ATTRIBUTES,
    COMBINE_VARIABLES,
    GROUP_TABLE,
    json_attribute,
    raw_segments_of,
)
from qcorr.spectra.stated_temperature import check_stated_temperature

xr = lazy("xarray")  # imported on first use: workers never need it (qcorr.lazy_modules)

__all__ = [
    "combine_blocks",
    "combine_file_records",
    "join_spectrum_parts",
    "spectrum_parts_of",
]


def join_spectrum_parts(parts: list[SpectrumParts]) -> SpectrumParts:
    """Join the parts of consecutive frame blocks, in block order, into one.

    Per-segment arrays are concatenated along ``segment``, the running sums added and the
    molecular parts joined (:func:`qcorr.spectra.molecular_file.join_molecular_parts`).

    Parameters
    ----------
    parts : list of SpectrumParts
        Parts whose segments follow each other without gap or repeat.

    Raises
    ------
    SpectrumFileError
        If the segments do not follow each other, the frequency or lag grids differ,
        or some parts have molecular parts and others not.
    """
    if len(parts) == 1:
        return parts[0]
    first = parts[0]
    for previous, part in itertools.pairwise(parts):
        if part.segment_index[0] != previous.segment_index[-1] + 1:
            raise SpectrumFileError(
                f"frame blocks do not follow each other: segment {int(part.segment_index[0])} comes after "
                f"segment {int(previous.segment_index[-1])}; join the blocks of one run in block order"
            )
        if not (np.array_equal(part.wavenumber, first.wavenumber) and np.array_equal(part.lag_ps, first.lag_ps)):
            raise SpectrumFileError("frame blocks have different frequency or lag grids; join the blocks of one run")
    molecular = [p.molecular for p in parts]
    if any(m is None for m in molecular) and not all(m is None for m in molecular):
        raise SpectrumFileError("some frame blocks have molecular parts and others not; make every block "
                                "with the same options (--molecular)")
    noise = [p.noise for p in parts]
    if any((m is None) != (noise[0] is None) for m in noise) or (noise[0] is not None and not all(
            np.allclose(m.floor, noise[0].floor, rtol=1e-9, atol=0.0) and m.step_A == noise[0].step_A
            for m in noise)):
        raise SpectrumFileError("frame blocks subtracted different rounding noise of positions; make every "
                                "block with the same options (--velocities-from, --position-precision)")
    return SpectrumParts(
        raw_segments=np.concatenate([p.raw_segments for p in parts], axis=1),
        correlation_segments=np.concatenate([p.correlation_segments for p in parts], axis=1),
        segment_index=np.concatenate([p.segment_index for p in parts]),
        segment_first_frame=np.concatenate([p.segment_first_frame for p in parts]),
        wavenumber=first.wavenumber,
        lag_ps=first.lag_ps,
        statistics_frames=int(sum(p.statistics_frames for p in parts)),
        box_volume_sum_A3=float(sum(p.box_volume_sum_A3 for p in parts)),
        com_mv2_sum=float(sum(p.com_mv2_sum for p in parts)),
        molecular=None if molecular[0] is None else join_molecular_parts(molecular),
        kinetic_samples=np.concatenate([p.kinetic_samples for p in parts]),
        kinetic_u_A2_per_ps2=np.concatenate([p.kinetic_u_A2_per_ps2 for p in parts]),
        momentum_u_A_per_ps=np.concatenate([p.momentum_u_A_per_ps for p in parts]),
        noise=noise[0],
    )


def spectrum_parts_of(ds: xr.Dataset, molecular=None) -> SpectrumParts:
    """The :class:`SpectrumParts` a spectrum dataset (e.g. a block file) was made from.

    Raw spectra are recovered with :func:`qcorr.spectra.spectrum_file.raw_segments_of`; the
    running sums are the stored means times ``statistics_frames``.  *molecular* is the
    dataset's :class:`~qcorr.spectra.molecular_file.MolecularParts` (None: none).
    """
    frames = int(ds.attrs["statistics_frames"])
    noise = None
    if "vdos_position_noise" in ds.variables:
        scale = (np.asarray(ds["raw_integral"].values, dtype=float)
                 / np.asarray(ds["degrees_of_freedom"].values, dtype=float))
        noise = NoiseParts(np.asarray(ds["vdos_position_noise"].values, dtype=float) * scale[:, None],
                           np.asarray(ds["position_noise_model_error"].values, dtype=float),
                           float(ds.attrs.get("position_precision_A", 0.0)))
    return SpectrumParts(
        raw_segments=raw_segments_of(ds),
        correlation_segments=np.asarray(ds["vacf_segments_raw"].values, dtype=float),
        segment_index=np.asarray(ds["segment"].values, dtype=np.int64),
        segment_first_frame=np.asarray(ds["segment_first_frame"].values, dtype=np.int64),
        wavenumber=np.asarray(ds["wavenumber"].values, dtype=float),
        lag_ps=np.asarray(ds["lag"].values, dtype=float),
        statistics_frames=frames,
        box_volume_sum_A3=float(ds.attrs["mean_box_volume_A3"]) * frames,
        com_mv2_sum=float(ds.attrs["centre_of_mass_mv2_u_A2_per_ps2"]) * frames,
        molecular=molecular,
        **_kinetic_series_of(ds),
        noise=noise,
    )


def _kinetic_series_of(ds: xr.Dataset) -> dict[str, np.ndarray]:
    """The per-frame kinetic-energy series of a spectrum dataset as SpectrumParts fields (empty if
    the file has none: made before they were stored)."""
    from qcorr.spectra.kinetic_series import (
        FRAME_TIME,
        KINETIC_ENERGY,
        KJ_PER_MOL_IN_U_A2_PER_PS2,
        TOTAL_MOMENTUM,
    )

    if KINETIC_ENERGY not in ds:
        return {}
    samples = np.rint(np.asarray(ds[FRAME_TIME].values, dtype=float) / float(ds.attrs["timestep_ps"]))
    return {"kinetic_samples": samples.astype(np.int64),
            "kinetic_u_A2_per_ps2": np.asarray(ds[KINETIC_ENERGY].values, dtype=float) * KJ_PER_MOL_IN_U_A2_PER_PS2,
            "momentum_u_A_per_ps": np.asarray(ds[TOTAL_MOMENTUM].values, dtype=float)}


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

    Each block job hashes its own share of every input file (``sha256_parts``) and the
    same sample of the whole file (``sha256_sample``, see
    :func:`qcorr.reading.input_files.describe_files`); the joined record lists the parts of
    all blocks in block order.  The blocks must list the same number of files, each with
    the same size and the same ``sha256_sample`` (their names may differ: a copy of a file
    is the same input), and their parts must cover each file from its first to its last
    byte without gap or overlap.  Records of files hashed whole (``sha256``) must have
    equal hashes.

    Parameters
    ----------
    records : list
        ``input_files`` of each block, in block order.
    names : list of str
        Block file names, for messages.

    Raises
    ------
    SpectrumFileError
        Different files (sizes or hashes), a record without hashes, or parts that do not
        cover a file.
    """
    first = records[0]
    for record, name in zip(records, names):
        if not (isinstance(record, list) and len(record) == len(first)
                and all(isinstance(entry, dict) for entry in record)):
            raise SpectrumFileError(
                f"block '{name}' lists other input files than block '{names[0]}'; combine only the "
                "blocks of one 'qcorr spectrum --block I-of-N' set"
            )
    joined = []
    for k, entry in enumerate(first):
        entries = [record[k] for record in records]
        _same_input(entries, names)
        if "sha256_parts" not in entry:
            joined.append(dict(entry))
            continue
        parts = [part for e in entries for part in e.get("sha256_parts", [])]
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
        joined.append({"name": entry["name"], "size_bytes": entry["size_bytes"],
                       "sha256_sample": entry["sha256_sample"], "sha256_parts": parts})
    return joined


def _same_input(entries: list[dict], names: list[str]) -> None:
    """The k-th input of every block is one file: same size and the same whole or sampled hash."""
    first = entries[0]
    key = "sha256" if "sha256" in first else "sha256_sample"
    for entry, name in zip(entries, names):
        if key not in entry or not entry[key]:
            raise SpectrumFileError(
                f"block '{name}' records no SHA-256 of its input '{entry.get('name')}' (made by an "
                "older qcorr, or without hashing); remake the blocks with this qcorr's 'qcorr spectrum "
                "--block I-of-N'"
            )
    what = "SHA-256" if key == "sha256" else "SHA-256 of sampled bytes"
    for entry, name in zip(entries[1:], names[1:]):
        if entry.get("size_bytes") != first.get("size_bytes"):
            difference = f"sizes differ ({entry.get('size_bytes')} and {first.get('size_bytes')} bytes)"
        elif entry[key] != first[key]:
            difference = f"same size ({entry.get('size_bytes')} bytes), different {what}"
        else:
            continue
        raise SpectrumFileError(
            f"block '{name}' was computed from another input than block '{names[0]}': its "
            f"'{entry.get('name')}' and their '{first.get('name')}' are different files ({difference}); "
            "combine only the blocks of one trajectory"
        )


def combine_blocks(datasets: list[xr.Dataset], names: list[str], command_line: str) -> xr.Dataset:
    """Rebuild the single-job spectrum from the frame-block files of one run.

    The blocks must come from the same inputs (sizes and SHA-256 samples equal; their
    SHA-256 parts must cover every file), settings and groups, with block indices 1..N each present once
    and their segments covering the frame window without gap or repeat.  Their parts
    (:func:`spectrum_parts_of`) are joined (:func:`join_spectrum_parts`) and the
    spectrum is built again (:func:`qcorr.spectra.assemble.spectrum_from_parts`), which
    gives the single-job result up to floating-point rounding.  Frame statistics (box
    volume, centre-of-mass motion) are frame-weighted: each block counts the frames from
    its first segment's start up to the next block's (the last block to its end), as the
    single job does.  Molecular variables are joined by
    :func:`qcorr.spectra.molecular_file.combine_molecular_parts`.

    Parameters
    ----------
    datasets : list of xarray.Dataset
        Block files as read by :func:`qcorr.spectra.spectrum_file.read_spectrum`.
    names : list of str
        File names, for messages.
    command_line : str
        Recorded as ``command_line`` of the result.

    Returns
    -------
    xarray.Dataset
        The spectrum of the whole frame window, block 1 of 1 (diagnostics not yet run).

    Raises
    ------
    SpectrumFileError
        Mismatching blocks, missing or repeated block indices, or gaps/repeats in the
        segments (names the block file and the item).
    """
    count = _check_blocks(datasets, names)
    datasets, names = _in_block_order(datasets, names, count)
    input_files = combine_file_records([json_attribute(ds, "input_files") for ds in datasets], names)
    molecular = combine_molecular_parts(datasets, names)
    parts = [spectrum_parts_of(ds) for ds in datasets]
    n_window = int(datasets[0].attrs["segment_count_window"])
    segments = np.concatenate([p.segment_index for p in parts])
    if not np.array_equal(segments, np.arange(n_window)):
        raise SpectrumFileError(
            f"the segments of the blocks do not cover 0..{n_window - 1} once each in order; the "
            "block files come from different runs"
        )
    joined = join_spectrum_parts(parts)
    if molecular is not None:
        joined = dataclasses.replace(joined, molecular=molecular)
    first = datasets[0]
    table = {"group": first["group"].values}
    table.update({name: first[name].values for name in GROUP_TABLE})
    attrs = dict(first.attrs)
    total = [str(g) for g in table["group"]].index("total")
    if not int(attrs.get("temperature_mismatch_allowed", 0)):
        check_stated_temperature(joined.raw_segments[total], joined.wavenumber,
                                 float(table["degrees_of_freedom"][total]), float(attrs["temperature_K"]))
    attrs.update(block_index=1, block_count=1, command_line=command_line,
                 input_files=json.dumps(input_files),
                 combined_from=json.dumps([{"name": Path(n).name, "block_index": int(ds.attrs["block_index"])}
                                           for n, ds in zip(names, datasets)]))
    return spectrum_from_parts(joined, table, attrs)


def _check_blocks(datasets: list[xr.Dataset], names: list[str]) -> int:
    """Check that *datasets* are blocks of one run; return their block count."""
    for ds, name in zip(datasets, names):
        for attr in COMBINE_ATTRIBUTES:
            if attr not in ds.attrs:
                raise SpectrumFileError(f"spectrum file '{name}' lacks '{attr}'; it is not a qcorr block file")
        for var in COMBINE_VARIABLES:
            if var not in ds.variables:
                raise SpectrumFileError(f"spectrum file '{name}' lacks '{var}'; it is not a qcorr block file")
    same_attrs = (
        "temperature_K", "timestep_ps", "frame_start", "frame_stop", "frame_step",
        "segment_frames", "segment_overlap", "taper", "velocity_source",
        "finite_difference_correction", "block_count", "segment_count_window",
        "position_precision_A", "repeated_frames_dropped",
    )
    for attr in same_attrs:
        _same([ds.attrs.get(attr) for ds in datasets], f"attribute '{attr}'", names)
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


def combine_spectra(block_files: Sequence[str | os.PathLike[str]]) -> xr.Dataset:
    """Join the frame-block spectrum files of one run (``--block I-of-N``) into one spectrum.

    What ``qcorr combine`` does, for a notebook: read each file (checked against the
    spectrum-file contract), join them (:func:`combine_blocks`: same inputs, settings and
    groups, every block once) and run the diagnostics, which are stored in the result's
    ``diagnostics`` attribute and issued as :class:`~qcorr.errors.QcorrWarning`.

    Parameters
    ----------
    block_files : sequence of path-like
        The N block files, in any order.

    Returns
    -------
    xarray.Dataset
        The spectrum of the whole frame window, equal to a single job's up to rounding.

    Raises
    ------
    SpectrumFileError
        Naming the block file at fault (unreadable, another run, a block missing).
    """
    from qcorr.spectra.diagnostics import announce, diagnose
    from qcorr.spectra.spectrum_file import read_spectrum

    names = [os.fspath(p) for p in block_files]
    combined = combine_blocks([read_spectrum(n) for n in names], names,
                              "qcorr.combine_spectra(" + ", ".join(map(repr, names)) + ")")
    announce(diagnose(combined), stacklevel=3)
    return combined
