"""The streaming pass of the molecular decomposition, and the centre-of-mass mean-square displacement.

:class:`MolecularPass` feeds every velocity sample through the
:class:`~qcorr.spectra.molecular.MolecularDecomposer` (translation / rotation /
residual-vibration channels) into a second spectrum estimator, and the unwrapped
centres of mass into :class:`CentreOfMassDisplacement`.  Its result,
:class:`~qcorr.spectra.molecular_file.MolecularParts`, adds up across frame blocks.

The self-diffusion coefficient of the molecules is estimated from the mean-square
displacement of the unwrapped centres of mass (Einstein relation, ``MSD = 6 D t`` at
long times; M. P. Allen, D. J. Tildesley, Computer Simulation of Liquids, 2nd ed.,
OUP 2017, §8.7), for comparison with the Green–Kubo value from the translational
DoS at zero frequency.

References
----------
.. [1] S.-T. Lin, P. K. Maiti, W. A. Goddard III, J. Phys. Chem. B 114, 8191
   (2010). doi:10.1021/jp103120q
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from qcorr.spectra.estimator import SegmentAccumulator
from qcorr.spectra.molecular import (
    DEFAULT_LINEAR_RATIO,
    MolecularDecomposer,
    build_layout,
    molecule_ids_from_universe,
)
from qcorr.spectra.molecular_file import MolecularParts, self_diffusion_from_msd
from qcorr.spectra.raw_vdos import raw_spectra

__all__ = [
    "MSD_LAGS",
    "CentreOfMassDisplacement",
    "MolecularPass",
    "msd_lag_stride",
]

#: number of lags of the mean-square displacement (the longest is about one segment)
MSD_LAGS = 32


def msd_lag_stride(max_lag_frames: int, n_lags: int = MSD_LAGS) -> tuple[int, int]:
    """(stride, lag count) of the mean-square displacement for a longest lag of *max_lag_frames*.

    Snapshots are kept every ``stride = max(1, max_lag_frames // n_lags)`` frames and
    lags are ``stride, 2 stride, ..., count stride`` frames with
    ``count = max(2, min(n_lags, max_lag_frames // stride))``; the longest lag,
    ``stride × count`` frames, is what a frame block reads before its first segment.
    """
    stride = max(1, int(max_lag_frames) // int(n_lags))
    return stride, max(2, min(int(n_lags), int(max_lag_frames) // stride))


class CentreOfMassDisplacement:
    """Streaming mean-square displacement of unwrapped centres of mass per group.

    Snapshots are kept every ``stride`` frames (frame indices that are multiples of
    ``stride``) in a ring of ``n_lags``, so memory is n_lags × n_molecules × 3
    floats whatever the trajectory length; lags are ``stride, 2·stride, …,
    n_lags·stride`` frames and every snapshot is a time origin.  A frame-block job
    counts the pairs whose later snapshot lies in its counted frames and feeds up to
    :attr:`longest_lag_frames` frames before them uncounted, so that the blocks'
    sums add up to the single job's.

    Parameters
    ----------
    group_molecules : bool array (n_groups, n_molecules)
    timestep_ps : float
        Frame spacing, ps.
    max_lag_frames : int
        Longest lag, frames (e.g. the segment length of the spectrum).
    n_lags : int
        Number of lags.
    """

    def __init__(self, group_molecules: ArrayLike, timestep_ps: float, max_lag_frames: int,
                 n_lags: int = MSD_LAGS) -> None:
        self.groups = np.asarray(group_molecules, dtype=bool)
        self.stride, self.n_lags = msd_lag_stride(max_lag_frames, n_lags)
        self.timestep_ps = float(timestep_ps)
        self._ring: list[NDArray[np.float64]] = []
        self._sums = np.zeros((self.groups.shape[0], self.n_lags))
        self._counts = np.zeros(self.n_lags)
        self._frame = 0

    @property
    def longest_lag_frames(self) -> int:
        """The longest lag, frames."""
        return self.stride * self.n_lags

    @property
    def origin_counts(self) -> NDArray[np.float64]:
        """Time origins summed at each lag, shape (n_lags,)."""
        return self._counts.copy()

    def add_frame(self, unwrapped_com_A: ArrayLike, frame: int | None = None, counted: bool = True) -> None:
        """Add one frame of unwrapped centres of mass (n_molecules, 3), Å.

        *frame* is the frame's index in the whole frame window (default: frames are
        numbered from 0 in the order given); frames must come consecutively.  With
        *counted* false the frame's snapshot only serves as the earlier member of
        later pairs.
        """
        index = self._frame if frame is None else int(frame)
        self._frame += 1
        if index % self.stride:
            return
        now = np.asarray(unwrapped_com_A, dtype=np.float64).copy()
        if counted:
            for k, old in enumerate(reversed(self._ring)):
                d2 = np.einsum("ni,ni->n", now - old, now - old)
                self._sums[:, k] += self.groups @ d2
                self._counts[k] += 1
        self._ring.append(now)
        if len(self._ring) > self.n_lags:
            self._ring.pop(0)

    def result(self) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        """(lag_ps (n_lags,), msd_A2 (n_groups, n_lags)) averaged over origins and molecules; NaN where unseen."""
        lag = self.stride * self.timestep_ps * np.arange(1, self.n_lags + 1)
        per_group = np.maximum(self.groups.sum(axis=1), 1)[:, None]
        with np.errstate(invalid="ignore", divide="ignore"):
            msd = self._sums / (self._counts[None, :] * per_group)
        return lag, msd

    def self_diffusion_m2_per_s(self) -> NDArray[np.float64]:
        """Einstein D (m²/s) per group, see :func:`qcorr.spectra.molecular_file.self_diffusion_from_msd`."""
        lag, msd = self.result()
        out = self_diffusion_from_msd(lag, msd, self._counts)
        out[~self.groups.any(axis=1)] = np.nan
        return out


class MolecularPass:
    """Everything ``qcorr spectrum --molecular`` adds, fed frame by frame.

    Parameters
    ----------
    universe : MDAnalysis.Universe
        Positioned anywhere; the first frame of the window is read to build the layout.
    channel_indices, masses : arrays (n_channels,)
        Atom indices and masses (u) of the spectrum channels.
    group_members : bool array (n_groups, n_channels)
    settings : qcorr.spectra.segments.SpectrumSettings
    first_frame : int
        Trajectory frame used to detect linear molecules (the window's first frame,
        so that every frame block of a run finds the same layout).
    definition : {"residue", "fragment"}
    first_segment, stop_segment, workers :
        As for :class:`qcorr.spectra.estimator.SegmentAccumulator`.
    first_sample, count_stop : int
        Velocity samples (window frames) ``first_sample .. count_stop-1`` are this
        job's counted frames (moments, mean-square displacement); the spectra take
        every sample from ``first_sample`` on.  Samples before ``first_sample`` (at
        most :attr:`lookback_frames`) only provide earlier snapshots for the
        mean-square displacement.  Default: every sample counts.
    """

    def __init__(self, universe, channel_indices, masses, group_members, settings, *,
                 first_frame: int = 0, definition: str = "residue", first_segment: int = 0,
                 stop_segment: int | None = None, workers: int = 1,
                 linear_ratio: float = DEFAULT_LINEAR_RATIO, first_sample: int = 0,
                 count_stop: int | None = None) -> None:
        self.channel_indices = np.asarray(channel_indices, dtype=np.int64)
        ids = molecule_ids_from_universe(universe, self.channel_indices, definition)
        ts = universe.trajectory[first_frame]
        self.layout = build_layout(masses, ids, group_members,
                                   np.asarray(ts.positions[self.channel_indices], dtype=np.float64),
                                   ts.dimensions, linear_ratio)
        self.definition = definition
        self.first_sample = int(first_sample)
        self.count_stop = None if count_stop is None else int(count_stop)
        self.decomposer = MolecularDecomposer(self.layout)
        self.accumulator = SegmentAccumulator(
            settings, self.decomposer.channel_weights(True), self.decomposer.channel_groups(True), 3,
            workers, first_segment=first_segment, stop_segment=stop_segment)
        self.msd = CentreOfMassDisplacement(self.layout.group_molecules, settings.timestep_ps,
                                            settings.segment_frames)

    @property
    def lookback_frames(self) -> int:
        """Samples a frame block reads before its first segment (the MSD's longest lag)."""
        return self.msd.longest_lag_frames

    def add_frame(self, velocities_A_per_ps, ts, *, sample: int | None = None,
                  finite_difference_timestep_ps: float | None = None):
        """Add one velocity sample with the trajectory's current time step object.

        *sample* is the sample's index in the frame window (default: counted from
        ``first_sample`` in the order given).  For forward-difference velocities
        (x_{j+1} − x_j)/Δt the current frame is j+1; the positions used are the
        midpoint x_{j+1} − v Δt/2.
        """
        if sample is None:
            sample = self.first_sample + self.decomposer.frames
        stop = self.count_stop
        counted = sample >= self.first_sample and (stop is None or sample < stop)
        v = np.asarray(velocities_A_per_ps, dtype=np.float64)
        x = np.asarray(ts.positions[self.channel_indices], dtype=np.float64)
        if finite_difference_timestep_ps is not None:
            x = x - 0.5 * finite_difference_timestep_ps * v
        values = self.decomposer.frame(x, v, ts.dimensions, include_vibration=True, count=counted)
        if sample >= self.first_sample:
            self.accumulator.add_frame(values)
        if stop is None or sample < stop:
            self.msd.add_frame(self.decomposer.unwrapped_com, sample, counted)

    def parts(self, temperature_K: float, constraint_count: ArrayLike, *,
              finite_difference_timestep_ps: float | None = None):
        """The :class:`qcorr.spectra.molecular_file.MolecularParts` of this pass (after the last frame).

        *temperature_K* is the stated temperature (K), *constraint_count* the
        holonomic constraints of each group (used for the vibrational degrees of
        freedom per molecule).
        """
        lay = self.layout
        powers = self.accumulator.result()
        raw = raw_spectra(powers.power, powers.frequency_Hz, temperature_K,
                          finite_difference_timestep_ps=finite_difference_timestep_ps)
        n_groups = lay.group_molecules.shape[0]
        counts = lay.group_molecules.sum(axis=1)
        moments = self.decomposer.mean_moments()
        kinds = np.c_[lay.atom_count, np.round(lay.molecule_mass, 3), lay.rotational_dof]
        kind_count = np.zeros(n_groups, dtype=np.int64)
        mass = np.full(n_groups, np.nan)
        group_moments = np.full((n_groups, 3), np.nan)
        rot_dof = np.full(n_groups, np.nan)
        vib_dof = np.full(n_groups, np.nan)
        constraints = np.asarray(constraint_count, dtype=np.float64)
        for g in range(n_groups):
            sel = lay.group_molecules[g]
            if not sel.any():
                continue
            kind_count[g] = len(np.unique(kinds[sel], axis=0))
            mass[g] = lay.molecule_mass[sel].mean()
            group_moments[g] = moments[sel].mean(axis=0)
            rot_dof[g] = lay.rotational_dof[sel].mean()
            vib_dof[g] = (3 * lay.atom_count[sel].sum() - 3 * sel.sum()
                          - lay.rotational_dof[sel].sum() - constraints[g]) / sel.sum()
        lag, msd = self.msd.result()
        return MolecularParts(
            raw_translation=raw[:n_groups],
            raw_rotation=raw[n_groups:2 * n_groups],
            raw_residual=raw[2 * n_groups:],
            whole_molecule_count=np.where(lay.group_whole & (counts > 0), counts, 0).astype(np.int64),
            molecule_kind_count=kind_count,
            molecule_mass=mass,
            rotational_dof=rot_dof,
            vibrational_dof=vib_dof,
            principal_moments=group_moments,
            moment_frames=self.decomposer.counted_frames,
            msd_lag_ps=lag,
            msd_A2=msd,
            msd_origins=self.msd.origin_counts,
            definition=self.definition,
            translation_correlation=powers.correlation[:n_groups],
        )
