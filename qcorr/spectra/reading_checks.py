"""How a spectrum's input was read, and the refusals that follow, for :class:`VibrationalSpectrum`.

:class:`ReadingChecks` gathers, in the order a run needs them:

1. at construction, the rounding step of the positions when velocities come from
   positions (:mod:`qcorr.reading.position_precision`), and the refusal of
   ``molecular=True`` with rounded positions: the rounding noise of the translation,
   rotation and vibration spectra is not modelled (only the atomic spectrum's is);
2. once the frame window is known, the comparison of stored velocities with the
   positions (:mod:`qcorr.reading.velocity_check`) and the noise model with its
   refusals before any frame is streamed (:mod:`qcorr.spectra.position_noise`);
3. per part, the subtraction of the expected noise from the raw spectra and correlations;
4. on the joined parts and the finished spectrum, the refusals of
   :mod:`qcorr.spectra.input_checks` and of the measured noise share.

Nothing here costs anything per frame: the velocity comparison reads
:data:`qcorr.reading.velocity_check.CHECK_FRAMES` frames once, the noise is subtracted
once per segment.
"""

from __future__ import annotations

import math

import numpy as np

from qcorr.errors import ConfigError
from qcorr.reading.position_precision import PositionPrecision, position_precision
from qcorr.reading.velocity_check import VelocityCheck, check_velocities_against_positions
from qcorr.spectra.input_checks import refuse_motionless, refuse_temperature_mismatch
from qcorr.spectra.position_noise import PositionNoise, check_measured_shares, measured_shares

__all__ = ["ReadingChecks"]


class ReadingChecks:
    """Checks of one :class:`~qcorr.spectra.analysis.VibrationalSpectrum` (see the module docstring).

    Parameters
    ----------
    opened : qcorr.reading.universe.OpenedTrajectory
    channels : qcorr.reading.masses.MassCheck
    groups : list of qcorr.reading.groups.GroupInfo
    temperature_K : float
    velocities_from : {"stored", "positions"}
    position_precision_A : float, optional
        Stated rounding step of the positions, Å.
    molecular : bool
    allow_temperature_mismatch : bool

    Raises
    ------
    ConfigError
        ``molecular`` with rounded positions; a bad or disagreeing rounding step.
    """

    def __init__(self, opened, channels, groups, *, temperature_K: float, velocities_from: str,
                 position_precision_A: float | None, molecular: bool, allow_temperature_mismatch: bool) -> None:
        self.opened, self.channels, self.groups = opened, channels, groups
        self.temperature_K = float(temperature_K)
        self.positions = velocities_from == "positions"
        self.allow_temperature_mismatch = bool(allow_temperature_mismatch)
        self.precision: PositionPrecision | None = None
        if self.positions:
            self.precision = position_precision(opened, position_precision_A)
            if molecular and self.precision.step_A > 0:
                raise ConfigError(
                    f"--molecular with positions of {opened.label} rounded to {self.precision.step_A:g} Å "
                    f"({self.precision.source}): the rounding noise of the translation, rotation and "
                    "vibration spectra is not modelled; use a trajectory with velocities, or leave out --molecular"
                )
        self.velocity_check: VelocityCheck | None = None
        self.noise: PositionNoise | None = None

    @property
    def names(self) -> list[str]:
        return [g.name for g in self.groups]

    def plan(self, plan) -> None:
        """Compare stored velocities with positions and set up the noise model for *plan*'s window.

        Raises
        ------
        TrajectoryError
            Velocities that disagree with the positions, all-zero or unchanging velocities
            (when used), or predicted rounding noise that swamps the motion.
        """
        self.velocity_check = check_velocities_against_positions(
            self.opened, self.channels, plan.window, velocities_used=not self.positions)
        if self.positions:
            members = np.array([g.members for g in self.groups], dtype=bool)
            dof = np.array([g.degrees_of_freedom for g in self.groups], dtype=float)
            self.noise = PositionNoise(self.precision.step_A, self.channels.masses, members, dof,
                                       plan.settings, self.temperature_K)
            self.noise.check(self.names, self.opened.label)

    def subtract(self, raw: np.ndarray, correlation: np.ndarray, frequency_Hz: np.ndarray):
        """(raw, correlation, NoiseParts or None) with the expected noise of positions removed."""
        if self.noise is None:
            return raw, correlation, None
        parts = self.noise.parts(frequency_Hz)
        raw = raw - parts.floor[:, None, :]
        correlation = correlation - self.noise.autocovariance(correlation.shape[-1])[:, None, :]
        return raw, correlation, parts

    def before_assembly(self, parts) -> None:
        """Refuse motionless groups and measured noise that swamps the motion (joined parts).

        Raises
        ------
        TrajectoryError
        """
        wavenumber = parts.wavenumber
        raw = np.trapezoid(parts.raw_segments, wavenumber, axis=-1).mean(axis=1)
        floor = (np.zeros_like(raw) if parts.noise is None
                 else np.trapezoid(parts.noise.floor, wavenumber, axis=-1))
        moving = [g.degrees_of_freedom > 0 for g in self.groups]
        names = [n for n, m in zip(self.names, moving) if m]
        refuse_motionless((raw + floor)[moving], names, self.opened.label)
        if parts.noise is not None and parts.noise.step_A > 0:
            check_measured_shares(names, measured_shares(raw, floor)[moving], parts.noise.step_A,
                                  self.noise.settings.timestep_ps, self.opened.label)

    def after_assembly(self, ds) -> None:
        """Refuse a gross kinetic-temperature mismatch (unless allowed)."""
        refuse_temperature_mismatch(ds, self.opened.label, self.allow_temperature_mismatch)

    def attributes(self) -> dict[str, object]:
        """Keywords of :func:`qcorr.spectra.assemble.spectrum_attributes` describing the reading."""
        check = self.velocity_check
        return {
            "time_axis": self.opened.time_axis_note,
            "velocity_check": check.note if check is not None else "not made",
            "velocity_position_ratio": check.ratio if check is not None else math.nan,
            "position_precision_A": self.precision.step_A if self.precision else 0.0,
            "position_precision_source": self.precision.source if self.precision else "",
            "repeated_frames_dropped": list(self.opened.dropped_records),
            "temperature_mismatch_allowed": self.allow_temperature_mismatch,
        }

