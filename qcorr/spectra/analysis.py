"""The vibrational spectrum of an MD trajectory as an MDAnalysis analysis class.

:class:`VibrationalSpectrum` computes what ``qcorr spectrum`` writes: for every named
atom group the mass-weighted velocity spectrum (vibrational density of states, VDOS,
normalised to the group's degrees of freedom), the normalised velocity autocorrelation
function (VACF), and with ``molecular=True`` the translation / rotation / vibration
decomposition the two-phase (2PT) model needs (Lin, Blanco, Goddard 2003 [1]_; Lin,
Maiti, Goddard 2010 [2]_).  Frames are streamed; memory is bounded by one segment,
not by the trajectory length.

Example
-------
::

    import MDAnalysis as mda
    from qcorr.spectra.analysis import VibrationalSpectrum

    u = mda.Universe("topol.tpr", "traj.trr")
    spectrum = VibrationalSpectrum(u, temperature=300.0, groups={"water": "resname SOL"},
                                   segment_ps=5.0)
    spectrum.run(backend="multiprocessing", n_workers=4)
    spectrum.results.spectrum["vdos"].sel(group="water")   # xarray, per cm-1
    spectrum.save("water.nc")                               # the spectrum file

Parallel runs use MDAnalysis' split-apply-combine machinery
(:meth:`MDAnalysis.analysis.base.AnalysisBase.run`) with computation groups aligned to
segments: each part is a frame block (:func:`qcorr.spectra.segments.split_block`), a
contiguous run of whole segments plus the frames those segments need (segments that
straddle the split are read by both neighbours as far as needed; differences of
positions read one frame more; ``molecular=True`` reads the look-back frames of the
mean-square displacement).  The parts' :class:`~qcorr.spectra.assemble.SpectrumParts`
are joined by :func:`qcorr.spectra.blocks.join_spectrum_parts` and the spectrum is built
once in ``_conclude``, so every backend gives the serial result up to rounding.

References
----------
.. [1] S.-T. Lin, M. Blanco, W. A. Goddard III, J. Chem. Phys. 119, 11792 (2003),
   doi:10.1063/1.1624057.
.. [2] S.-T. Lin, P. K. Maiti, W. A. Goddard III, J. Phys. Chem. B 114, 8191 (2010),
   doi:10.1021/jp103120q.
.. [3] P. D. Welch, IEEE Trans. Audio Electroacoust. 15, 70 (1967),
   doi:10.1109/TAU.1967.1161901.
"""

from __future__ import annotations

import os
import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from MDAnalysis.analysis.backends import BackendBase, BackendSerial
from MDAnalysis.analysis.base import AnalysisBase
from MDAnalysis.analysis.results import Results, ResultsGroup

from qcorr.errors import ConfigError, QcorrWarning
from qcorr.reading.groups import assign_degrees_of_freedom, select_groups
from qcorr.reading.input_files import name_and_size, start_describing_files
from qcorr.reading.masses import masses_with_overrides, massive_atoms
from qcorr.reading.stream import window_frames
from qcorr.reading.time_axis import evenly_spaced_frames
from qcorr.reading.universe import wrap_universe
from qcorr.spectra.assemble import (
    group_table,
    spectrum_attributes,
    spectrum_from_parts,
)
from qcorr.spectra.backends import BACKENDS, requested_workers, resolve_backend
from qcorr.spectra.blocks import join_spectrum_parts
from qcorr.spectra.diagnostics import announce, diagnose
from qcorr.spectra.part_pass import PartPass
from qcorr.spectra.reading_checks import ReadingChecks
from qcorr.spectra.run_plan import RunPlan, check_settings, plan_run
from qcorr.spectra.spectrum_file import write_spectrum
from qcorr.spectra.stated_temperature import check_stated_temperature

__all__ = ["VibrationalSpectrum", "check_settings"]


def _import_xarray() -> None:
    """Import xarray (for the dataset built next) while worker processes finish their parts."""
    import xarray  # noqa: F401


@dataclass
class _PartResult:
    """What one part sends back to the calling process (not the analysis object and its Universe)."""

    frames: np.ndarray
    times: np.ndarray
    results: Results


class VibrationalSpectrum(AnalysisBase):
    """Vibrational density of states and velocity autocorrelation of named atom groups.

    The mass-weighted velocity spectrum of every group is estimated by Welch's method
    [3]_ (segments of ``segment_ps``, ``overlap``, ``taper``) and normalised so that its
    integral over wavenumber equals the group's degrees of freedom (3N − constraints −
    centre-of-mass share) [1]_.  The centre-of-mass velocity of all analysed atoms is
    removed every frame.

    Parameters
    ----------
    atoms : MDAnalysis.Universe or MDAnalysis.AtomGroup
        The atoms analysed; the group ``total`` is every atom among them with mass.
        The trajectory must hold velocities (Å/ps after MDAnalysis' conversion) unless
        ``velocities_from="positions"``.
    temperature : float
        Temperature of the simulation, K (used in 2/kT and the kinetic-temperature check).
    groups : mapping of str to (str or AtomGroup), optional
        Named groups: an MDAnalysis selection string (evaluated among *atoms*) or an
        AtomGroup of the same Universe.  Names hold letters, digits and ``_ . + -``;
        ``total`` is reserved.  Massless virtual sites are left out of every group.
    constraints : mapping of str to float, optional
        Holonomic constraints per group (count).  For ``total`` the sum over disjoint
        groups is used when not given.
    constraints_per_molecule : mapping of str to float, optional
        Constraints per residue of a group (e.g. 3 for rigid water).
    masses_by_type : mapping of str to float, optional
        Mass in u (g/mol) of every atom of an atom type, replacing the topology's.
        The Universe is not changed.
    exclude_massless : bool
        Exclude every zero-mass atom; otherwise only zero-mass atoms named like virtual
        sites (M, MW, EPW, LP, VS, DUM...) are excluded and other zero masses are an error.
    velocities_from : {"stored", "positions"}
        ``"positions"``: forward differences of positions (minimum image per step), the
        spectrum divided by the difference's power transfer sinc²(πνΔt), and the expected
        rounding noise of the stored positions subtracted
        (:mod:`qcorr.spectra.position_noise`; ``molecular=True`` is refused with rounded
        positions).
    position_precision : float, optional
        Rounding step of the stored positions, Å, for ``velocities_from="positions"``;
        read from XTC files (and must then agree), detected when the positions lie on a
        common grid, else taken as 0 (unrounded) unless given
        (:mod:`qcorr.reading.position_precision`).
    frame_spacing_ps : float, optional
        Time between consecutive frames of the trajectory, ps: required for formats
        without per-frame time stamps (DCD, XYZ, ...); elsewhere it must agree with the
        stamps (:mod:`qcorr.reading.time_source`).
    allow_temperature_mismatch : bool
        Compute even when a group's kinetic temperature differs from *temperature* by
        more than a factor 2 (:mod:`qcorr.spectra.input_checks`).
    segment_ps : float
        Segment length, ps (rounded to an even number of frames); the resolution is
        1/segment length.
    overlap : float
        Fraction of a segment shared by consecutive segments, 0 <= overlap < 1.
    taper : {"hann", "none"}
        Taper of each segment before the transform (periodic Hann window).
    molecular : bool
        Add translation / rotation / vibration spectra of groups of whole molecules,
        principal moments and the centre-of-mass mean-square displacement (2PT input) [2]_.
    molecules : {"residue", "fragment"}
        With *molecular*: a molecule is a residue, or a bonded fragment.
    lammps_units : {"real", "metal"}, optional
        LAMMPS unit style of a LAMMPS dump trajectory (required for dumps: MDAnalysis
        does not convert their times and velocities).
    block : tuple of int
        ``(I, N)``: compute only frame block I (1-based) of N; the N block files are
        joined by ``qcorr combine`` (:func:`qcorr.spectra.blocks.combine_blocks`).
    fft_threads : int
        FFT threads per process (:func:`scipy.fft.rfft` ``workers``).
    input_files : sequence of path, optional
        Files recorded (and hashed) as the input; default the Universe's topology and
        trajectory files.
    hash_inputs : bool
        Record the SHA-256 of the input files (computed beside the frame loop; a frame
        block hashes its 1/N byte range of each file).  False: name and size only.
    reader_options : mapping, optional
        Keywords the Universe was opened with, recorded in the file.
    command_line : str, optional
        Recorded as ``command_line``; default a description of this call.
    progress : {"never", "auto", "always"}
        Progress bar on stderr in serial runs ("auto": only on a terminal).
    verbose : bool
        As for :class:`~MDAnalysis.analysis.base.AnalysisBase` (True: progress bar).

    Attributes
    ----------
    results.spectrum : xarray.Dataset
        After :meth:`run`: the spectrum-file dataset (``DEVELOPERS.md``, "The spectrum
        file"): ``vdos`` (group, wavenumber; cm), ``vacf``, per-segment spectra,
        degrees of freedom, kinetic temperatures, provenance attributes.
    results.diagnostics : list of qcorr.spectra.diagnostics.Diagnostic
        Aliasing, resolution, temperature, centre-of-mass drift and sum-rule checks
        (warnings are also emitted as :class:`~qcorr.errors.QcorrWarning`).
    frames, times : ndarray
        Trajectory frames read and their times (ps).

    Raises
    ------
    ConfigError, TrajectoryError
        One-line messages naming the option (by its ``qcorr spectrum`` spelling: ``--group``
        for *groups*, ``--mass`` for *masses_by_type*, ``--constraints``, ``--block``, ...),
        the group, the atom or the file at fault.
    """

    _analysis_algorithm_is_parallelizable = True

    @classmethod
    def get_supported_backends(cls) -> tuple[str, ...]:
        """Backends :meth:`run` accepts by name: "serial", "multiprocessing", "dask"."""
        return BACKENDS

    def __init__(
        self,
        atoms,
        temperature: float,
        *,
        groups: Mapping[str, object] | None = None,
        constraints: Mapping[str, float] | None = None,
        constraints_per_molecule: Mapping[str, float] | None = None,
        masses_by_type: Mapping[str, float] | None = None,
        exclude_massless: bool = False,
        velocities_from: str = "stored",
        segment_ps: float = 5.0,
        overlap: float = 0.5,
        taper: str = "hann",
        molecular: bool = False,
        molecules: str = "residue",
        lammps_units: str | None = None,
        position_precision: float | None = None,
        frame_spacing_ps: float | None = None,
        allow_temperature_mismatch: bool = False,
        block: tuple[int, int] = (1, 1),
        fft_threads: int = 1,
        input_files: Sequence[str | os.PathLike[str]] | None = None,
        hash_inputs: bool = True,
        reader_options: Mapping[str, object] | None = None,
        command_line: str | None = None,
        progress: str = "never",
        verbose: bool = False,
    ) -> None:
        from MDAnalysis.core.groups import AtomGroup
        from MDAnalysis.core.universe import Universe

        check_settings(temperature=temperature, segment_ps=segment_ps, overlap=overlap, taper=taper,
                       velocities_from=velocities_from, molecules=molecules, block=block,
                       fft_threads=fft_threads, position_precision=position_precision,
                       frame_spacing_ps=frame_spacing_ps)
        if progress not in ("never", "auto", "always"):
            raise ConfigError(f"--progress {progress!r}: choose auto, always or never")
        if isinstance(atoms, Universe):
            atoms = atoms.atoms
        if not isinstance(atoms, AtomGroup) or atoms.n_atoms == 0:
            raise ConfigError("atoms: give an MDAnalysis Universe or a non-empty AtomGroup")
        super().__init__(atoms.universe.trajectory, verbose=verbose)
        self._atoms = atoms
        self._opened = wrap_universe(atoms.universe, lammps_units=lammps_units, files=input_files,
                                     frame_spacing_ps=frame_spacing_ps)
        topology = getattr(atoms.universe, "filename", None)
        topology_name = f"topology '{topology}'" if topology else "the topology"
        masses = masses_with_overrides(atoms, masses_by_type) if masses_by_type else None
        self._channels = massive_atoms(atoms, masses=masses, exclude_massless=exclude_massless,
                                       topology_name=topology_name)
        if self._channels.note:
            warnings.warn(self._channels.note, QcorrWarning, stacklevel=2)
        self._groups = select_groups(atoms, self._channels, dict(groups or {}))
        assign_degrees_of_freedom(self._groups, constraints, constraints_per_molecule)
        self._checks = ReadingChecks(
            self._opened, self._channels, self._groups, temperature_K=temperature,
            velocities_from=velocities_from, position_precision_A=position_precision, molecular=molecular,
            allow_temperature_mismatch=allow_temperature_mismatch)
        self._temperature = float(temperature)
        self._segment_ps = float(segment_ps)
        self._overlap = float(overlap)
        self._taper = taper
        self._velocities_from = velocities_from
        self._molecular = bool(molecular)
        self._molecules = molecules
        self._block = (int(block[0]), int(block[1]))
        self._fft_threads = int(fft_threads)
        self._hash_inputs = bool(hash_inputs)
        self._reader_options = dict(reader_options or {})
        self._masses_by_type = dict(masses_by_type or {})
        self._command_line = command_line
        self._progress = progress
        self._hashing = None
        self._plan: RunPlan | None = None

    # ------------------------------------------------------------------ description
    @property
    def group_names(self) -> list[str]:
        """Names of the groups, ``total`` first."""
        return [g.name for g in self._groups]

    @property
    def atom_count(self) -> int:
        """Atoms analysed that carry mass (virtual sites excluded)."""
        return len(self._channels.indices)

    def __getstate__(self) -> dict:
        """Pickled state for worker processes: everything but the input-hashing thread."""
        state = self.__dict__.copy()
        state["_hashing"] = None
        return state

    # ------------------------------------------------------------------ running
    def run(self, start: int | None = None, stop: int | None = None, step: int | None = None,
            frames=None, verbose: bool | None = None, n_workers: int | None = None,
            n_parts: int | None = None, backend: str | BackendBase | None = None, *,
            unsupported_backend: bool = False, progressbar_kwargs: dict | None = None) -> VibrationalSpectrum:
        """Compute the spectrum over a frame window.

        Parameters
        ----------
        start, stop, step : int, optional
            Frame window (trajectory frame indices; *stop* exclusive).  The time step is
            taken from the frames' time stamps and must be uniform.
        frames : array_like of int or bool, optional
            Instead of *start*/*stop*/*step*: an ascending, evenly spaced selection of
            frames (or a boolean mask).
        verbose : bool, optional
            Progress bar (serial runs only).
        n_workers : int, optional
            Processes (or dask workers) computing parts; default 1, or the backend's.
        n_parts : int, optional
            Parts (frame blocks of whole segments) the window is cut into; default
            *n_workers*.  Lowered to the number of segments of the window (or block).
        backend : {"serial", "multiprocessing", "dask"} or BackendBase, optional
            "multiprocessing": :class:`qcorr.spectra.backends.ProcessBackend` (workers from
            a forkserver, the calling process computes parts too); "dask":
            :class:`qcorr.spectra.backends.DaskBackend` (the current ``distributed``
            client if there is one, else dask's local processes); or a backend instance.
        unsupported_backend : bool
            As for :meth:`MDAnalysis.analysis.base.AnalysisBase.run` (set for qcorr's own
            backends automatically).
        progressbar_kwargs : dict, optional
            Ignored (qcorr draws its own progress bar).

        Returns
        -------
        VibrationalSpectrum
            *self*, with ``results.spectrum`` and ``results.diagnostics``.

        Raises
        ------
        ConfigError
            Bad window, *frames* not evenly spaced, unknown backend, block larger than the
            window's segment count.
        SamplingError
            Fewer frames than one segment, uneven time stamps (names the frame).
        TrajectoryError
            A frame without velocities, a non-finite value (names frame and atom), an
            unreadable frame.
        """
        if frames is not None:
            if any(x is not None for x in (start, stop, step)):
                raise ConfigError("frames: give either frames or start/stop/step, not both")
            start, stop, step = evenly_spaced_frames(frames, self._trajectory.n_frames)
        self.results = Results()  # a second run starts afresh (and ships no old results to workers)
        backend = "serial" if backend is None else backend
        workers = requested_workers(backend, n_workers, n_parts, verbose=bool(verbose))
        self._plan = self._plan_run(start, stop, step, workers if n_parts is None else int(n_parts))
        parts = len(self._plan.parts)
        backend, run_workers, unsupported, processes = resolve_backend(backend, n_workers, parts,
                                                                        while_waiting=_import_xarray)
        serial = processes == 1 and isinstance(backend, (str, BackendSerial))
        self._worker_processes = processes
        self._progress_now = ("always" if verbose or (verbose is None and self._verbose) else self._progress) \
            if serial else "never"
        self._command_line_now = self._command_line or self._describe_call(start, stop, step)
        block_index, block_count = self._block
        files = self._opened.files
        if self._hash_inputs and files:
            self._hashing = start_describing_files(files, block_index - 1, block_count)
        try:
            super().run(start=start, stop=stop, step=step, frames=None, verbose=False,
                        n_workers=run_workers, n_parts=parts, backend=backend,
                        unsupported_backend=unsupported_backend or unsupported)
        except BaseException:
            if self._hashing is not None:
                self._hashing.cancel()
            raise
        finally:
            self._hashing = None
        return self

    def _plan_run(self, start, stop, step, pieces: int) -> RunPlan:
        """Frame window, segment settings and parts; every frame-window and reading error is raised here."""
        plan = plan_run(self._opened, start, stop, step, segment_ps=self._segment_ps,
                        overlap=self._overlap, taper=self._taper,
                        velocities_from=self._velocities_from, molecular=self._molecular,
                        block=self._block, pieces=pieces)
        self._checks.plan(plan)
        return plan

    def _describe_call(self, start, stop, step) -> str:
        """A readable record of this call (the default ``command_line``)."""
        groups = {g.name: g.selection for g in self._groups[1:]}
        return (
            f"python: qcorr VibrationalSpectrum(temperature={self._temperature!r}, groups={groups!r}, "
            f"segment_ps={self._segment_ps!r}, overlap={self._overlap!r}, taper={self._taper!r}, "
            f"velocities_from={self._velocities_from!r}, molecular={self._molecular!r}, "
            f"block={self._block!r}).run(start={start!r}, stop={stop!r}, step={step!r})"
        )

    # ------------------------------------------------------------------ AnalysisBase hooks
    def _setup_computation_groups(self, n_parts: int, start=None, stop=None, step=None, frames=None):
        """One computation group per part: (window position, trajectory frame) of every frame it reads.

        Each part owns whole segments (:func:`qcorr.spectra.segments.split_block`);
        neighbouring parts read some frames both: those of overlapping segments that
        straddle the split, the extra frame of differences of positions and the
        look-back of the mean-square displacement.  The arguments are those of
        :meth:`MDAnalysis.analysis.base.AnalysisBase._setup_computation_groups`; the
        split was planned by :meth:`run`.
        """
        window = self._plan.window
        groups = []
        for part in self._plan.parts:
            positions = np.arange(part.read_from, part.read_stop, dtype=np.int64)
            groups.append(np.column_stack([positions, window.start + positions * window.step]))
        return groups

    def _compute(self, indexed_frames: np.ndarray, verbose: bool | None = None, *,
                 progressbar_kwargs=None) -> _PartResult:
        """Compute one part: read its frames consecutively, feed them to :meth:`_single_frame`.

        Returns only the frames, times and results (not this object), so a worker
        process does not send the Universe back.
        """
        from qcorr.progress import progress

        part = self._plan.part_of(indexed_frames)
        self._prepare_sliced_trajectory(slicer=indexed_frames[:, 1])
        self._part = part
        self._prepare()
        opened, window = self._opened, self._plan.window
        frames = window_frames(opened, window, part.read_from, part.read_stop)
        for k, ts in enumerate(progress(frames, total=self.n_frames, desc="frames", mode=self._progress_now)):
            self._frame_index = k
            self._ts = ts
            self.frames[k] = ts.frame
            self.times[k] = opened.time_ps(ts, window.frame(part.read_from + k))
            self._single_frame()
        self._finish_part()
        return _PartResult(self.frames, self.times, self.results)

    def _prepare(self) -> None:
        """Estimators and running sums of the current part (fresh results)."""
        self.results = Results()
        self._pass = PartPass(
            self._opened, self._channels, self._groups, self._atoms.universe, self._plan, self._part,
            velocities_from=self._velocities_from, molecular=self._molecular, molecules=self._molecules,
            fft_threads=self._fft_threads, temperature_K=self._temperature, checks=self._checks)

    def _single_frame(self) -> None:
        """One frame: its velocity sample goes to the atomic and molecular estimators."""
        self._pass.add(self._ts, self._part.read_from + self._frame_index)

    def _finish_part(self) -> None:
        """The part's :class:`SpectrumParts` (``results.spectrum_parts``); estimators released."""
        self.results.spectrum_parts = self._pass.finish()
        self._pass = None

    def _get_aggregator(self) -> ResultsGroup:
        """Parts are joined in order by :func:`qcorr.spectra.blocks.join_spectrum_parts`."""
        return ResultsGroup(lookup={"spectrum_parts": join_spectrum_parts})

    def _conclude(self) -> None:
        """Build the spectrum dataset once from the joined parts; run the diagnostics."""
        import MDAnalysis

        from qcorr import __version__

        plan = self._plan
        block_index, block_count = self._block
        if self._hashing is not None:
            input_files = self._hashing.result()
        elif self._opened.files and not self._hash_inputs:
            input_files = name_and_size(self._opened.files)
        else:
            input_files = []
        attrs = spectrum_attributes(
            temperature_K=self._temperature, window=plan.window, settings=plan.settings,
            velocity_source=self._velocities_from, input_files=input_files,
            command_line=self._command_line_now, qcorr_version=__version__,
            mdanalysis_version=MDAnalysis.__version__, block_index=block_index,
            block_count=block_count, segment_count_window=plan.segment_count,
            worker_processes=self._worker_processes, lammps_units=self._opened.lammps_units,
            reader_options=self._reader_options, mass_overrides_u=self._masses_by_type,
            excluded_atoms=self._channels.note, **self._checks.attributes(),
        )
        table = group_table(self._groups)
        parts = self.results.spectrum_parts
        total = list(table["group"]).index("total")
        # 2/kT must be representable before anything is computed from the spectrum; the
        # kinetic temperature itself is checked per group after assembly (with an override)
        check_stated_temperature(parts.raw_segments[total], parts.wavenumber,
                                 float(table["degrees_of_freedom"][total]), self._temperature,
                                 factor_check=False)
        self._checks.before_assembly(parts)
        ds = spectrum_from_parts(parts, table, attrs)
        self._checks.after_assembly(ds)
        checks = diagnose(ds)
        del self.results["spectrum_parts"]
        self.results.spectrum = ds
        self.results.diagnostics = checks
        # neighbouring parts read shared frames; keep each frame once
        self.frames, first = np.unique(self.frames, return_index=True)
        self.times = self.times[first]
        announce(checks, stacklevel=5)  # warn at the caller of run()

    # ------------------------------------------------------------------ output
    def save(self, path: str | os.PathLike[str]) -> Path:
        """Write the spectrum file (NetCDF-4) atomically: a temporary file, then a rename.

        Raises
        ------
        ConfigError
            Nothing computed yet, or *path* is one of the input files.
        SpectrumFileError
            The dataset does not follow the spectrum-file contract.
        """
        if "spectrum" not in self.results:
            raise ConfigError("nothing to save yet: call run() first")
        target = Path(path).resolve()
        for name in self._opened.files:
            if Path(name).resolve() == target:
                raise ConfigError(f"--output {path} is also an input file; choose another name")
        return write_spectrum(self.results.spectrum, path)
