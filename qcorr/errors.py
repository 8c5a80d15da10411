"""Exception and warning families of qcorr.

Every error message is one line that names the file, frame, atom group or
option at fault and says what to do.  The command line prints
``qcorr: error: <message>`` and exits with a non-zero status.
"""


class QcorrError(Exception):
    """Base class of every error qcorr raises on purpose."""

    exit_code = 2


class ConfigError(QcorrError):
    """An option or configuration value is invalid (names the option and the allowed set)."""


class TrajectoryError(QcorrError):
    """A topology or trajectory cannot be used (names the file, frame and atom)."""


class SamplingError(TrajectoryError):
    """Frames are not evenly spaced in time, or too few for one segment."""


class UnitsError(QcorrError):
    """A quantity has units qcorr cannot interpret."""


class SpectrumFileError(QcorrError):
    """A spectrum file was not written by qcorr, or lacks variables/attributes."""


class OutputError(QcorrError):
    """An output cannot be written where asked (names the file, the POSIX error and what to do)."""


class PhysicsError(QcorrError):
    """A requested quantity is not defined for this input (e.g. harmonic entropy of a liquid)."""


class QcorrWarning(UserWarning):
    """qcorr adjusted something or found a diagnostic worth reading."""
