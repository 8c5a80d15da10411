"""Building the spectrum dataset: normalisation to the degrees of freedom, layout, attributes.

A spectrum is made from :class:`SpectrumParts`: the raw (unnormalised) per-segment
spectra and correlations of consecutive segments plus running sums (frames, box
volume, centre-of-mass motion) and the molecular parts.  Everything in it adds up
across frame blocks (:func:`qcorr.spectra.blocks.join_spectrum_parts`), so a single
job, the parts of a parallel run and ``qcorr combine`` of block files all reach the
file through :func:`spectrum_from_parts` and give the same result up to rounding.
The layout is the contract of :mod:`qcorr.spectra.spectrum_file` (``DEVELOPERS.md``,
"The spectrum file").

References
----------
.. [1] S.-T. Lin, M. Blanco, W. A. Goddard III, "The two-phase model for calculating
   thermodynamic properties of liquids from molecular dynamics", J. Chem. Phys.
   119, 11792 (2003), doi:10.1063/1.1624057 (sum rule of the VDOS).
"""

from __future__ import annotations

import json
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from qcorr import units
from qcorr.constants import speed_of_light_cm_per_s, wavenumber_to_THz
from qcorr.lazy_modules import lazy
from qcorr.spectra.molecular_file import MolecularParts, add_molecular_variables
from qcorr.spectra.position_noise import NoiseParts, measured_shares
from qcorr.spectra.spectrum_file import (
    FILE_KIND,
    FORMAT_VERSION,
    GROUP_TABLE,
    provenance_attributes,
)

xr = lazy("xarray")  # imported on first use: workers never need it (qcorr.lazy_modules)

__all__ = [
    "SpectrumParts",
    "assemble_spectrum",
    "group_table",
    "spectrum_attributes",
    "spectrum_from_parts",
]

#: attributes that only molecular spectra carry (set by add_molecular_variables)
_MOLECULAR_ATTRIBUTES = ("principal_moment_frames", "molecular_decomposition", "molecule_definition")


@dataclass(frozen=True)
class SpectrumParts:
    """What a spectrum file is made from, for consecutive segments of one frame window.

    Every item adds up across frame blocks: arrays along ``segment`` concatenate, sums add.

    Attributes
    ----------
    raw_segments : float array (n_groups, n_segments, n_wavenumber)
        Raw VDOS of each segment, cm (per cm⁻¹): the 1/kT-scaled mass-weighted velocity
        power, already divided by any finite-difference transfer function
        (:func:`qcorr.spectra.raw_vdos.raw_spectra`); integral Σm⟨v²⟩/kT.
    correlation_segments : float array (n_groups, n_segments, n_lag)
        Unnormalised mass-weighted velocity autocorrelation Σ m⟨v(0)·v(t)⟩ of each
        segment, u Å² ps⁻².
    segment_index : int array (n_segments,)
        Index of each segment among all segments of the frame window.
    segment_first_frame : int array (n_segments,)
        Trajectory frame at which each segment starts.
    wavenumber : float array (n_wavenumber,)
        cm⁻¹.
    lag_ps : float array (n_lag,)
        ps.
    statistics_frames : int
        Frames counted in the sums below.
    box_volume_sum_A3 : float
        Sum of box volumes over those frames, Å³.
    com_mv2_sum : float
        Sum over those frames of M |V_com|² before its removal, u Å² ps⁻².
    molecular : MolecularParts or None
        Molecular decomposition (``--molecular``), for the same segments.
    kinetic_samples : int array (n_frames,)
        Window index of every counted frame (the frames of the sums above), in order.
    kinetic_u_A2_per_ps2 : float array (n_frames,)
        Σ ½ m v² of the whole system after the centre-of-mass removal, u Å² ps⁻².
    momentum_u_A_per_ps : float array (n_frames, 3)
        Total momentum Σ m v before the removal, u Å ps⁻¹.
    noise : NoiseParts or None
        Rounding noise of positions subtracted from ``raw_segments`` (spectra from
        differences of positions; :mod:`qcorr.spectra.position_noise`); equal in every block.
    """

    raw_segments: NDArray[np.float64]
    correlation_segments: NDArray[np.float64]
    segment_index: NDArray[np.int64]
    segment_first_frame: NDArray[np.int64]
    wavenumber: NDArray[np.float64]
    lag_ps: NDArray[np.float64]
    statistics_frames: int
    box_volume_sum_A3: float
    com_mv2_sum: float
    molecular: MolecularParts | None = None
    kinetic_samples: NDArray[np.int64] = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    kinetic_u_A2_per_ps2: NDArray[np.float64] = field(default_factory=lambda: np.zeros(0))
    momentum_u_A_per_ps: NDArray[np.float64] = field(default_factory=lambda: np.zeros((0, 3)))
    noise: NoiseParts | None = None


def group_table(groups) -> dict[str, np.ndarray]:
    """Arrays of the group table (``group`` names first, then :data:`GROUP_TABLE` variables).

    Parameters
    ----------
    groups : sequence
        Objects with ``name``, ``selection``, ``degrees_of_freedom``, ``constraints``,
        ``atom_count``, ``molecule_count`` and ``mass`` (u), e.g.
        :class:`qcorr.reading.groups.GroupInfo`.
    """
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
    noise: NoiseParts | None = None,
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
    noise : NoiseParts, optional
        Rounding noise subtracted from *raw_segments*: adds ``vdos_position_noise``
        (its floor with the vdos normalisation), ``position_noise_share`` and
        ``position_noise_model_error``.

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
            {"units": units.MASS_VELOCITY_SQUARED, "long_name": "unnormalised mass-weighted velocity autocorrelation of each segment"},
        ),
        "segment_first_frame": (
            ("segment",),
            np.asarray(segment_first_frame, dtype=np.int64),
            {"units": "1", "long_name": "trajectory frame at which the segment starts"},
        ),
    }
    for name, (unit, long_name) in GROUP_TABLE.items():
        var_attrs = {"long_name": long_name}
        if unit is not None:
            var_attrs["units"] = unit
        data[name] = (("group",), table[name], var_attrs)
    if noise is not None:
        floor = np.asarray(noise.floor, dtype=float)
        data["vdos_position_noise"] = (
            ("group", "wavenumber"), floor * factor[:, None],
            {"units": "cm", "long_name": "expected rounding noise of positions subtracted from the spectrum "
                                        "(same normalisation as vdos)"})
        data["position_noise_share"] = (
            ("group",), measured_shares(raw_integral, np.trapezoid(floor, wavenumber, axis=-1)),
            {"units": "1", "long_name": "share of the kinetic energy from differences of positions that was "
                                        "rounding noise (subtracted)"})
        data["position_noise_model_error"] = (
            ("group",), np.asarray(noise.model_error, dtype=float),
            {"units": "1", "long_name": "bound of the rounding model's error, fraction of the kinetic energy"})
    ds = xr.Dataset(data, coords=coords, attrs=dict(attrs))
    ds.attrs.setdefault("diagnostics", "[]")
    ds.attrs.update(provenance_attributes(ds))
    return ds


def spectrum_attributes(
    *,
    temperature_K: float,
    window,
    settings,
    velocity_source: str,
    input_files: list,
    command_line: str,
    qcorr_version: str,
    mdanalysis_version: str,
    block_index: int = 1,
    block_count: int = 1,
    segment_count_window: int,
    worker_processes: int = 1,
    lammps_units: str = "",
    reader_options: Mapping[str, object] | None = None,
    mass_overrides_u: Mapping[str, object] | None = None,
    excluded_atoms: str = "",
    time_axis: str = "time stamps of the trajectory file(s)",
    velocity_check: str = "not made",
    velocity_position_ratio: float = float("nan"),
    position_precision_A: float = 0.0,
    position_precision_source: str = "",
    repeated_frames_dropped: list | None = None,
    temperature_mismatch_allowed: bool = False,
) -> dict[str, object]:
    """Global attributes of a spectrum file that describe how it was made.

    The attributes that follow from the data (``frames_used``, ``statistics_frames``,
    ``mean_box_volume_A3``, ``centre_of_mass_mv2_u_A2_per_ps2``) are added by
    :func:`spectrum_from_parts`, ``diagnostics`` by :mod:`qcorr.spectra.diagnostics`.

    Parameters
    ----------
    temperature_K : float
        Stated temperature, K.
    window : qcorr.reading.time_axis.FrameWindow
        Frame window (start, stop, step; time step in ps).
    settings : qcorr.spectra.segments.SpectrumSettings
        Segment length (frames), overlap, taper.
    velocity_source : {"stored", "positions"}
    input_files : list of dict
        Records of :mod:`qcorr.reading.input_files`.
    command_line, qcorr_version, mdanalysis_version : str
        Provenance.
    block_index, block_count : int
        Frame block of this file (1-based; 1 of 1 for a whole window).
    segment_count_window : int
        Segments in the whole frame window.
    worker_processes : int
        Processes that computed the file's frames.
    lammps_units : str
        LAMMPS unit style of a dump (``""`` otherwise).
    reader_options, mass_overrides_u : mapping, optional
        Reader keywords and per-type masses (u) used, recorded as JSON.
    excluded_atoms : str
        Note on excluded virtual sites.
    time_axis : str
        Where the frame spacing came from (:mod:`qcorr.reading.time_source`).
    velocity_check, velocity_position_ratio : str, float
        Stored velocities against positions (:mod:`qcorr.reading.velocity_check`; NaN: not made).
    position_precision_A, position_precision_source : float, str
        Rounding step of the positions (Å) and its source (spectra from positions; 0 and
        ``""`` for stored velocities).
    repeated_frames_dropped : list of dict, optional
        Restart frames left out (:mod:`qcorr.reading.restarts`).
    temperature_mismatch_allowed : bool
        The kinetic-temperature refusal was switched off (``--allow-temperature-mismatch``).
    """
    positions = velocity_source == "positions"
    return {
        "qcorr_file_kind": FILE_KIND,
        "qcorr_format_version": FORMAT_VERSION,
        "Conventions": "CF-1.11",
        "title": "vibrational density of states from mass-weighted velocities",
        "references": "S.-T. Lin, M. Blanco, W. A. Goddard III, J. Chem. Phys. 119, 11792 (2003); "
                      "P. D. Welch, IEEE Trans. Audio Electroacoust. 15, 70 (1967)",
        "temperature_K": float(temperature_K),
        "timestep_ps": float(window.timestep_ps),
        "frame_start": int(window.start),
        "frame_stop": int(window.stop),
        "frame_step": int(window.step),
        "segment_frames": int(settings.segment_frames),
        "segment_length_ps": float(settings.segment_ps),
        "segment_overlap": float(settings.overlap),
        "taper": settings.taper,
        "resolution_wavenumber": float(settings.resolution_Hz / speed_of_light_cm_per_s),
        "nyquist_wavenumber": float(settings.nyquist_Hz / speed_of_light_cm_per_s),
        "velocity_source": "finite_difference" if positions else "stored",
        "finite_difference_correction": (
            "forward differences of minimum-image displacements; spectrum divided by "
            "sinc^2(pi nu dt) before normalisation; vacf is that of the differences, uncorrected"
            if positions else "none"
        ),
        "lammps_units": lammps_units or "",
        "reader_options": json.dumps(dict(reader_options or {}), sort_keys=True),
        "mass_overrides_u": json.dumps(dict(mass_overrides_u or {}), sort_keys=True),
        "excluded_atoms": excluded_atoms,
        "time_axis": time_axis,
        "velocity_check": velocity_check,
        "velocity_position_ratio": float(velocity_position_ratio),
        "position_precision_A": float(position_precision_A) if positions else 0.0,
        "position_precision_source": position_precision_source if positions else "",
        "repeated_frames_dropped": json.dumps(list(repeated_frames_dropped or [])),
        "temperature_mismatch_allowed": int(bool(temperature_mismatch_allowed)),
        "input_files": json.dumps(input_files),
        "diagnostics": "[]",
        "qcorr_version": qcorr_version,
        "mdanalysis_version": mdanalysis_version,
        "command_line": command_line,
        "block_index": int(block_index),
        "block_count": int(block_count),
        "worker_processes": int(worker_processes),
        "segment_count_window": int(segment_count_window),
    }


def spectrum_from_parts(parts: SpectrumParts, table: Mapping[str, np.ndarray],
                        attrs: Mapping[str, object]) -> xr.Dataset:
    """The spectrum dataset (diagnostics not yet run) of *parts*.

    Parameters
    ----------
    parts : SpectrumParts
        Consecutive segments of one frame window (one part, or parts joined by
        :func:`qcorr.spectra.blocks.join_spectrum_parts`).
    table : mapping
        Group table (:func:`group_table`).
    attrs : mapping
        Global attributes (:func:`spectrum_attributes`, or a block file's); the
        frame-count and statistics attributes are (re)computed here from *parts*,
        ``diagnostics`` is reset to ``"[]"``.

    Returns
    -------
    xarray.Dataset
        :func:`assemble_spectrum`, plus the molecular variables when *parts* has them.
    """
    attrs = dict(attrs)
    for name in _MOLECULAR_ATTRIBUTES:
        attrs.pop(name, None)  # set again by add_molecular_variables for molecular parts
    frames = int(parts.statistics_frames)
    extra = 1 if attrs["velocity_source"] == "finite_difference" else 0
    span = int(parts.segment_first_frame[-1] - parts.segment_first_frame[0]) // int(attrs["frame_step"])
    attrs.update(
        frames_used=span + int(attrs["segment_frames"]) + extra,
        statistics_frames=frames,
        mean_box_volume_A3=float(parts.box_volume_sum_A3 / frames) if frames else 0.0,
        centre_of_mass_mv2_u_A2_per_ps2=float(parts.com_mv2_sum / frames) if frames else 0.0,
        diagnostics="[]",
    )
    ds = assemble_spectrum(
        raw_segments=parts.raw_segments,
        correlation_segments=parts.correlation_segments,
        wavenumber=parts.wavenumber,
        lag_ps=parts.lag_ps,
        table=dict(table),
        segment_index=parts.segment_index,
        segment_first_frame=parts.segment_first_frame,
        attrs=attrs,
        noise=parts.noise,
    )
    if parts.kinetic_samples.size:
        from qcorr.spectra.kinetic_series import kinetic_variables

        timestep = float(attrs["timestep_ps"])
        ds = ds.assign(kinetic_variables(parts.kinetic_samples * timestep, parts.kinetic_u_A2_per_ps2,
                                         parts.momentum_u_A_per_ps))
    return ds if parts.molecular is None else add_molecular_variables(ds, parts.molecular)
