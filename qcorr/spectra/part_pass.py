"""One part of a spectrum run: its frames through the atomic and molecular estimators.

:class:`PartPass` wires the estimators of one part of a
:class:`~qcorr.spectra.analysis.VibrationalSpectrum` run (a frame block of whole segments,
:func:`qcorr.spectra.segments.split_block`): the velocity sampler (stored velocities or
differences of positions, :mod:`qcorr.reading.stream`), the segment-averaged Welch
accumulator (:mod:`qcorr.spectra.estimator`) and, for liquids, the molecular pass
(:mod:`qcorr.spectra.molecular_pass`).  :meth:`PartPass.finish` turns the part into its
:class:`~qcorr.spectra.assemble.SpectrumParts` (raw per-segment spectra, VACF, running
sums, per-frame kinetic energy and momentum), which the analysis joins across parts.
"""

from __future__ import annotations

import numpy as np

from qcorr.constants import speed_of_light_cm_per_s
from qcorr.reading.stream import FrameStatistics, VelocitySampler
from qcorr.reading.velocity_blocks import StoredVelocityBlocks
from qcorr.spectra.assemble import SpectrumParts
from qcorr.spectra.estimator import SegmentAccumulator
from qcorr.spectra.molecular_pass import MolecularPass
from qcorr.spectra.raw_vdos import raw_spectra

__all__ = ["PartPass"]


class PartPass:
    """Estimators and running sums of one part of a run.

    Parameters
    ----------
    opened : qcorr.reading.universe.OpenedTrajectory
    channels : massive atoms (indices, masses) analysed
    groups : list of the analysis' groups (``members``, ``constraints``)
    universe : MDAnalysis.Universe (molecules of the molecular pass)
    plan : qcorr.spectra.run_plan.RunPlan
    part : one of ``plan.parts``
    velocities_from : "stored" or "positions"
    molecular : bool
    molecules : "residue" or "fragment"
    fft_threads : int
    temperature_K : float
    checks : qcorr.spectra.reading_checks.ReadingChecks (rounding-noise subtraction)
    """

    def __init__(self, opened, channels, groups, universe, plan, part, *, velocities_from: str,
                 molecular: bool, molecules: str, fft_threads: int, temperature_K: float, checks) -> None:
        self.part, self.plan = part, plan
        self._groups = groups
        self._temperature = float(temperature_K)
        self._checks = checks
        self._fd_timestep = plan.window.timestep_ps if velocities_from == "positions" else None
        members = np.array([g.members for g in groups], dtype=bool)
        self.statistics = FrameStatistics()
        # stored velocities stay in the reader's single precision through the atomic estimator
        # (complex64 transforms, float64 sums; see SegmentAccumulator); the molecular pass
        # and finite differences work in float64
        # atomic spectra of stored velocities: a block of frames per numpy call (same values);
        # differences of positions and the molecular pass: frame by frame
        self._blocks = self._sampler = None
        if velocities_from == "stored" and not molecular:
            self._blocks = StoredVelocityBlocks(
                opened, channels, plan.window, statistics=self.statistics,
                count_from=part.first_sample, count_stop=part.count_stop)
        else:
            self._sampler = VelocitySampler(
                opened, channels, plan.window, source=velocities_from,
                dtype=np.float64 if molecular else np.float32, statistics=self.statistics,
                count_from=part.first_sample, count_stop=part.count_stop)
        self._accumulator = SegmentAccumulator(
            plan.settings, channels.masses, members, 3, fft_threads,
            first_segment=part.first_segment, stop_segment=part.stop_segment)
        self._molecular = None
        if molecular:
            self._molecular = MolecularPass(
                universe, channels.indices, channels.masses, members, plan.settings,
                first_frame=plan.window.start, definition=molecules,
                first_segment=part.first_segment, stop_segment=part.stop_segment,
                workers=fft_threads, first_sample=part.first_sample, count_stop=part.count_stop)

    def add(self, ts, read_index: int) -> None:
        """One frame (*read_index*: its position in the window): its velocity sample goes to the
        atomic and molecular estimators."""
        if self._blocks is not None:
            self._feed(self._blocks.add(ts, read_index))
            return
        velocities = self._sampler.add(ts, read_index)
        if velocities is None:  # first frame of a run of differences
            return
        sample = self._sampler.sample
        if sample >= self.part.first_sample:
            self._accumulator.add_frame(velocities)
        if self._molecular is not None:
            self._molecular.add_frame(velocities, ts, sample=sample,
                                      finite_difference_timestep_ps=self._fd_timestep)

    def _feed(self, done) -> None:
        """A completed block of samples (``(first_sample, block)`` or None) to the accumulator."""
        if done is None:
            return
        first, block = done
        skip = max(self.part.first_sample - first, 0)  # samples before the part's first are read only
        if skip < len(block):
            self._accumulator.add_frames(block[skip:])

    def finish(self) -> SpectrumParts:
        """The part's :class:`SpectrumParts`; the estimators are released."""
        if self._blocks is not None:
            self._feed(self._blocks.flush())
        part, plan, fd = self.part, self.plan, self._fd_timestep
        powers = self._accumulator.result()
        molecular = None
        if self._molecular is not None:
            molecular = self._molecular.parts(self._temperature, [g.constraints for g in self._groups],
                                              finite_difference_timestep_ps=fd)
        stats = self.statistics
        raw, correlation, noise = self._checks.subtract(
            raw_spectra(powers.power, powers.frequency_Hz, self._temperature, finite_difference_timestep_ps=fd),
            powers.correlation, powers.frequency_Hz)
        self._sampler = self._blocks = self._accumulator = self._molecular = None
        return SpectrumParts(
            raw_segments=raw,
            correlation_segments=correlation,
            segment_index=np.arange(part.first_segment, part.stop_segment, dtype=np.int64),
            segment_first_frame=plan.window.start + powers.segment_first_frame * plan.window.step,
            wavenumber=powers.frequency_Hz / speed_of_light_cm_per_s,
            lag_ps=powers.lag_ps,
            statistics_frames=stats.frames,
            box_volume_sum_A3=stats.box_volume_sum_A3,
            com_mv2_sum=stats.com_kinetic_sum,
            molecular=molecular,
            kinetic_samples=np.asarray(stats.samples, dtype=np.int64),
            kinetic_u_A2_per_ps2=np.asarray(stats.kinetic, dtype=float),
            momentum_u_A_per_ps=np.asarray(stats.momentum, dtype=float).reshape(-1, 3),
            noise=noise,
        )
