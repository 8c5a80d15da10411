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
from pathlib import Path

import numpy as np
import xarray as xr

from qcorr.errors import SpectrumFileError
from qcorr.spectra.assemble import SpectrumParts, spectrum_from_parts
from qcorr.spectra.molecular_file import (
    combine_molecular_parts,
    join_molecular_parts,
)
from qcorr.spectra.spectrum_file import (
    COMBINE_ATTRIBUTES,
    COMBINE_VARIABLES,
    GROUP_TABLE,
    json_attribute,
    raw_segments_of,
)

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
    )


def spectrum_parts_of(ds: xr.Dataset, molecular=None) -> SpectrumParts:
    """The :class:`SpectrumParts` a spectrum dataset (e.g. a block file) was made from.

    Raw spectra are recovered with :func:`qcorr.spectra.spectrum_file.raw_segments_of`; the
    running sums are the stored means times ``statistics_frames``.  *molecular* is the
    dataset's :class:`~qcorr.spectra.molecular_file.MolecularParts` (None: none).
    """
    frames = int(ds.attrs["statistics_frames"])
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
    )


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
    :func:`qcorr.reading.input_files.describe_files`); the joined record lists the parts of all
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
