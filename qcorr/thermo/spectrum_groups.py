"""The atom groups of a spectrum Dataset as checked arrays, and the checks on them.

* :func:`spectrum_groups` splits a Dataset that follows the spectrum-file contract
  (``DEVELOPERS.md``) into one :class:`GroupSpectrum` per group, refusing a grid
  that does not start at 0 cm^-1, non-finite values and non-positive counts;
* :func:`check_nonnegative` refuses a density negative beyond its noise;
* :func:`zero_frequency_check` decides whether a group diffuses (S(0) clearly
  above zero): a diffusing group is not a set of oscillators, so its absolute
  harmonic entropy, free energy and mean-square displacement are refused;
* :func:`spectrum_diagnostic_cautions` turns the file's own diagnostics into cautions;
* :func:`spectrum_source` and :func:`system_name` name the spectrum in messages and tables.
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import xarray as xr
from numpy.typing import ArrayLike, NDArray

from qcorr.errors import ConfigError, SpectrumFileError

FloatArray = NDArray[np.float64]

#: a group diffuses if S(0) exceeds this fraction of its mean spectral density
#: dof / <nu~> (and 3 standard errors); see :func:`zero_frequency_check`
DEFAULT_ZERO_FREQUENCY_THRESHOLD = 0.05
#: S(0) must exceed this many standard errors to count as clearly above zero
ZERO_FREQUENCY_STANDARD_ERRORS = 3.0
#: a spectral density below -(this many standard errors) is negative beyond noise
NEGATIVE_DENSITY_STANDARD_ERRORS = 5.0
#: probability of refusing a correct spectrum for a negative bin, over all its bins, when the
#: standard errors come from few segments (see :func:`negative_density_limit`; our choice)
NEGATIVE_DENSITY_FALSE_ALARM = 1e-3


@dataclass(frozen=True)
class ZeroFrequencyCheck:
    """Result of :func:`zero_frequency_check` (all densities in cm, wavenumbers in cm^-1)."""

    diffusing: bool
    zero_frequency_density: float
    zero_frequency_se: float
    mean_wavenumber: float
    ratio: float
    threshold: float

    def describe(self) -> str:
        """One phrase for messages: S(0) (cm), its standard error and the ratio to the threshold."""
        se = "n/a" if math.isnan(self.zero_frequency_se) else f"{self.zero_frequency_se:.3g}"
        return (
            f"S(0) = {self.zero_frequency_density:.4g} cm (standard error {se}) is "
            f"{self.ratio:.3g} x dof/<nu~> (threshold {self.threshold:g})"
        )


def zero_frequency_check(
    wavenumber_cm: ArrayLike,
    vdos: ArrayLike,
    zero_frequency_se: float,
    threshold: float = DEFAULT_ZERO_FREQUENCY_THRESHOLD,
) -> ZeroFrequencyCheck:
    """Decide whether a group diffuses: S(0) clearly above zero on the spectrum's scale.

    Criterion: the group diffuses if both

    * S(0) > threshold x dof / <nu~>, where dof = integral S and
      <nu~> = integral nu~ S / integral S is the mean wavenumber, so dof/<nu~> is
      the density a spectrum of that width would have if flat; and
    * S(0) > 3 standard errors of S(0) (from the segments; skipped if unknown),

    For a diffusing species S(0) = 12 m N D / (kT) (Green-Kubo; per Hz), which
    for a simple liquid is a sizeable fraction of dof/<nu~>; for a solid S(0) is
    zero up to noise and leakage.

    Parameters
    ----------
    wavenumber_cm : array_like, shape (n,)
        Wavenumber grid, cm^-1, starting at 0.
    vdos : array_like, shape (n,)
        Density of states, cm.
    zero_frequency_se : float
        Standard error of S(0), cm (NaN if unknown).
    threshold : float
        Fraction (default 0.05).
    """
    x = np.asarray(wavenumber_cm, dtype=float)
    s = np.asarray(vdos, dtype=float)
    dof = float(np.trapezoid(s, x))
    first_moment = float(np.trapezoid(s * x, x))
    mean_wn = first_moment / dof if dof > 0 else float("nan")
    s0 = float(s[0]) if x[0] == 0 else 0.0
    scale = dof / mean_wn if mean_wn > 0 else float("inf")
    ratio = s0 / scale
    significant = math.isnan(zero_frequency_se) or s0 > ZERO_FREQUENCY_STANDARD_ERRORS * zero_frequency_se
    return ZeroFrequencyCheck(
        diffusing=bool(ratio > threshold and significant),
        zero_frequency_density=s0,
        zero_frequency_se=float(zero_frequency_se),
        mean_wavenumber=mean_wn,
        ratio=ratio,
        threshold=threshold,
    )


def negative_density_limit(bins: int, effective_segments: float | None) -> float:
    """Standard errors below zero beyond which a density is negative beyond noise.

    :data:`NEGATIVE_DENSITY_STANDARD_ERRORS`, or where the standard error is itself
    estimated from few segments, the quantile of Student's t for K_eff − 1 degrees of
    freedom at a false-alarm probability of :data:`NEGATIVE_DENSITY_FALSE_ALARM` over all
    *bins* (whichever is larger; Student, Biometrika 6, 1 (1908)).  Spectra from
    differences of positions have expected rounding noise subtracted
    (:mod:`qcorr.spectra.position_noise`), so their bins scatter about zero wherever
    nothing moves; a plain 5 with an SE from 7 segments refuses ~5 % of such spectra.
    """
    if effective_segments is None or not effective_segments > 1 or not math.isfinite(effective_segments):
        return NEGATIVE_DENSITY_STANDARD_ERRORS
    from scipy import stats

    quantile = float(stats.t.isf(NEGATIVE_DENSITY_FALSE_ALARM / max(int(bins), 1), effective_segments - 1.0))
    return max(NEGATIVE_DENSITY_STANDARD_ERRORS, quantile)


def check_nonnegative(
    wavenumber_cm: ArrayLike, vdos: ArrayLike, vdos_se: ArrayLike, where: str,
    effective_segments: float | None = None,
) -> None:
    """Refuse a spectral density that is negative beyond its noise.

    Noise is the per-bin standard error from the segment scatter; a bin is
    negative beyond noise if S < -(n standard errors + 1e-9 max|S|) with n from
    :func:`negative_density_limit` (5 when *effective_segments* is not given: 5 sigma
    keeps false alarms rare over thousands of bins; the 1e-9 term absorbs round-off
    when no standard error is known).

    Raises
    ------
    SpectrumFileError
        Naming *where*, the wavenumber and the value.
    """
    x = np.asarray(wavenumber_cm, dtype=float)
    s = np.asarray(vdos, dtype=float)
    se = np.nan_to_num(np.asarray(vdos_se, dtype=float), nan=0.0)
    limit = -(negative_density_limit(s.size, effective_segments) * se + 1e-9 * float(np.max(np.abs(s))))
    bad = np.nonzero(s < limit)[0]
    if bad.size:
        i = int(bad[np.argmin(s[bad] - limit[bad])])
        raise SpectrumFileError(
            f"{where}: spectral density is negative beyond noise at {x[i]:.4g} cm-1 "
            f"(S = {s[i]:.3g} cm, standard error {se[i]:.2g} cm; {bad.size} such bins); "
            "a qcorr spectrum is negative only within its noise: remake it, or check how it was derived"
        )


@dataclass
class GroupSpectrum:
    """One group of a spectrum file, as plain arrays (units as in the contract)."""

    name: str
    wavenumber_cm: FloatArray
    vdos: FloatArray
    vdos_segments: FloatArray  # (segment, wavenumber)
    degrees_of_freedom: float
    atom_count: float
    molecule_count: float
    group_mass_g_mol: float
    kinetic_temperature_K: float


def spectrum_groups(ds: xr.Dataset, path: str | os.PathLike[str] = "<in memory>") -> list[GroupSpectrum]:
    """Split a contract-conforming spectrum Dataset into :class:`GroupSpectrum` objects.

    Raises
    ------
    SpectrumFileError
        Naming the file and group, if the wavenumber grid does not start at 0 and
        increase, values are not finite, or a count is not positive.
    """
    where = f"spectrum file '{os.fspath(path)}'"
    x = np.asarray(ds["wavenumber"].values, dtype=float)
    if x.size < 3 or x[0] != 0.0 or np.any(np.diff(x) <= 0):
        raise SpectrumFileError(
            f"{where}: the wavenumber coordinate must start at 0 cm-1 and increase (at least 3 "
            "points); remake it with 'qcorr spectrum'"
        )
    groups = []
    for name in [str(g) for g in ds["group"].values]:
        sel = ds.sel(group=name)
        vdos = np.asarray(sel["vdos"].values, dtype=float)
        segs = np.asarray(sel["vdos_segments"].transpose("segment", "wavenumber").values, dtype=float)
        if not (np.all(np.isfinite(vdos)) and np.all(np.isfinite(segs))):
            raise SpectrumFileError(
                f"{where}, group '{name}': the spectrum holds NaN or infinite values; remake it"
            )
        counts = {}
        for var in ("degrees_of_freedom", "atom_count", "molecule_count", "group_mass"):
            value = float(sel[var].values)
            if not (math.isfinite(value) and value > 0):
                raise SpectrumFileError(
                    f"{where}, group '{name}': variable '{var}' is {value}, must be > 0; "
                    "remake the spectrum (check the group's selection)"
                )
            counts[var] = value
        groups.append(
            GroupSpectrum(
                name=name,
                wavenumber_cm=x,
                vdos=vdos,
                vdos_segments=segs,
                degrees_of_freedom=counts["degrees_of_freedom"],
                atom_count=counts["atom_count"],
                molecule_count=counts["molecule_count"],
                group_mass_g_mol=counts["group_mass"],
                kinetic_temperature_K=float(sel["kinetic_temperature"].values),
            )
        )
    return groups


def spectrum_temperature(ds: xr.Dataset, path: str | os.PathLike[str] = "<in memory>") -> float:
    """The temperature_K attribute, checked to be finite and > 0 (K)."""
    try:
        t = float(ds.attrs["temperature_K"])
    except (KeyError, TypeError, ValueError) as err:
        raise SpectrumFileError(
            f"spectrum file '{os.fspath(path)}' has no usable temperature_K attribute; remake it"
        ) from err
    if not (math.isfinite(t) and t > 0):
        raise SpectrumFileError(
            f"spectrum file '{os.fspath(path)}' has temperature_K = {t}, must be > 0 K; remake it "
            "with a positive --temperature"
        )
    return t


def spectrum_diagnostic_cautions(ds: xr.Dataset) -> list[str]:
    """Cautions from the spectrum file's own diagnostics (every check not reported "ok").

    The ``diagnostics`` attribute is a JSON list of ``{"check", "status", "message"}``
    (spectrum-file contract); an unreadable attribute gives one caution saying so.
    """
    try:
        items = json.loads(ds.attrs.get("diagnostics", "[]"))
        return [
            f"Spectrum diagnostic '{item['check']}': {item['message']}"
            for item in items
            if str(item.get("status", "ok")) != "ok"
        ]
    except (TypeError, ValueError, KeyError, AttributeError):
        return ["The spectrum file's diagnostics attribute could not be read."]


def spectrum_source(ds: xr.Dataset, source: str | os.PathLike[str] | None = None) -> str:
    """The name a spectrum Dataset goes by in messages and provenance.

    Parameters
    ----------
    ds : xarray.Dataset
        Spectrum Dataset.
    source : str or path-like, optional
        Given name (e.g. the file name as typed on the command line).

    Returns
    -------
    str
        *source*; else the file xarray read the Dataset from (``ds.encoding["source"]``);
        else ``"<in memory>"``.
    """
    if source is not None:
        return os.fspath(source)
    found = ds.encoding.get("source")
    return os.fspath(found) if found else "<in memory>"


def system_name(system: str | None, source: str) -> str:
    """The ``system`` column's value: *system*, or the stem of the spectrum's file name.

    A Dataset made in memory (source ``"<in memory>"``) is called ``"spectrum"``.

    Raises
    ------
    ConfigError
        If *system* is given but blank (names ``--system``).
    """
    if system is None:
        return "spectrum" if source == "<in memory>" else Path(source).stem
    if not str(system).strip():
        raise ConfigError("--system: give a non-empty identifier")
    return str(system)
