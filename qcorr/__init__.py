"""qcorr: harmonic quantum corrections for classical molecular dynamics.

Pipeline: trajectory -> mass-weighted velocity spectrum (VDOS, NetCDF) ->
corrected-property table -> plots/report.

Cite the methods you use: Berens, Mackay, White, Wilson, J. Chem. Phys. 79,
2375 (1983) for the weighting-function corrections; Lin, Blanco, Goddard,
J. Chem. Phys. 119, 11792 (2003) and Lin, Maiti, Goddard, J. Phys. Chem. B
114, 8191 (2010) for the two-phase (2PT) model.
"""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("qcorr")
except PackageNotFoundError:  # running from a source tree without installation
    __version__ = "0+unknown"

__all__ = ["__version__"]
