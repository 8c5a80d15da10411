"""The harmonic property table of a spectrum: corrections, ZPE, absolute values, MSD, errors.

Given the vibrational density of states S(nu~) of an atom group (per unit
wavenumber, integral = degrees of freedom; the spectrum-file contract in
``DEVELOPERS.md``), every property X of :mod:`qcorr.thermo.weights` is

    X = m * integral_0^inf S(nu~) W_X(u) dnu~,   u = h c nu~ / (k T),

with m = k for heat capacity and entropy and m = kT for energies
(Berens, Mackay, White, Wilson [1]_).  The quantum correction
dX = m * integral S (W^q - W^c) dnu~ is added to a classical MD value,
X_q = X_MD + dX, when the user supplies X_MD; the absolute harmonic values
(classical and quantum) describe a solid, where S(0) = 0.

Assumptions and cautions
------------------------
* Harmonic approximation: each spectral component is an independent harmonic
  mode at its (anharmonic, classical-MD) frequency.  Anharmonic, diffusive or
  tunnelling motion is not treated correctly; the corrections are first order.
* A diffusing group (S(0) clearly > 0,
  :func:`qcorr.thermo.spectrum_groups.zero_frequency_check`) is not a
  set of oscillators: its absolute harmonic entropy and free energy, and its
  mean-square displacement, are refused (use ``qcorr liquid``, the 2PT method);
  the corrections stay finite and are reported.
* The spectrum is measured at one temperature.  Evaluating it at other
  temperatures (a temperature scan) assumes the spectrum does not change with
  temperature, i.e. purely harmonic behaviour.
* Thermostats that act locally (Langevin, Andersen) change the spectrum;
  constrained bonds are absent from it (see
  :func:`qcorr.thermo.spectrum_integrals.frozen_bond_integrals`).
* These results support, not replace, validated practice.

Layout of the table: ``DEVELOPERS.md`` ("The property table").  The integrals are in
:mod:`qcorr.thermo.spectrum_integrals`, the standard errors in
:mod:`qcorr.thermo.segment_statistics`, the checks of each group in
:mod:`qcorr.thermo.spectrum_groups`, the rows of one group in :mod:`qcorr.thermo.harmonic_rows`.

References
----------
.. [1] P. H. Berens, D. H. J. Mackay, G. M. White, K. R. Wilson, J. Chem. Phys. 79,
   2375 (1983).
"""

from __future__ import annotations

import json
import math
import os
import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
import xarray as xr

from qcorr.errors import ConfigError, PhysicsError, QcorrWarning
from qcorr.outputs.table import TableRow, rows_to_frame
from qcorr.thermo.harmonic_rows import frozen_bond_rows, msd_rows, property_rows
from qcorr.thermo.segment_statistics import segment_effective_count, segment_standard_error
from qcorr.thermo.spectrum_groups import (
    DEFAULT_ZERO_FREQUENCY_THRESHOLD,
    GroupSpectrum,
    ZeroFrequencyCheck,
    check_nonnegative,
    spectrum_diagnostic_cautions,
    spectrum_groups,
    spectrum_source,
    spectrum_temperature,
    system_name,
    zero_frequency_check,
)
from qcorr.thermo.weights import PROPERTIES, HarmonicProperty, get_property

#: cautions that hold for every harmonic number qcorr reports
HARMONIC_CAUTIONS: tuple[str, ...] = (
    ("Harmonic approximation: every spectral component is treated as an independent harmonic "
     "mode (Berens, Mackay, White, Wilson, J. Chem. Phys. 79, 2375 (1983)); the corrections "
     "are first-order fixes to classical MD values, not a quantum simulation."),
    ("Anharmonic modes: classical MD frequencies are anharmonic and red-shifted; strongly "
     "anharmonic, diffusive, hindered-rotor or tunnelling motion is not described correctly."),
    ("Thermostat artefacts: local stochastic thermostats (Langevin, Andersen) broaden bands "
     "and change the low-frequency spectrum; prefer NVE or weakly coupled global thermostats "
     "for the production run that feeds the spectrum."),
    ("Constrained bonds: modes removed by constraints are absent from the spectrum; their "
     "zero-point energy and quantum contributions appear only through the frozen-bond add-on "
     "rows, from user-given wavenumbers."),
    ("These results support, not replace, validated practice: compare with experiment or "
     "path-integral simulations where available."),
)

#: spectrum-file attributes copied into a harmonic table's provenance
_SPECTRUM_PROVENANCE = (
    "temperature_K", "qcorr_version", "command_line", "segment_frames", "segment_length_ps",
    "segment_overlap", "taper", "resolution_wavenumber", "nyquist_wavenumber", "velocity_source",
    "frames_used",
)


def _json_number(value: float) -> float | None:
    """JSON has no NaN: an undefined number becomes null."""
    value = float(value)
    return value if math.isfinite(value) else None


@dataclass
class PropertyResult:
    """Rows, cautions and per-group diagnostics of :func:`harmonic_property_rows`."""

    rows: list[TableRow]
    cautions: list[str]
    groups: dict[str, dict]


def _checked_options(
    temperatures_K: Sequence[float] | None,
    properties: Sequence[str] | None,
    md_values: Mapping[tuple[str, str], float] | None,
    frozen_bond_wavenumbers_cm: Mapping[str, Sequence[float]] | None,
    zero_frequency_threshold: float,
) -> tuple[list[float] | None, list[HarmonicProperty], dict, dict]:
    """Check the options that do not depend on the spectrum (messages name the options)."""
    temps = None if not temperatures_K else [float(t) for t in temperatures_K]
    for t in temps or []:
        if not (math.isfinite(t) and t > 0):
            raise ConfigError(f"--temperatures: {t:g} K is not a positive temperature; give values > 0 K")
    props = [get_property(n, "--properties") for n in (properties or list(PROPERTIES))]
    if not (math.isfinite(zero_frequency_threshold) and zero_frequency_threshold > 0):
        raise ConfigError(
            f"--zero-frequency-threshold: {zero_frequency_threshold} must be a positive fraction"
        )
    md = {(str(g), str(p)): float(v) for (g, p), v in (md_values or {}).items()}
    for (gname, pname), value in md.items():
        get_property(pname, "--md-value")
        if not math.isfinite(value):
            raise ConfigError(f"--md-value {gname}:{pname}: value {value} is not a finite number")
    frozen = {str(g): [float(w) for w in wns] for g, wns in (frozen_bond_wavenumbers_cm or {}).items()}
    for gname, wns in frozen.items():
        if not wns or not all(math.isfinite(w) and w > 0 for w in wns):
            raise ConfigError(
                f"--frozen-bond-wavenumbers {gname}: wavenumbers must be positive numbers in cm-1"
            )
    return temps, props, md, frozen


def harmonic_property_rows(
    ds: xr.Dataset,
    *,
    system: str,
    source: str = "<in memory>",
    temperatures_K: Sequence[float] | None = None,
    properties: Sequence[str] | None = None,
    md_values: Mapping[tuple[str, str], float] | None = None,
    frozen_bond_wavenumbers_cm: Mapping[str, Sequence[float]] | None = None,
    zero_frequency_threshold: float = DEFAULT_ZERO_FREQUENCY_THRESHOLD,
    include_msd: bool = True,
) -> PropertyResult:
    """All harmonic properties of every group of a spectrum Dataset, as table rows.

    The arguments are those of :func:`harmonic_properties` (which calls this and makes
    the DataFrame); *system* must be given and *source* is the name used in messages.

    Returns
    -------
    PropertyResult
        The rows, the cautions that depend on the spectrum (not
        :data:`HARMONIC_CAUTIONS`) and the per-group diagnostics (JSON-ready: NaN as None).

    Raises
    ------
    ConfigError
        Unknown property or group, temperature <= 0, bad wavenumber.
    SpectrumFileError
        Bad spectrum content (negative density beyond noise, bad counts, bad grid).
    """
    temps, props, md_values, frozen = _checked_options(
        temperatures_K, properties, md_values, frozen_bond_wavenumbers_cm, zero_frequency_threshold
    )
    t0 = spectrum_temperature(ds, source)
    temps = temps or [t0]
    groups = spectrum_groups(ds, source)
    names = [g.name for g in groups]
    for gname, _ in md_values:
        if gname not in names:
            raise ConfigError(f"--md-value: no group '{gname}' in spectrum file '{source}'; groups: {', '.join(names)}")
    for gname in frozen:
        if gname not in names:
            raise ConfigError(
                f"--frozen-bond-wavenumbers: no group '{gname}' in spectrum file '{source}'; groups: {', '.join(names)}"
            )
    k_eff = segment_effective_count(ds)
    rows: list[TableRow] = []
    cautions: list[str] = []
    info: dict[str, dict] = {}
    if k_eff < 2 and int(ds.sizes.get("segment", 0)) < 2:
        cautions.append("The spectrum has fewer than two segments: no standard errors.")
    cautions += spectrum_diagnostic_cautions(ds)
    for g in groups:
        where = f"spectrum file '{source}', group '{g.name}'"
        bin_se = segment_standard_error(g.vdos_segments, k_eff)
        check_nonnegative(g.wavenumber_cm, g.vdos, bin_se, where, k_eff)
        check = zero_frequency_check(
            g.wavenumber_cm, g.vdos, float(bin_se[0]) if bin_se.size else float("nan"),
            zero_frequency_threshold,
        )
        info[g.name] = {
            "diffusing": check.diffusing,
            "zero_frequency_density_cm": _json_number(check.zero_frequency_density),
            "zero_frequency_se_cm": _json_number(check.zero_frequency_se),
            "mean_wavenumber_cm": _json_number(check.mean_wavenumber),
            "zero_frequency_ratio": _json_number(check.ratio),
            "zero_frequency_threshold": check.threshold,
            "degrees_of_freedom": g.degrees_of_freedom,
            "molecule_count": g.molecule_count,
            "atom_count": g.atom_count,
            "effective_segment_count": k_eff,
        }
        cautions += _group_cautions(g, check, t0)
        for t in temps:
            # far from the spectrum's temperature a weight or a product may overflow; every
            # value is checked below, so numpy's warnings would only repeat it less clearly
            with np.errstate(over="ignore", invalid="ignore", divide="ignore", under="ignore"):
                new = property_rows(
                    g, system=system, temperature_K=t, spectrum_temperature_K=t0, properties=props,
                    md_values=md_values, k_eff=k_eff, check=check,
                )
                if include_msd:
                    new += msd_rows(g, system=system, temperature_K=t, k_eff=k_eff, check=check,
                                    spectrum_temperature_K=t0)
                if g.name in frozen:
                    new += frozen_bond_rows(g, frozen[g.name], system=system, temperature_K=t, properties=props)
            _check_representable(new, t0)
            rows += new
    if any(not math.isclose(t, t0, rel_tol=1e-12) for t in temps):
        cautions.append(
            f"Temperature scan: the spectrum was measured at {t0:g} K; values at other temperatures "
            "assume it does not change with temperature (harmonic assumption)."
        )
    return PropertyResult(rows=rows, cautions=cautions, groups=info)


def _check_representable(rows: list[TableRow], t0: float) -> None:
    """Refuse rows with a value that is not finite (an undefined value is None, never NaN) or
    an infinite standard error (NaN is one that is not defined: one segment): at such a
    temperature the property is beyond double precision.

    Raises
    ------
    PhysicsError
        Naming ``--temperatures``, the temperature, the group and the property.
    """
    for row in rows:
        for column in ("classical", "quantum", "correction", "classical_se", "quantum_se", "correction_se"):
            value = getattr(row, column)
            if value is None:
                continue
            is_value = column in ("classical", "quantum", "correction")
            if (is_value and not math.isfinite(value)) or math.isinf(value):
                raise PhysicsError(
                    f"--temperatures {row.temperature_K:g}: the {row.property} of group '{row.group}' is "
                    f"not representable in double precision at this temperature ({column} {value}); give "
                    f"temperatures nearer the spectrum's {t0:g} K"
                )


def _group_cautions(g: GroupSpectrum, check: ZeroFrequencyCheck, t0: float) -> list[str]:
    """Cautions about one group: diffusing, integral off its dof."""
    cautions = []
    if check.diffusing:
        cautions.append(
            f"Group '{g.name}' diffuses ({check.describe()}): absolute harmonic entropy, free "
            "energy and mean-square displacement are refused; use 'qcorr liquid' (2PT). The "
            "corrections are reported."
        )
    integral = float(np.trapezoid(g.vdos, g.wavenumber_cm))
    if abs(integral - g.degrees_of_freedom) > 1e-3 * g.degrees_of_freedom:
        cautions.append(
            f"Group '{g.name}': the spectrum integrates to {integral:.6g}, not to its "
            f"{g.degrees_of_freedom:g} degrees of freedom; values follow the spectrum as stored."
        )
    # a kinetic temperature off the stated one is the spectrum's 'temperature' diagnostic,
    # judged against its statistical scatter (qcorr.spectra.diagnostics) and passed on with
    # the other diagnostics' warnings (spectrum_diagnostic_cautions)
    return cautions


def _spectrum_provenance(ds: xr.Dataset) -> dict[str, object]:
    """The spectrum file's settings and provenance worth keeping beside a table."""
    out: dict[str, object] = {key: ds.attrs[key] for key in _SPECTRUM_PROVENANCE if key in ds.attrs}
    for key in ("input_files", "diagnostics"):
        try:
            out[key] = json.loads(ds.attrs[key])
        except (KeyError, TypeError, ValueError):
            out[key] = ds.attrs.get(key)
    return out


def harmonic_properties(
    ds: xr.Dataset,
    *,
    system: str | None = None,
    temperatures_K: Sequence[float] | None = None,
    properties: Sequence[str] | None = None,
    md_values: Mapping[tuple[str, str], float] | None = None,
    frozen_bond_wavenumbers_cm: Mapping[str, Sequence[float]] | None = None,
    zero_frequency_threshold: float = DEFAULT_ZERO_FREQUENCY_THRESHOLD,
    include_msd: bool = True,
    source: str | os.PathLike[str] | None = None,
) -> pd.DataFrame:
    """Harmonic quantum corrections and properties of every group of a spectrum, as a table.

    What ``qcorr properties`` computes: every property of
    :data:`qcorr.thermo.weights.PROPERTIES` with harmonic weighting functions (Berens et
    al. [1]_), per group, temperature and basis, with standard errors from the
    per-segment spectra.  Cautions that concern this spectrum are also issued as
    :class:`qcorr.errors.QcorrWarning`.

    Parameters
    ----------
    ds : xarray.Dataset
        Spectrum Dataset following the spectrum-file contract (``DEVELOPERS.md``), e.g.
        from :func:`qcorr.spectra.spectrum_file.read_spectrum`.
    system : str, optional
        Value of the ``system`` column; default the stem of the spectrum's file name
        (``"spectrum"`` for a Dataset made in memory).
    temperatures_K : sequence of float, optional
        Temperatures in K (> 0) at which to evaluate the spectrum; default the
        spectrum's ``temperature_K``.  Other temperatures are harmonic extrapolations
        (noted in each row and in the cautions).
    properties : sequence of str, optional
        Names from :data:`qcorr.thermo.weights.PROPERTIES`; default all.
    md_values : mapping, optional
        ``{(group, property): value}``: the classical MD value per mole of molecules, in
        J/(mol K) for heat capacity and entropy and kJ/mol for energies, at the
        spectrum's temperature; the quantum value is then this plus the correction.
    frozen_bond_wavenumbers_cm : mapping, optional
        ``{group: [wavenumber in cm^-1, ...]}``: bonds constrained in the MD, per molecule
        of the group; reported on separate rows (method ``frozen_bond_addon``).
    zero_frequency_threshold : float
        A group diffuses when S(0) exceeds this fraction of dof/<wavenumber> (and 3
        standard errors); its absolute entropy, free energy and mean-square
        displacement are then refused (empty cells, with a note).
    include_msd : bool
        Add the mean-square-displacement rows (Å², basis ``atom_mean``).
    source : str or path-like, optional
        The spectrum's file name, for messages, the default *system* and the table's
        provenance; default the file xarray read *ds* from, if any.

    Returns
    -------
    pandas.DataFrame
        The property table (columns :data:`qcorr.outputs.table.TABLE_COLUMNS`, units
        in its ``unit`` column).  ``attrs`` holds the provenance that
        :func:`qcorr.outputs.table.write_table` writes to the JSON sidecar: ``method``,
        ``input_spectrum`` (``{"name": source}``; ``qcorr properties`` adds the file's
        size and SHA-256), ``spectrum_provenance``, ``options``, ``md_value_basis``,
        ``standard_errors``, ``groups`` (per-group diagnostics) and ``cautions``
        (:data:`HARMONIC_CAUTIONS` first).

    Raises
    ------
    ConfigError
        A bad option (the message names the ``qcorr properties`` option it matches):
        unknown property or group, temperature <= 0, wavenumber <= 0, blank system.
    SpectrumFileError
        Bad spectrum content (negative density beyond noise, bad counts, bad grid).

    References
    ----------
    .. [1] P. H. Berens, D. H. J. Mackay, G. M. White, K. R. Wilson, J. Chem. Phys. 79,
       2375 (1983).
    """
    name = spectrum_source(ds, source)
    system = system_name(system, name)
    result = harmonic_property_rows(
        ds, system=system, source=name, temperatures_K=temperatures_K, properties=properties,
        md_values=md_values, frozen_bond_wavenumbers_cm=frozen_bond_wavenumbers_cm,
        zero_frequency_threshold=zero_frequency_threshold, include_msd=include_msd,
    )
    frame = rows_to_frame(result.rows)
    frame.attrs = {
        "method": "harmonic weighting functions (Berens, Mackay, White, Wilson, J. Chem. Phys. 79, "
                  "2375 (1983))",
        "input_spectrum": {"name": name},
        "spectrum_provenance": _spectrum_provenance(ds),
        "options": {
            "system": system,
            "temperatures_K": [float(t) for t in temperatures_K] if temperatures_K
            else [float(ds.attrs["temperature_K"])],
            "properties": list(properties) if properties else list(PROPERTIES),
            "md_values": [{"group": g, "property": p, "value": float(v)}
                          for (g, p), v in (md_values or {}).items()],
            "frozen_bond_wavenumbers_cm": {g: [float(w) for w in wns]
                                           for g, wns in (frozen_bond_wavenumbers_cm or {}).items()},
            "zero_frequency_threshold": zero_frequency_threshold,
            "include_msd": include_msd,
        },
        "md_value_basis": "per mole of molecules, J/(mol K) or kJ/mol, at the spectrum's temperature",
        "standard_errors": "per-segment spectra (block averaging); s / sqrt(K_eff) with Welch's "
                           "(IEEE Trans. Audio Electroacoust. 15, 70 (1967)) effective number of "
                           "independent overlapping segments",
        "groups": result.groups,
        "cautions": list(HARMONIC_CAUTIONS) + result.cautions,
    }
    for caution in result.cautions:
        warnings.warn(caution, QcorrWarning, stacklevel=2)
    return frame
