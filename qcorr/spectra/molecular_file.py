"""Molecular variables of a spectrum file, from one pass or from joined frame blocks.

``qcorr spectrum --molecular`` adds translation, rotation and vibration spectra,
principal moments and the centre-of-mass mean-square displacement to the atomic
spectrum file (see :mod:`qcorr.spectra.molecular` for the kinematics).  Everything it adds
is computed here by :func:`add_molecular_variables` from a :class:`MolecularParts`:
raw (unnormalised) per-segment spectra and per-group sums that add up across
frame blocks.  So the single job and ``qcorr combine`` of its frame blocks
(:func:`combine_molecular_parts`) go through the same code and give the same file
up to floating-point rounding:

* raw per-segment spectra are concatenated in segment order and normalised again
  with the joined atomic spectrum's factor ``degrees_of_freedom / raw_integral``;
* principal moments are means over the frames each block counts (the frames from
  its first segment's start up to the next block's), weighted by those counts;
* mean-square displacements are sums over time origins: each block counts the
  pairs of snapshots whose later member lies in its counted frames (it reads up to
  one longest lag of frames before its first segment for the earlier members), and
  the joined curve is the origin-count-weighted mean.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from qcorr import constants as C
from qcorr import units
from qcorr.errors import SpectrumFileError
from qcorr.lazy_modules import lazy

xr = lazy("xarray")  # imported on first use: workers never need it (qcorr.lazy_modules)

__all__ = [
    "MolecularParts",
    "add_molecular_variables",
    "combine_molecular_parts",
    "has_molecular_variables",
    "join_molecular_parts",
    "molecular_parts_of",
    "self_diffusion_from_msd",
]

#: per-group layout items that every frame block of one run has in common
_LAYOUT_VARIABLES = (
    "whole_molecule_count", "molecule_kind_count", "molecule_mass",
    "rotational_dof_per_molecule", "vibrational_dof_per_molecule",
)


@dataclass(frozen=True)
class MolecularParts:
    """What the molecular variables of a spectrum file are made from.

    Attributes
    ----------
    raw_translation, raw_rotation, raw_residual : float arrays (n_groups, n_segments, n_wavenumber)
        Raw per-segment spectra (cm; 2/kT-scaled mass-weighted power per cm⁻¹, not
        yet normalised) of the centre-of-mass velocities, the moment-weighted angular
        velocities and the residual (vibrational) atomic velocities.
    whole_molecule_count : int array (n_groups,)
        Molecules of the group if it consists of whole molecules, else 0.
    molecule_kind_count, molecule_mass, rotational_dof, vibrational_dof : arrays (n_groups,)
        Kinds of molecule, mean molecular mass (u), rotational and vibrational degrees
        of freedom per molecule (NaN for groups without molecules).
    principal_moments : float array (n_groups, 3)
        Mean principal moments of inertia (u Å², ascending in every frame).
    moment_frames : int
        Frames the moments are averaged over.
    msd_lag_ps : float array (n_lags,)
    msd_A2 : float array (n_groups, n_lags)
        Mean-square displacement of the molecules' centres of mass, Å² (NaN where no origin).
    msd_origins : float array (n_lags,)
        Time origins averaged at each lag.
    definition : str
        ``"residue"`` or ``"fragment"``.
    translation_correlation : float array (n_groups, n_segments, n_lags) or None
        Unbiased Σ_molecules M ⟨V(0)·V(t)⟩ of the centre-of-mass velocities of each
        segment (u Å²/ps², lags of the atomic ``lag`` axis): the translational VACF, whose
        Green–Kubo integral gives a diffusion coefficient free of the spectrum's taper
        (:mod:`qcorr.thermo.diffusion`).  None in files made before it was kept.
    """

    raw_translation: NDArray[np.float64]
    raw_rotation: NDArray[np.float64]
    raw_residual: NDArray[np.float64]
    whole_molecule_count: NDArray[np.int64]
    molecule_kind_count: NDArray[np.int64]
    molecule_mass: NDArray[np.float64]
    rotational_dof: NDArray[np.float64]
    vibrational_dof: NDArray[np.float64]
    principal_moments: NDArray[np.float64]
    moment_frames: int
    msd_lag_ps: NDArray[np.float64]
    msd_A2: NDArray[np.float64]
    msd_origins: NDArray[np.float64]
    definition: str
    translation_correlation: NDArray[np.float64] | None = None


def self_diffusion_from_msd(lag_ps: NDArray[np.float64], msd_A2: NDArray[np.float64],
                            origins: NDArray[np.float64]) -> NDArray[np.float64]:
    """Einstein self-diffusion ``D = slope / 6`` (m²/s) per group from an MSD curve.

    Straight-line fit of MSD (Å²) against lag (ps) over the longer 3/4 of the lags
    that have at least one time origin (Allen & Tildesley, Computer Simulation of
    Liquids, 2nd ed. 2017, §8.7).  NaN for a group whose curve is NaN or when fewer
    than two lags qualify.
    """
    lag = np.asarray(lag_ps, dtype=np.float64)
    msd = np.atleast_2d(np.asarray(msd_A2, dtype=np.float64))
    use = (lag >= 0.25 * lag[-1]) & (np.asarray(origins) > 0)
    out = np.full(msd.shape[0], np.nan)
    if use.sum() < 2:
        return out
    for g in range(msd.shape[0]):
        if np.all(np.isfinite(msd[g, use])):
            slope = np.polyfit(lag[use], msd[g, use], 1)[0]  # Å²/ps
            out[g] = slope / 6.0 * C.angstrom_m**2 / C.picosecond_s
    return out


def has_molecular_variables(ds: xr.Dataset) -> bool:
    """True if *ds* holds the molecular variables of ``qcorr spectrum --molecular``."""
    return "vdos_translation" in ds.variables


def add_molecular_variables(ds: xr.Dataset, parts: MolecularParts) -> xr.Dataset:
    """*ds* (atomic spectrum, same groups and segments) with the molecular variables added.

    The translational and rotational spectra get each group's normalisation factor
    ``degrees_of_freedom / raw_integral`` of its atomic spectrum, so that
    ``vdos_vibration = vdos − vdos_translation − vdos_rotation`` is consistent.  Groups
    that are not made of whole molecules get NaN spectra; rigid molecules (no
    vibrational degree of freedom) get vibration spectra of exactly 0, their difference
    integral is kept as a check.
    """
    temperature = float(ds.attrs["temperature_K"])
    factor = (ds["degrees_of_freedom"] / ds["raw_integral"]).values[:, None, None]
    trn_seg = parts.raw_translation * factor
    rot_seg = parts.raw_rotation * factor
    res_seg = parts.raw_residual * factor
    vib_seg = ds["vdos_segments"].values - trn_seg - rot_seg
    wn = ds["wavenumber"].values
    counts = parts.whole_molecule_count
    usable = counts > 0
    residual = np.where(usable, np.trapezoid(vib_seg.mean(axis=1), wn, axis=-1), np.nan)
    rigid = usable & np.isclose(parts.vibrational_dof, 0.0)
    vib_seg[rigid] = 0.0
    res_seg[rigid] = 0.0
    for arr in (trn_seg, rot_seg, vib_seg, res_seg):
        arr[~usable] = np.nan
    raw_trn = np.trapezoid(parts.raw_translation.mean(axis=1), wn, axis=-1)
    raw_rot = np.trapezoid(parts.raw_rotation.mean(axis=1), wn, axis=-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        t_trn = temperature * raw_trn / np.where(usable, 3.0 * counts, np.nan)
        t_rot = temperature * raw_rot / np.where(usable & (parts.rotational_dof > 0),
                                                 parts.rotational_dof * counts, np.nan)
    d_msd = self_diffusion_from_msd(parts.msd_lag_ps, parts.msd_A2, parts.msd_origins)
    d_msd[~usable] = np.nan
    msd = np.where(usable[:, None], parts.msd_A2, np.nan)
    note = (f"molecules = {parts.definition}s; vibration = difference DoS (atoms - translation - "
            "rotation); NaN for groups not made of whole molecules")
    g1, g2, g3 = ("group",), ("group", "wavenumber"), ("group", "segment", "wavenumber")
    cm, one = "cm", "1"

    def var(dims, values, units, long_name, **extra):
        """An xarray variable tuple with its CF ``units`` and ``long_name``."""
        return (dims, values, {"units": units, "long_name": long_name, **extra})

    data = {
        "vdos_translation": var(g2, trn_seg.mean(axis=1), cm, "centre-of-mass (translational) density of states per unit wavenumber; integral = 3 per molecule", comment=note),
        "vdos_rotation": var(g2, rot_seg.mean(axis=1), cm, "rotational density of states (principal-axis angular velocities weighted by the moments); integral = 3 (2 linear) per molecule", comment=note),
        "vdos_vibration": var(g2, vib_seg.mean(axis=1), cm, "intramolecular vibrational density of states (vdos - translation - rotation; zero for rigid molecules)", comment=note),
        "vdos_vibration_residual": var(g2, res_seg.mean(axis=1), cm, "intramolecular vibrational density of states from the residual velocities v - V - w x r (non-negative; same integral as the difference; zero for rigid molecules)", comment=note),
        "vdos_vibration_residual_segments": var(g3, res_seg, cm, "residual-velocity vibrational density of states of each segment"),
        "vdos_translation_segments": var(g3, trn_seg, cm, "translational density of states of each segment"),
        "vdos_rotation_segments": var(g3, rot_seg, cm, "rotational density of states of each segment"),
        "vdos_vibration_segments": var(g3, vib_seg, cm, "vibrational density of states of each segment"),
        "whole_molecule_count": var(g1, parts.whole_molecule_count.astype(np.int64), one, "molecules whose atoms all belong to the group (0: group not made of whole molecules)"),
        "molecule_kind_count": var(g1, parts.molecule_kind_count.astype(np.int64), one, "kinds of molecule (atom count, mass, linearity) in the group"),
        "molecule_mass": var(g1, parts.molecule_mass, units.MOLAR_MASS, "mean mass of one molecule of the group"),
        "principal_moments": var(("group", "principal_axis"), parts.principal_moments, units.MOMENT_OF_INERTIA, "time- and molecule-mean principal moments of inertia, ascending in every frame"),
        "rotational_dof_per_molecule": var(g1, parts.rotational_dof, one, "rotational degrees of freedom per molecule (0 atom, 2 linear, 3 nonlinear)"),
        "vibrational_dof_per_molecule": var(g1, parts.vibrational_dof, one, "3 n_atoms - 3 - rotational dof - constraints, per molecule"),
        "translational_kinetic_temperature": var(g1, t_trn, "K", "sum(M <V^2>)/(3 N_molecules k)"),
        "rotational_kinetic_temperature": var(g1, t_rot, "K", "sum(<w.I.w>)/(rotational dof k)"),
        "vibration_difference_integral": var(g1, residual, one, "integral of vdos - translation - rotation per group (check; ~0 for rigid molecules; NaN: group not made of whole molecules)"),
        "self_diffusion_msd": var(g1, d_msd, units.DIFFUSION, "self-diffusion coefficient of the molecules' centres of mass from the mean-square displacement (Einstein relation, fit over the longer 3/4 of the lags)"),
        "mean_square_displacement": var(("group", "displacement_lag"), msd, units.AREA, "mean-square displacement of the molecules' unwrapped centres of mass (NaN: group not made of whole molecules)"),
        "displacement_origin_count": var(("displacement_lag",), np.asarray(parts.msd_origins, dtype=np.int64), one, "time origins averaged at each lag of mean_square_displacement"),
    }
    if parts.translation_correlation is not None:
        corr = np.where(usable[:, None, None], np.asarray(parts.translation_correlation, dtype=np.float64), np.nan)
        data["vacf_translation_segments_raw"] = var(
            ("group", "segment", "lag"), corr, units.MASS_VELOCITY_SQUARED,
            "unbiased sum over molecules of M <V(0).V(t)> of the centre-of-mass velocities, each segment "
            "(NaN: group not made of whole molecules)")
    out = ds.assign_coords(displacement_lag=(("displacement_lag",), np.asarray(parts.msd_lag_ps, dtype=np.float64), {"units": "ps", "long_name": "time lag of the mean-square displacement"}))
    out = out.assign(data)
    out.attrs["principal_moment_frames"] = int(parts.moment_frames)
    out.attrs["molecular_decomposition"] = f"molecules = {parts.definition}s (qcorr.spectra.molecular)"
    out.attrs["molecule_definition"] = parts.definition
    return out


def _check_same(values: list[np.ndarray], what: str, names: list[str]) -> None:
    for value, name in zip(values[1:], names[1:]):
        if value.shape != values[0].shape or not np.array_equal(
                value, values[0], equal_nan=value.dtype.kind == "f"):
            raise SpectrumFileError(
                f"block '{name}' differs from block '{names[0]}' in {what}; combine only the blocks "
                "of one 'qcorr spectrum --block I-of-N --molecular' set"
            )


def molecular_parts_of(ds: xr.Dataset) -> MolecularParts:
    """The :class:`MolecularParts` a spectrum dataset with molecular variables was made from.

    Raw spectra are the stored ones divided by the dataset's normalisation factor
    ``degrees_of_freedom / raw_integral``; moments and mean-square displacements are the
    stored means with their frame and origin counts.
    """
    factor = (ds["degrees_of_freedom"] / ds["raw_integral"]).values[:, None, None]
    return MolecularParts(
        raw_translation=ds["vdos_translation_segments"].values / factor,
        raw_rotation=ds["vdos_rotation_segments"].values / factor,
        raw_residual=ds["vdos_vibration_residual_segments"].values / factor,
        whole_molecule_count=ds["whole_molecule_count"].values.astype(np.int64),
        molecule_kind_count=ds["molecule_kind_count"].values.astype(np.int64),
        molecule_mass=ds["molecule_mass"].values,
        rotational_dof=ds["rotational_dof_per_molecule"].values,
        vibrational_dof=ds["vibrational_dof_per_molecule"].values,
        principal_moments=ds["principal_moments"].values,
        moment_frames=int(ds.attrs["principal_moment_frames"]),
        msd_lag_ps=ds["displacement_lag"].values,
        msd_A2=ds["mean_square_displacement"].values,
        msd_origins=np.asarray(ds["displacement_origin_count"].values, dtype=float),
        definition=str(ds.attrs["molecule_definition"]),
        translation_correlation=(ds["vacf_translation_segments_raw"].values
                                 if "vacf_translation_segments_raw" in ds.variables else None),
    )


def join_molecular_parts(parts: list[MolecularParts]) -> MolecularParts:
    """Join the molecular parts of consecutive frame blocks (in block order) into one.

    Raw per-segment spectra (and centre-of-mass VACFs, when every block has them) are
    concatenated along ``segment``; principal moments are
    averaged with the blocks' frame counts as weights, mean-square displacements with
    their time-origin counts (lags without origins in a block contribute nothing).  The
    molecule layout (counts, masses, degrees of freedom) is the first block's.
    """
    if len(parts) == 1:
        return parts[0]
    frames = np.array([p.moment_frames for p in parts], dtype=float)
    moments = sum(p.principal_moments * f for p, f in zip(parts, frames)) / frames.sum()
    origins = np.array([p.msd_origins for p in parts], dtype=float)
    sums = sum(np.where(o > 0, p.msd_A2 * o, 0.0) for p, o in zip(parts, origins))
    total = origins.sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        msd = np.where(total > 0, sums / total, np.nan)
    first = parts[0]
    return MolecularParts(
        raw_translation=np.concatenate([p.raw_translation for p in parts], axis=1),
        raw_rotation=np.concatenate([p.raw_rotation for p in parts], axis=1),
        raw_residual=np.concatenate([p.raw_residual for p in parts], axis=1),
        whole_molecule_count=first.whole_molecule_count,
        molecule_kind_count=first.molecule_kind_count,
        molecule_mass=first.molecule_mass,
        rotational_dof=first.rotational_dof,
        vibrational_dof=first.vibrational_dof,
        principal_moments=moments,
        moment_frames=int(frames.sum()),
        msd_lag_ps=first.msd_lag_ps,
        msd_A2=msd,
        msd_origins=total,
        definition=first.definition,
        translation_correlation=(None if any(p.translation_correlation is None for p in parts) else
                                 np.concatenate([p.translation_correlation for p in parts], axis=1)),
    )


def combine_molecular_parts(datasets: list[xr.Dataset], names: list[str]) -> MolecularParts | None:
    """The :class:`MolecularParts` of frame-block files in block order (None without molecular variables).

    Checks that the blocks agree on the molecule layout, then joins
    (:func:`molecular_parts_of`, :func:`join_molecular_parts`).

    Raises
    ------
    SpectrumFileError
        Some blocks have molecular variables and others not, or their molecule
        layouts or lags differ (names the block file).
    """
    present = [has_molecular_variables(ds) for ds in datasets]
    if not any(present):
        return None
    if not all(present):
        name = names[present.index(False)]
        raise SpectrumFileError(
            f"block '{name}' has no molecular spectra but other blocks do; make every block with "
            "the same options (--molecular)"
        )
    for ds, name in zip(datasets, names):
        for item in ("mean_square_displacement", "displacement_origin_count"):
            if item not in ds.variables or "principal_moment_frames" not in ds.attrs \
                    or "molecule_definition" not in ds.attrs:
                raise SpectrumFileError(
                    f"block '{name}' lacks '{item}' (made by an older qcorr); remake the blocks"
                )
    for item in (*_LAYOUT_VARIABLES, "displacement_lag"):
        _check_same([ds[item].values for ds in datasets], f"'{item}'", names)
    _check_same([np.array(ds.attrs.get("molecule_definition", "")) for ds in datasets],
                "'molecule_definition' (--molecules)", names)
    return join_molecular_parts([molecular_parts_of(ds) for ds in datasets])
