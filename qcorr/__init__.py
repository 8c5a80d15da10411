"""qcorr: harmonic quantum corrections for classical molecular dynamics.

Pipeline: trajectory -> mass-weighted velocity spectrum (VDOS, an xarray Dataset saved
as NetCDF) -> corrected-property table (a pandas DataFrame saved as CSV + JSON) ->
figures and report.  Every step is a library call; the ``qcorr`` command and the
Snakemake workflow are thin layers over them.  From a Universe to a table::

    import MDAnalysis as mda
    import qcorr

    u = mda.Universe("topology.pdb", "trajectory.trr")
    spectrum = qcorr.VibrationalSpectrum(u, temperature=300.0, segment_ps=2.0).run()
    table = qcorr.harmonic_properties(spectrum.results.spectrum)

The public names (imported on first use, so ``import qcorr`` stays light):

* spectra: :class:`VibrationalSpectrum` (an MDAnalysis ``AnalysisBase``; parallel with
  ``run(backend="multiprocessing" | "dask")``, :class:`ProcessBackend`,
  :class:`DaskBackend`), :func:`open_trajectory`, :func:`read_spectrum`,
  :func:`write_spectrum`, :func:`combine_spectra`;
* thermodynamics: :func:`harmonic_properties` (Berens et al. weighting functions),
  :func:`two_phase_properties` and :func:`two_phase_split_spectra` (2PT);
* corrected observables (classical baselines measured from the runs + corrections):
  :func:`read_energy_file`, :func:`corrected_properties` (with :class:`Reference` values),
  :func:`temperature_series`, :func:`series_figure`, :func:`vaporisation_enthalpy`;
* outputs: :func:`read_table`, :func:`write_table`, :func:`merge_tables`,
  :func:`format_table`, :func:`summary_markdown`, :func:`summary_html`,
  :func:`spectrum_figure`, :func:`cumulative_figure`, :func:`cumulative_corrections`,
  :func:`save_figure`;
* errors: :class:`QcorrError` (one-line messages), :class:`QcorrWarning`.

Cite the methods you use: Berens, Mackay, White, Wilson, J. Chem. Phys. 79,
2375 (1983) for the weighting-function corrections; Lin, Blanco, Goddard,
J. Chem. Phys. 119, 11792 (2003) and Lin, Maiti, Goddard, J. Phys. Chem. B
114, 8191 (2010) for the two-phase (2PT) model (CITATION.cff lists them).
"""

from importlib import import_module
from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("qcorr")
except PackageNotFoundError:  # running from a source tree without installation
    __version__ = "0+unknown"

#: public names and the modules that define them; each is imported on first use
#: (PEP 562), so ``import qcorr`` and the command line's start-up stay light
_EXPORTS = {
    "VibrationalSpectrum": "qcorr.spectra.analysis",
    "ProcessBackend": "qcorr.spectra.backends",
    "DaskBackend": "qcorr.spectra.backends",
    "open_trajectory": "qcorr.reading.universe",
    "read_spectrum": "qcorr.spectra.spectrum_file",
    "write_spectrum": "qcorr.spectra.spectrum_file",
    "combine_spectra": "qcorr.spectra.blocks",
    "harmonic_properties": "qcorr.thermo.harmonic",
    "two_phase_properties": "qcorr.thermo.twophase_table",
    "two_phase_split_spectra": "qcorr.thermo.twophase_table",
    "read_table": "qcorr.outputs.table",
    "write_table": "qcorr.outputs.table",
    "merge_tables": "qcorr.outputs.table",
    "format_table": "qcorr.outputs.summary",
    "summary_markdown": "qcorr.outputs.summary",
    "summary_html": "qcorr.outputs.summary",
    "spectrum_figure": "qcorr.outputs.figures",
    "cumulative_figure": "qcorr.outputs.figures",
    "cumulative_corrections": "qcorr.outputs.figures",
    "save_figure": "qcorr.outputs.figures",
    "read_energy_file": "qcorr.baselines.energy_files",
    "corrected_properties": "qcorr.baselines.corrected",
    "Reference": "qcorr.baselines.corrected",
    "temperature_series": "qcorr.baselines.temperature_series",
    "series_figure": "qcorr.baselines.temperature_series",
    "vaporisation_enthalpy": "qcorr.baselines.vaporisation",
    "QcorrError": "qcorr.errors",
    "QcorrWarning": "qcorr.errors",
}

__all__ = ["__version__", *sorted(_EXPORTS)]  # noqa: PLE0604 -- names resolved by __getattr__


def __getattr__(name: str):
    """Import a public name from its module on first use (PEP 562)."""
    try:
        module = _EXPORTS[name]
    except KeyError:
        raise AttributeError(f"module 'qcorr' has no attribute {name!r}") from None
    value = getattr(import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    """Module attributes, the lazily imported public names included."""
    return sorted(set(globals()) | set(_EXPORTS))
