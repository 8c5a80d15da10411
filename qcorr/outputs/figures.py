"""Figures of a spectrum file: where in frequency the quantum corrections come from.

Two figures are made from a spectrum file (DEVELOPERS.md, "The spectrum file"):

* the vibrational density of states (VDOS) of every atom group against
  wavenumber, with the quantum harmonic weighting functions of heat capacity
  and thermal energy drawn over it on a second axis, so that a reader sees
  which bands sit where hν ≳ kT;
* the cumulative quantum corrections of one group,
  ``ΔX(ν̃) = c ∫_0^ν̃ S(ν̃') ΔW_X(u(ν̃')) dν̃'``, against the upper wavenumber ν̃,
  whose right end is the whole correction of Berens, Mackay, White and
  Wilson [1]_ and whose steps show the bands that carry it.

The weighting functions come from :mod:`qcorr.thermo.weights` (one definition for the
whole package); ``c`` is ``k`` (heat capacity, entropy) or ``kT`` (energies)
converted to the chosen basis.  The integral is the trapezoid rule on the
file's wavenumber grid, the rule under which the spectrum is normalised to the
degrees of freedom.  The corrections vanish like u² as ν → 0, so the first bin
needs no special treatment (unlike absolute entropies).

Figures are drawn with matplotlib's object interface (no pyplot, no display
needed) and returned as :class:`matplotlib.figure.Figure`; :func:`save_figure`
writes one atomically with the Agg / SVG / PDF renderers.  SVG output carries no
date and a fixed id salt, so the same input gives the same bytes.

References
----------
.. [1] P. H. Berens, D. H. J. Mackay, G. M. White, K. R. Wilson, "Thermodynamics
   and quantum corrections from molecular dynamics for liquid water",
   J. Chem. Phys. 79, 2375 (1983).
"""

from __future__ import annotations

import os
from pathlib import Path

import matplotlib
import numpy as np
import xarray as xr
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from scipy.integrate import cumulative_trapezoid

from qcorr import units
from qcorr.constants import reduced_frequency, wavenumber_per_THz
from qcorr.errors import ConfigError, PhysicsError
from qcorr.safe_write import atomic_path
from qcorr.thermo import weights
from qcorr.thermo.spectrum_integrals import to_physical, unit_of

#: figure file formats qcorr writes, by file-name extension
FIGURE_FORMATS: tuple[str, ...] = ("svg", "png", "pdf")

#: properties drawn in the cumulative figure, in drawing order
CUMULATIVE_PROPERTIES: tuple[str, ...] = (
    "heat_capacity",
    "entropy",
    "energy",
    "helmholtz_free_energy",
    "zero_point_energy",
)

#: bases of the cumulative corrections (the table's spellings, DEVELOPERS.md)
BASES: tuple[str, ...] = ("per_mole_molecules", "per_mole_atoms", "per_system")

_LABELS = {
    "heat_capacity": "heat capacity ΔCv",
    "entropy": "entropy ΔS",
    "energy": "energy ΔE (with ZPE)",
    "helmholtz_free_energy": "free energy ΔA",
    "zero_point_energy": "zero-point energy",
}

#: share of the total spectral weight below the default upper wavenumber of the figures
_SHOWN_WEIGHT = 0.999


def figure_format(path: str | os.PathLike[str], option: str) -> str:
    """Return the figure format named by the file extension of *path*.

    Raises
    ------
    ConfigError
        If the extension is not one of :data:`FIGURE_FORMATS` (names the option).
    """
    suffix = Path(path).suffix.lower().lstrip(".")
    if suffix not in FIGURE_FORMATS:
        raise ConfigError(
            f"{option} {os.fspath(path)!r}: the file name must end in "
            f"{', '.join('.' + f for f in FIGURE_FORMATS)} (that picks the figure format)"
        )
    return suffix


def _group_names(ds: xr.Dataset) -> list[str]:
    return [str(g) for g in ds["group"].values]


def _check_group(ds: xr.Dataset, group: str) -> None:
    names = _group_names(ds)
    if group not in names:
        raise ConfigError(
            f"--group {group!r}: the spectrum file has no such group; groups are: {', '.join(names)}"
        )


def _check_temperature(temperature_K: float) -> float:
    temperature_K = float(temperature_K)
    if not np.isfinite(temperature_K) or temperature_K <= 0:
        raise ConfigError(f"--temperature {temperature_K!r}: the temperature must be > 0 K")
    return temperature_K


def _check_basis(ds: xr.Dataset, group: str, basis: str) -> tuple[float, float]:
    """Molecule and atom counts of *group*, checked for *basis*."""
    if basis not in BASES:
        raise ConfigError(f"--basis {basis!r}: choose one of {', '.join(BASES)}")
    molecules = float(ds["molecule_count"].sel(group=group))
    atoms = float(ds["atom_count"].sel(group=group))
    needed = {"per_mole_molecules": ("molecule_count", molecules),
              "per_mole_atoms": ("atom_count", atoms)}.get(basis)
    if needed is not None and not needed[1] > 0:
        raise PhysicsError(
            f"group {group!r} has {needed[0]} = {needed[1]:g}; choose another --basis"
        )
    return molecules, atoms


def cumulative_corrections(
    ds: xr.Dataset,
    group: str = "total",
    temperature_K: float | None = None,
    basis: str = "per_mole_molecules",
) -> xr.Dataset:
    """Running integrals of the harmonic quantum corrections of one group.

    Parameters
    ----------
    ds : xarray.Dataset
        Spectrum file contents (``vdos`` in cm, i.e. per cm⁻¹, on ``wavenumber`` in cm⁻¹).
    group : str
        Atom group.
    temperature_K : float, optional
        Temperature in K of the weighting functions; default the file's
        ``temperature_K`` (the temperature the spectrum was measured at; any other
        value assumes the modes stay harmonic).
    basis : {"per_mole_molecules", "per_mole_atoms", "per_system"}
        Per mole of molecules of the group, per mole of its atoms, or for the
        simulated group as a whole (the bases of the property table).

    Returns
    -------
    xarray.Dataset
        One variable per name in :data:`CUMULATIVE_PROPERTIES`, dimension
        ``wavenumber`` (cm⁻¹); heat capacity and entropy in J/(mol K) (J/K per
        system), energies in kJ/mol (kJ per system).  Value at ν̃:
        ``c ∫_0^ν̃ S(ν̃') ΔW(u) dν̃'`` with ``c = k`` or ``k T`` times ``N_A/n`` for a
        molar basis (``n`` molecules or atoms of the group), by the trapezoid rule,
        starting at 0; the conversion is :func:`qcorr.thermo.spectrum_integrals.to_physical`, the one
        the property table uses.  Attributes ``temperature_K``, ``group``, ``basis``.

    Notes
    -----
    ``ΔW = W^q − W^c`` [1]_; e.g. for heat capacity
    ``ΔW = u² eᵘ/(eᵘ − 1)² − 1`` with ``u = h c ν̃ / (k T)``.  The correction weights
    vanish as u → 0, so ν̃ = 0 contributes 0.  The last value equals the full
    correction ``ΔX = c ∫_0^∞ S ΔW dν̃`` of the table (same rule, same grid).

    References
    ----------
    .. [1] P. H. Berens, D. H. J. Mackay, G. M. White, K. R. Wilson,
       J. Chem. Phys. 79, 2375 (1983).
    """
    _check_group(ds, group)
    temperature_K = _check_temperature(
        ds.attrs["temperature_K"] if temperature_K is None else temperature_K
    )
    molecules, atoms = _check_basis(ds, group, basis)
    wavenumber = np.asarray(ds["wavenumber"].values, dtype=float)
    density = np.asarray(ds["vdos"].sel(group=group).values, dtype=float)
    u = reduced_frequency(wavenumber, temperature_K)
    positive = u > 0
    out = xr.Dataset(coords={"wavenumber": ds["wavenumber"]})
    for name in CUMULATIVE_PROPERTIES:
        prop = weights.get_property(name)
        delta = np.zeros_like(u)
        with np.errstate(over="ignore", invalid="ignore", under="ignore"):  # checked below
            delta[positive] = prop.correction(u[positive])  # limit u -> 0 of every correction is 0
            modes = cumulative_trapezoid(density * delta, wavenumber, initial=0.0)
            running = to_physical(modes, prop, temperature_K, basis, molecules, atoms)
        if not np.all(np.isfinite(running)):
            raise PhysicsError(
                f"--temperature {temperature_K:g}: the cumulative {name} correction of group '{group}' is "
                "not representable in double precision at this temperature; give a temperature nearer "
                f"the spectrum's {float(ds.attrs['temperature_K']):g} K"
            )
        out[name] = ("wavenumber", running)
        out[name].attrs = {
            "units": unit_of(prop, basis),
            "long_name": f"cumulative quantum correction of {prop.description}",
        }
    out.attrs = {"temperature_K": temperature_K, "group": group, "basis": basis}
    return out


def default_upper_wavenumber(ds: xr.Dataset) -> float:
    """Upper wavenumber (cm⁻¹) of the figures: where the ``total`` spectrum holds 99.9 % of
    its weight, plus 15 %, but never beyond the last wavenumber of the file."""
    wavenumber = np.asarray(ds["wavenumber"].values, dtype=float)
    density = np.clip(np.asarray(ds["vdos"].sel(group="total").values, dtype=float), 0, None)
    running = cumulative_trapezoid(density, wavenumber, initial=0.0)
    if running[-1] <= 0:
        return float(wavenumber[-1])
    index = int(np.searchsorted(running, _SHOWN_WEIGHT * running[-1]))
    return float(min(wavenumber[-1], 1.15 * wavenumber[min(index, wavenumber.size - 1)]))


def save_figure(figure: Figure, path: str | os.PathLike[str], *, option: str = "path") -> Path:
    """Write a figure atomically; the extension of *path* (.svg, .png, .pdf) picks the format.

    SVG and PDF carry no date and SVG a fixed id salt, so the same figure gives the same
    bytes; PNG is written at 150 dpi.

    Parameters
    ----------
    figure : matplotlib.figure.Figure
        E.g. from :func:`spectrum_figure` or :func:`cumulative_figure`.
    path : str or path-like
        Output file (its directory is made if missing).
    option : str
        Name of the option or argument that gave *path*, for the error message.

    Returns
    -------
    pathlib.Path
        The written file.

    Raises
    ------
    ConfigError
        If the extension is not one of :data:`FIGURE_FORMATS` (nothing is written).
    """
    fmt = figure_format(path, option)
    FigureCanvasAgg(figure)
    metadata = {"Date": None} if fmt in ("svg", "pdf") else {"Software": None}
    if fmt == "pdf":
        metadata["CreationDate"] = None
        metadata.pop("Date")
    with (
        matplotlib.rc_context({"svg.hashsalt": "qcorr", "svg.fonttype": "path"}),
        atomic_path(path, option) as tmp,
    ):
        figure.savefig(tmp, format=fmt, metadata=metadata, dpi=150)
    return Path(path)


def _upper_wavenumber(ds: xr.Dataset, max_wavenumber_cm: float | None) -> float:
    """The figures' upper wavenumber in cm^-1: the given one (> 0) or the default."""
    if max_wavenumber_cm is None:
        return default_upper_wavenumber(ds)
    if not max_wavenumber_cm > 0:
        raise ConfigError(f"--max-wavenumber {max_wavenumber_cm!r}: must be > 0 cm^-1")
    return float(max_wavenumber_cm)


def _add_frequency_axis(axes) -> None:
    top = axes.secondary_xaxis(
        "top",
        functions=(lambda w: w / wavenumber_per_THz, lambda f: f * wavenumber_per_THz),
    )
    top.set_xlabel("frequency (THz)")


def spectrum_figure(
    ds: xr.Dataset,
    *,
    temperature_K: float | None = None,
    max_wavenumber_cm: float | None = None,
    title: str | None = None,
) -> Figure:
    """Draw the VDOS of every group with the quantum weighting functions over it.

    Parameters
    ----------
    ds : xarray.Dataset
        Spectrum file contents.
    temperature_K : float, optional
        Temperature in K of the weighting functions (default: the file's).
    max_wavenumber_cm : float, optional
        Upper end of the wavenumber axis in cm⁻¹, > 0 (default
        :func:`default_upper_wavenumber`).
    title : str, optional
        Figure title (default: the file's temperature).

    Returns
    -------
    matplotlib.figure.Figure
        One axes: a line per group, ``VDOS, group <name>`` (left axis, cm), and on a
        twin right axis the two weighting functions; a frequency axis (THz) on top.
        Write it with :func:`save_figure`.

    Raises
    ------
    ConfigError
        Temperature <= 0 or upper wavenumber <= 0 (names ``--temperature`` /
        ``--max-wavenumber``).

    Notes
    -----
    Left axis: ``vdos`` (cm, i.e. degrees of freedom per cm⁻¹).  Right axis, 0–1:
    the quantum heat-capacity weight ``u² eᵘ/(eᵘ−1)²`` and the thermal-energy weight
    ``u/(eᵘ−1)`` of :mod:`qcorr.thermo.weights` at ``u = h c ν̃/(k T)``; a classical
    oscillator has weight 1 in both.
    """
    temperature_K = _check_temperature(
        ds.attrs["temperature_K"] if temperature_K is None else temperature_K
    )
    upper = _upper_wavenumber(ds, max_wavenumber_cm)
    wavenumber = np.asarray(ds["wavenumber"].values, dtype=float)
    shown = wavenumber <= upper
    figure = Figure(figsize=(7.0, 4.2), layout="constrained")
    axes = figure.add_subplot()
    for group in _group_names(ds):
        axes.plot(
            wavenumber[shown],
            np.asarray(ds["vdos"].sel(group=group).values)[shown],
            label=f"VDOS, group {group}",
            linewidth=1.6 if group == "total" else 1.0,
        )
    axes.set_xlim(0, upper)
    axes.set_ylim(bottom=min(0.0, axes.get_ylim()[0]))
    axes.set_xlabel("wavenumber (cm⁻¹)")
    axes.set_ylabel("VDOS (degrees of freedom per cm⁻¹)")
    _add_frequency_axis(axes)
    right = axes.twinx()
    fine = np.linspace(0.0, upper, 600)[1:]
    u = reduced_frequency(fine, temperature_K)
    right.plot(fine, weights.heat_capacity_quantum(u), "k--", linewidth=1.0,
               label="quantum weight, heat capacity")
    right.plot(fine, weights.thermal_energy_quantum(u), "k:", linewidth=1.0,
               label="quantum weight, thermal energy")
    right.set_ylim(0, 1.05)
    right.set_ylabel(f"weighting function at {temperature_K:g} K (classical = 1)")
    lines = axes.get_legend_handles_labels()
    more = right.get_legend_handles_labels()
    axes.legend(lines[0] + more[0], lines[1] + more[1], loc="upper right", fontsize="small")
    measured = float(ds.attrs["temperature_K"])
    axes.set_title(
        title
        or (
            f"spectrum measured at {measured:g} K"
            + ("" if temperature_K == measured else f"; weights at {temperature_K:g} K")
        )
    )
    return figure


def cumulative_figure(
    ds: xr.Dataset,
    *,
    group: str = "total",
    temperature_K: float | None = None,
    basis: str = "per_mole_molecules",
    max_wavenumber_cm: float | None = None,
    title: str | None = None,
) -> Figure:
    """Draw the cumulative quantum corrections of one group against wavenumber.

    Parameters
    ----------
    ds : xarray.Dataset
        Spectrum file contents.
    group : str
        Atom group (default ``total``).
    temperature_K : float, optional
        Temperature in K (default: the file's).
    basis : {"per_mole_molecules", "per_mole_atoms", "per_system"}
        Per mole of molecules, per mole of atoms, or per simulated system.
    max_wavenumber_cm : float, optional
        Upper end of the axis in cm⁻¹, > 0 (default :func:`default_upper_wavenumber`).
    title : str, optional
        Figure title.

    Returns
    -------
    matplotlib.figure.Figure
        Two axes (and their frequency axes on top): left ΔCv and ΔS (J/(mol K) or J/K),
        right ΔE, ΔA and the zero-point energy (kJ/mol or kJ), each a line from
        :func:`cumulative_corrections`.  Write it with :func:`save_figure`.

    Raises
    ------
    ConfigError
        Unknown group or basis, temperature <= 0, upper wavenumber <= 0.
    PhysicsError
        A molar basis of a group whose molecule or atom count is not positive.
    """
    running = cumulative_corrections(ds, group, temperature_K, basis)
    upper = _upper_wavenumber(ds, max_wavenumber_cm)
    wavenumber = np.asarray(running["wavenumber"].values, dtype=float)
    shown = wavenumber <= upper
    figure = Figure(figsize=(9.0, 4.0), layout="constrained")
    left, right = figure.subplots(1, 2, sharex=True)
    for axes, names in ((left, CUMULATIVE_PROPERTIES[:2]), (right, CUMULATIVE_PROPERTIES[2:])):
        for name in names:
            axes.plot(wavenumber[shown], running[name].values[shown], label=_LABELS[name])
        axes.axhline(0.0, color="grey", linewidth=0.6)
        axes.set_xlim(0, upper)
        axes.set_xlabel("upper wavenumber of the integral (cm⁻¹)")
        axes.set_ylabel(f"cumulative correction ({units.pretty(running[names[0]].attrs['units'])})")
        axes.legend(fontsize="small")
        _add_frequency_axis(axes)
    per = {"per_mole_molecules": "per mole of molecules", "per_mole_atoms": "per mole of atoms",
           "per_system": "per simulated system"}[basis]
    figure.suptitle(
        title
        or f"quantum corrections of group {group}, {per}, at {running.attrs['temperature_K']:g} K"
    )
    return figure
