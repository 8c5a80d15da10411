"""What two-phase thermodynamics (2PT) reads of each atom group of a spectrum Dataset.

A group can be evaluated by 2PT when it holds whole molecules of one kind: its
translational, rotational and vibrational spectra come from the molecular
decomposition of ``qcorr spectrum --molecular`` (``DEVELOPERS.md``, "The spectrum
file"), or, for one-atom molecules (argon), the atomic spectrum is the translational
one.  :func:`group_input` collects those arrays in a :class:`GroupInput`, or says why
the group cannot be used; :func:`segments_rescaled` gives the per-segment spectra the
normalisation of the averaged spectrum, for the standard errors.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np
import xarray as xr

from qcorr.errors import SpectrumFileError

#: variables of 'qcorr spectrum --molecular' that 2PT reads
NEEDED_MOLECULAR_VARIABLES = (
    "vdos_translation", "vdos_rotation", "vdos_vibration", "vdos_translation_segments",
    "vdos_rotation_segments", "vdos_vibration_segments", "whole_molecule_count",
    "molecule_kind_count", "molecule_mass", "principal_moments", "rotational_dof_per_molecule",
    "vibrational_dof_per_molecule", "self_diffusion_msd",
)

#: spectra of the intramolecular vibration: residual velocities or the difference spectrum
VIBRATION_SPECTRA = ("residual", "difference")


@dataclass
class GroupInput:
    """What 2PT needs of one group, read from the spectrum Dataset.

    Attributes
    ----------
    name : str
        Group name.
    molecule_count : float
        Molecules N in the group.
    mass_u : float
        Mass of one molecule, u (g/mol).
    parts : dict of str to ndarray
        ``translation`` and, if present, ``rotation`` and ``vibration`` spectra of all N
        molecules, cm (per cm^-1 of the spectrum's wavenumber grid).
    part_segments : dict of str to ndarray
        The same per segment, shape (segment, wavenumber), cm.
    principal_moments : ndarray or None
        Mean principal moments of inertia, u Å² (None without rotation).
    msd_diffusion_m2_per_s : float
        Self-diffusion coefficient from the mean-square displacement, m²/s (NaN if absent).
    source : str
        Where the spectra come from (molecular decomposition or atomic spectrum).
    rotational_dof : int or None
        Rotational degrees of freedom per molecule (2 linear, 3 nonlinear; None: none).
    """

    name: str
    molecule_count: float
    mass_u: float
    parts: dict[str, np.ndarray]
    part_segments: dict[str, np.ndarray]
    principal_moments: np.ndarray | None
    msd_diffusion_m2_per_s: float
    source: str
    rotational_dof: int | None = None


def check_molecular_variables(ds: xr.Dataset, source: str) -> None:
    """A Dataset with molecular spectra must hold all of them.

    Raises
    ------
    SpectrumFileError
        Naming *source* and the missing variable.
    """
    if "vdos_translation" not in ds.variables:
        return
    for name in NEEDED_MOLECULAR_VARIABLES:
        if name not in ds.variables:
            raise SpectrumFileError(
                f"spectrum file '{source}' has molecular spectra but lacks '{name}'; remake it with "
                "'qcorr spectrum --molecular'"
            )


def group_input(
    ds: xr.Dataset, g: int, name: str, source: str, vibration: str = "residual"
) -> GroupInput | str:
    """The 2PT input of group number *g* (called *name*), or a string saying why it cannot be used.

    Parameters
    ----------
    ds : xarray.Dataset
        Spectrum Dataset (checked by :func:`check_molecular_variables`).
    g : int
        Index of the group along ``group``.
    name : str
        Its name.
    source : str
        The Dataset's name, for messages.
    vibration : {"residual", "difference"}
        Vibration spectrum: of the residual velocities v - V - ω × r
        (``vdos_vibration_residual``) or the difference spectrum (``vdos_vibration``).

    Raises
    ------
    SpectrumFileError
        If the residual vibration spectrum is asked for but absent.
    """
    if "vdos_translation" in ds.variables:
        count = int(ds["whole_molecule_count"].values[g])
        if count == 0:
            return "not made of whole molecules"
        if int(ds["molecule_kind_count"].values[g]) != 1:
            return "holds more than one kind of molecule (mixtures are not supported)"
        parts = {"translation": ds["vdos_translation"].values[g]}
        segs = {"translation": ds["vdos_translation_segments"].values[g]}
        rot_dof = float(ds["rotational_dof_per_molecule"].values[g])
        if rot_dof > 0:
            parts["rotation"] = ds["vdos_rotation"].values[g]
            segs["rotation"] = ds["vdos_rotation_segments"].values[g]
        if float(ds["vibrational_dof_per_molecule"].values[g]) > 0:
            name_vib = "vdos_vibration_residual" if vibration == "residual" else "vdos_vibration"
            if name_vib not in ds.variables:
                raise SpectrumFileError(
                    f"spectrum file '{source}' has no '{name_vib}'; remake it with this qcorr's "
                    "'qcorr spectrum --molecular' or pass --vibration-spectrum difference"
                )
            parts["vibration"] = ds[name_vib].values[g]
            segs["vibration"] = ds[name_vib + "_segments"].values[g]
        return GroupInput(
            name, count, float(ds["molecule_mass"].values[g]), parts, segs,
            ds["principal_moments"].values[g] if rot_dof > 0 else None,
            float(ds["self_diffusion_msd"].values[g]), "molecular decomposition",
            round(rot_dof) if rot_dof > 0 else None,
        )
    atoms = int(ds["atom_count"].values[g])
    molecules = int(ds["molecule_count"].values[g])
    if atoms != molecules:
        return ("has molecules of several atoms but the spectrum file has no molecular "
                "decomposition; remake it with 'qcorr spectrum --molecular'")
    mass = float(ds["group_mass"].values[g]) / atoms
    return GroupInput(
        name, molecules, mass, {"translation": ds["vdos"].values[g]},
        {"translation": ds["vdos_segments"].values[g]}, None, float("nan"),
        "atomic spectrum (one-atom molecules)",
    )


def segments_rescaled(gin: GroupInput, wavenumber_cm: np.ndarray) -> GroupInput:
    """Rescale each segment's component spectra by one common factor so that, summed over
    the components, the segment integrates to the same total as the averaged spectrum.

    The averaged spectrum is normalised to the degrees of freedom as a whole (a ratio of
    power to total power); evaluating 2PT on segments scaled the same way makes their
    scatter include the fluctuation of that normalisation (delta-method variance of a
    ratio estimator), as :func:`qcorr.thermo.segment_statistics.normalised_segments` does
    for the harmonic table.  The component split inside a segment is left as measured.

    Parameters
    ----------
    gin : GroupInput
        The group's spectra (cm).
    wavenumber_cm : ndarray
        The wavenumber grid, cm^-1.
    """
    names = list(gin.part_segments)
    target = sum(float(np.trapezoid(gin.parts[c], wavenumber_cm)) for c in names)
    totals = sum(np.trapezoid(np.asarray(gin.part_segments[c], dtype=float), wavenumber_cm, axis=-1)
                 for c in names)
    factor = np.where(totals > 0, target / np.where(totals > 0, totals, 1.0), 1.0)
    scaled = {c: np.asarray(gin.part_segments[c], dtype=float) * factor[:, None] for c in names}
    return dataclasses.replace(gin, part_segments=scaled)


def diffusion_temperature(ds: xr.Dataset, g: int, temperature_K: float) -> float:
    """Temperature (K) that converts between S(0) and the self-diffusion coefficient of group *g*.

    The spectrum is normalised to the degrees of freedom, i.e. with the group's kinetic
    temperature, so the Green–Kubo conversion uses that temperature; the stated
    *temperature_K* if the kinetic one is not a positive number.
    """
    t_kin = float(ds["kinetic_temperature"].values[g])
    return t_kin if math.isfinite(t_kin) and t_kin > 0 else temperature_K
