"""Harmonic thermodynamics from a vibrational spectrum: quantum corrections, ZPE, errors.

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
* A diffusing group (S(0) clearly > 0, :func:`zero_frequency_check`) is not a
  set of oscillators: its absolute harmonic entropy and free energy, and its
  mean-square displacement, are refused (use ``qcorr liquid``, the 2PT method);
  the corrections stay finite and are reported.
* The spectrum is measured at one temperature.  Evaluating it at other
  temperatures (a temperature scan) assumes the spectrum does not change with
  temperature, i.e. purely harmonic behaviour.
* Thermostats that act locally (Langevin, Andersen) change the spectrum;
  constrained bonds are absent from it (see :func:`frozen_bond_integrals`).
* These results support, not replace, validated practice.

Numerics
--------
Integrals use the trapezoid rule on the spectrum's wavenumber grid, the rule
that defines the spectrum's normalisation.  The absolute entropy and free-energy
weights contain ln u, which is infinite at nu~ = 0; they are never evaluated
there.  Instead X^q = X^c + dX: the correction weights are finite (0 at
nu~ = 0) and are integrated by the trapezoid rule, and the classical part needs
only L = integral S ln u dnu~, whose first interval [0, nu~_1] is integrated
exactly for the straight line S(nu~) = S_0 + (S_1 - S_0) nu~/nu~_1 that the
trapezoid rule assumes:

    integral_0^h S ln(c nu~) dnu~ = S_0 h (ln u_1 - 1) + (S_1 - S_0) h (ln(u_1)/2 - 1/4),

u_1 = c h (methods of product integration, e.g. Davis & Rabinowitz [2]_).

Standard errors come from the per-segment spectra (block averaging): a
property is evaluated on each segment's spectrum, rescaled to integrate to the
same dof as the spectrum (:func:`normalised_segments`: the normalisation to the
dof is itself a fluctuating ratio), and its standard error is
s / sqrt(K_eff), s the sample standard deviation over the K segments.
Overlapping tapered segments are correlated; K_eff is Welch's [3]_ effective
number of independent segments, K / [1 + 2 sum_j (1 - j/K) rho_j^2], with
rho_j the overlap correlation of the taper at a shift of j hops
(:func:`effective_segment_count`).  This is exact for Gaussian data and
spectral averages; for correlated segments s^2 is also slightly biased low,
which the formula does not correct.

References
----------
.. [1] P. H. Berens, D. H. J. Mackay, G. M. White, K. R. Wilson, J. Chem. Phys. 79,
   2375 (1983). doi:10.1063/1.446044
.. [2] P. J. Davis, P. Rabinowitz, Methods of Numerical Integration, 2nd ed.
   (Academic Press, 1984), section 2.5 (product integration).
.. [3] P. D. Welch, "The use of fast Fourier transform for the estimation of power
   spectra", IEEE Trans. Audio Electroacoust. 15, 70 (1967). doi:10.1109/TAU.1967.1161901
.. [4] A. A. Maradudin, E. W. Montroll, G. H. Weiss, I. P. Ipatova, Theory of Lattice
   Dynamics in the Harmonic Approximation, 2nd ed. (Academic Press, 1971):
   mean-square displacement of a harmonic crystal.
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import dataclass

import numpy as np
import xarray as xr
from numpy.typing import ArrayLike, NDArray

from qcorr import constants as C
from qcorr.errors import ConfigError, SpectrumFileError
from qcorr.outputs.table import BASES, TableRow
from qcorr.thermo.weights import PROPERTIES, HarmonicProperty, energy_quantum, get_property

FloatArray = NDArray[np.float64]

#: a group diffuses if S(0) exceeds this fraction of its mean spectral density
#: dof / <nu~> (and 3 standard errors); see :func:`zero_frequency_check`
DEFAULT_ZERO_FREQUENCY_THRESHOLD = 0.05
#: S(0) must exceed this many standard errors to count as clearly above zero
ZERO_FREQUENCY_STANDARD_ERRORS = 3.0
#: a spectral density below -(this many standard errors) is negative beyond noise
NEGATIVE_DENSITY_STANDARD_ERRORS = 5.0


# ------------------------------------------------------------------ integrals
def log_moment(wavenumber_cm: ArrayLike, vdos: ArrayLike, temperature_K: float) -> FloatArray:
    """L = integral S(nu~) ln u(nu~) dnu~ without evaluating ln u at nu~ = 0.

    Parameters
    ----------
    wavenumber_cm : array_like, shape (n,)
        Increasing wavenumber grid, cm^-1 (usually starting at 0).
    vdos : array_like, shape (..., n)
        Density of states per unit wavenumber, cm.
    temperature_K : float
        Temperature, K.

    Returns
    -------
    ndarray, shape (...)
        Dimensionless.  If the grid starts at 0 the first interval is integrated
        exactly for a straight-line S (module docstring); the rest by the trapezoid rule.
    """
    x = np.asarray(wavenumber_cm, dtype=float)
    s = np.asarray(vdos, dtype=float)
    if x[0] > 0:
        return np.trapezoid(s * np.log(C.reduced_frequency(x, temperature_K)), x, axis=-1)
    h = x[1]
    log_u1 = math.log(float(C.reduced_frequency(h, temperature_K)))
    s0, s1 = s[..., 0], s[..., 1]
    first = s0 * h * (log_u1 - 1.0) + (s1 - s0) * h * (0.5 * log_u1 - 0.25)
    rest = np.trapezoid(s[..., 1:] * np.log(C.reduced_frequency(x[1:], temperature_K)), x[1:], axis=-1)
    return first + rest


def mode_integrals(
    wavenumber_cm: ArrayLike, vdos: ArrayLike, temperature_K: float, prop: HarmonicProperty
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Classical, quantum and correction integrals of one property, in units of k or kT.

    Parameters
    ----------
    wavenumber_cm : array_like, shape (n,)
        Wavenumber grid, cm^-1, increasing, starting at 0.
    vdos : array_like, shape (..., n)
        Density of states per unit wavenumber, cm (integral = dof).
    temperature_K : float
        Temperature at which the weights are evaluated, K.
    prop : HarmonicProperty
        From :data:`qcorr.thermo.weights.PROPERTIES`.

    Returns
    -------
    classical, quantum, correction : ndarray, shape (...)
        Dimensionless "number of modes times weight"; multiply by k (heat
        capacity, entropy) or kT (energies) for the value of the whole group.

    Notes
    -----
    classical = integral S W^c (E, Cv: the dof; ZPE: 0; S: dof - L; A: L with
    L = :func:`log_moment`), correction = trapezoid integral of S (W^q - W^c),
    quantum = classical + correction.
    """
    x = np.asarray(wavenumber_cm, dtype=float)
    s = np.asarray(vdos, dtype=float)
    u = C.reduced_frequency(x, temperature_K)
    correction = np.trapezoid(s * prop.correction(u), x, axis=-1)
    if prop.name == "entropy":
        classical = np.trapezoid(s, x, axis=-1) - log_moment(x, s, temperature_K)
    elif prop.name == "helmholtz_free_energy":
        classical = log_moment(x, s, temperature_K)
    elif prop.name == "zero_point_energy":
        classical = np.zeros(s.shape[:-1])
    else:  # heat_capacity, energy, thermal_energy: W^c = 1
        classical = np.trapezoid(s, x, axis=-1)
    return classical, classical + correction, correction


def frozen_bond_integrals(
    wavenumbers_cm: ArrayLike, temperature_K: float, prop: HarmonicProperty
) -> tuple[float, float, float]:
    """Harmonic contribution of constrained bonds, per molecule, in units of k or kT.

    A constrained bond is absent from the MD spectrum and contributes nothing
    classically (its degree of freedom was removed), yet a real bond carries
    zero-point energy and quantum thermal terms.  Each given wavenumber is one
    quantum harmonic mode (e.g. a gas-phase or experimental stretch wavenumber).

    Parameters
    ----------
    wavenumbers_cm : array_like
        Wavenumbers of the constrained bonds of one molecule, cm^-1, > 0.
    temperature_K : float
        Temperature, K.
    prop : HarmonicProperty
        Property.

    Returns
    -------
    classical, quantum, correction : float
        classical = 0 (constrained in MD); quantum = correction = sum_i W^q(u_i).
    """
    u = C.reduced_frequency(np.asarray(wavenumbers_cm, dtype=float), temperature_K)
    quantum = float(np.sum(prop.quantum(u)))
    return 0.0, quantum, quantum


def mean_square_displacement(
    wavenumber_cm: ArrayLike, vdos: ArrayLike, temperature_K: float, group_mass_g_mol: float
) -> tuple[FloatArray, FloatArray]:
    """Harmonic mean-square displacement <|u|^2>, quantum (coth factor) and classical.

    Per mode of frequency nu, <x^2>_q = <x^2>_cl (u/2) coth(u/2) with
    <x^2>_cl = kT / (m (2 pi nu)^2) (Maradudin et al. [4]_).  Summed over the
    group's modes and divided by the group's mass this is the mass-weighted mean
    over its atoms (exact for one species):

        <|u|^2> = (1/M) integral S(nu~) kT / (4 pi^2 c^2 nu~^2) W(u) dnu~,

    W = (u/2) coth(u/2) (quantum) or 1 (classical).

    Parameters
    ----------
    wavenumber_cm : array_like, shape (n,)
        Wavenumber grid, cm^-1, starting at 0.
    vdos : array_like, shape (..., n)
        Density of states per unit wavenumber, cm.
    temperature_K : float
        Temperature, K.
    group_mass_g_mol : float
        Total mass M of the group's atoms, g/mol (= u per group).

    Returns
    -------
    quantum, classical : ndarray, shape (...)
        Mean-square displacement in angstrom^2 (|u|^2 = x^2 + y^2 + z^2, so
        <u_x^2> is a third of it).

    Notes
    -----
    Only defined for bound motion: S(nu~)/nu~^2 must stay finite as nu~ -> 0.
    The first grid point is not used: S/nu~^2 there is taken as S_1/nu~_1^2, the
    nu~^2 (Debye) law through the first non-zero wavenumber, exact for a Debye
    spectrum.  Call it only for groups that pass :func:`zero_frequency_check`.
    """
    x = np.asarray(wavenumber_cm, dtype=float)
    s = np.asarray(vdos, dtype=float)
    g = np.empty_like(s)
    g[..., 1:] = s[..., 1:] / x[1:] ** 2
    g[..., 0] = s[..., 1] / x[1] ** 2 if x[0] == 0 else s[..., 0] / x[0] ** 2
    u = C.reduced_frequency(x, temperature_K)
    # kT / (4 pi^2 c^2) in J s^2 cm^-2; times integral (S / nu~^2) dnu~ in cm^2 -> kg m^2
    prefactor = C.boltzmann_J_per_K * temperature_K / (
        4.0 * math.pi**2 * C.speed_of_light_cm_per_s**2
    )
    mass_kg = group_mass_g_mol * C.atomic_mass_kg
    to_A2 = 1.0 / C.angstrom_m**2
    classical = prefactor * np.trapezoid(g, x, axis=-1) / mass_kg * to_A2
    quantum = prefactor * np.trapezoid(g * energy_quantum(u), x, axis=-1) / mass_kg * to_A2
    return quantum, classical


# ------------------------------------------------------------------ units
def basis_factor(basis: str, molecule_count: float, atom_count: float) -> float:
    """Multiply a whole-group value in k (or kT) units by this to get the basis' value.

    per_mole_molecules: N_A / molecules; per_mole_atoms: N_A / atoms;
    per_system: 1 (J/K or kJ for the whole simulated group).
    """
    if basis == "per_mole_molecules":
        return C.avogadro_per_mol / molecule_count
    if basis == "per_mole_atoms":
        return C.avogadro_per_mol / atom_count
    if basis == "per_system":
        return 1.0
    raise ConfigError(f"unknown basis '{basis}'; valid: {', '.join(BASES)}")


def to_physical(
    value_modes: ArrayLike, prop: HarmonicProperty, temperature_K: float, basis: str,
    molecule_count: float, atom_count: float,
) -> FloatArray:
    """Convert "modes x weight" into the table unit of *basis*.

    Heat capacity and entropy: J/(mol K) per mole, J/K per system.  Energies:
    kJ/mol per mole, kJ per system.  Constants from :mod:`qcorr.constants`.
    """
    scale = C.boltzmann_J_per_K * (temperature_K * 1e-3 if prop.times_kT else 1.0)
    return np.asarray(value_modes, dtype=float) * scale * basis_factor(basis, molecule_count, atom_count)


def unit_of(prop: HarmonicProperty, basis: str) -> str:
    """Table unit of *prop* on *basis*."""
    return prop.system_unit if basis == "per_system" else prop.molar_unit


# ------------------------------------------------------------------ statistics
def effective_segment_count(
    n_segments: int, segment_frames: int, overlap: float, taper: str
) -> float:
    """Welch's effective number of independent segments for overlapping tapered segments.

    Parameters
    ----------
    n_segments : int
        Number of segments K averaged.
    segment_frames : int
        Frames per segment L.
    overlap : float
        Fraction of a segment shared by consecutive segments, 0 <= overlap < 1.
    taper : str
        ``"hann"`` (periodic Hann window) or ``"none"`` (rectangular).

    Returns
    -------
    float
        K / [1 + 2 sum_{j=1}^{K-1} (1 - j/K) rho_j^2], with
        rho_j = sum_n w_n w_{n+jD} / sum_n w_n^2 and D = L - round(overlap L)
        (Welch 1967 [3]_, eq. for the variance of the averaged periodogram).
        Equals K for non-overlapping segments.
    """
    if n_segments < 1:
        return 0.0
    L = int(segment_frames)
    hop = max(1, L - round(float(overlap) * L))
    n = np.arange(L)
    w = 0.5 - 0.5 * np.cos(2.0 * np.pi * n / L) if taper == "hann" else np.ones(L)
    norm = float(np.sum(w * w))
    total = 1.0
    for j in range(1, n_segments):
        shift = j * hop
        if shift >= L:
            break
        rho = float(np.sum(w[: L - shift] * w[shift:])) / norm
        total += 2.0 * (1.0 - j / n_segments) * rho * rho
    return n_segments / total


def normalised_segments(wavenumber_cm: ArrayLike, segments: ArrayLike, target: float) -> FloatArray:
    """Rescale each segment's spectrum so that its trapezoid integral is *target* (the dof).

    A spectrum normalised to its degrees of freedom is a ratio (power / total
    power).  Evaluating a property on each segment rescaled this way makes the
    segment scatter include the fluctuation of the normalisation itself (the
    delta-method variance of a ratio estimator); with the file's common factor
    instead, that part would be missed.  Segments whose integral is not positive
    are left as they are.

    Parameters
    ----------
    wavenumber_cm : array_like, shape (n,)
        Wavenumber grid, cm^-1.
    segments : array_like, shape (K, n)
        Per-segment densities of states, cm.
    target : float
        Integral each segment should have (degrees of freedom).
    """
    segs = np.asarray(segments, dtype=float)
    integrals = np.trapezoid(segs, np.asarray(wavenumber_cm, dtype=float), axis=-1)
    scale = np.where(integrals > 0, target / np.where(integrals > 0, integrals, 1.0), 1.0)
    return segs * scale[..., None]


def segment_standard_error(per_segment: ArrayLike, effective_count: float) -> FloatArray:
    """Standard error s / sqrt(K_eff) over the segment axis (axis 0); NaN if K < 2."""
    values = np.asarray(per_segment, dtype=float)
    if values.shape[0] < 2 or effective_count <= 0:
        return np.full(values.shape[1:], np.nan)
    return np.std(values, axis=0, ddof=1) / math.sqrt(effective_count)


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


def check_nonnegative(
    wavenumber_cm: ArrayLike, vdos: ArrayLike, vdos_se: ArrayLike, where: str
) -> None:
    """Refuse a spectral density that is negative beyond its noise.

    Noise is the per-bin standard error from the segment scatter; a bin is
    negative beyond noise if S < -(5 standard errors + 1e-9 max|S|) (5 sigma keeps
    false alarms rare over thousands of bins; the 1e-9 term absorbs round-off
    when no standard error is known).

    Raises
    ------
    SpectrumFileError
        Naming *where*, the wavenumber and the value.
    """
    x = np.asarray(wavenumber_cm, dtype=float)
    s = np.asarray(vdos, dtype=float)
    se = np.nan_to_num(np.asarray(vdos_se, dtype=float), nan=0.0)
    limit = -(NEGATIVE_DENSITY_STANDARD_ERRORS * se + 1e-9 * float(np.max(np.abs(s))))
    bad = np.nonzero(s < limit)[0]
    if bad.size:
        i = int(bad[np.argmin(s[bad] - limit[bad])])
        raise SpectrumFileError(
            f"{where}: spectral density is negative beyond noise at {x[i]:.4g} cm-1 "
            f"(S = {s[i]:.3g} cm, standard error {se[i]:.2g} cm; {bad.size} such bins); "
            "a qcorr spectrum is never negative: remake it, or check how it was derived"
        )


# ------------------------------------------------------------------ whole file
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


def segment_effective_count(ds: xr.Dataset) -> float:
    """:func:`effective_segment_count` from a spectrum file's estimator attributes."""
    n = int(ds.sizes.get("segment", 0))
    try:
        return effective_segment_count(
            n, int(ds.attrs["segment_frames"]), float(ds.attrs["segment_overlap"]), str(ds.attrs["taper"])
        )
    except (KeyError, TypeError, ValueError):
        return float(n)


def _group_rows(
    group: GroupSpectrum,
    *,
    system: str,
    temperature_K: float,
    spectrum_temperature_K: float,
    properties: list[HarmonicProperty],
    md_values: dict[tuple[str, str], float],
    k_eff: float,
    check: ZeroFrequencyCheck,
) -> list[TableRow]:
    rows: list[TableRow] = []
    x = group.wavenumber_cm
    extrapolated = not math.isclose(temperature_K, spectrum_temperature_K, rel_tol=1e-12)
    scan_note = (
        f"harmonic extrapolation of the spectrum measured at {spectrum_temperature_K:g} K"
        if extrapolated
        else ""
    )
    segments = normalised_segments(x, group.vdos_segments, float(np.trapezoid(group.vdos, x)))
    for prop in properties:
        cl, qu, co = mode_integrals(x, group.vdos, temperature_K, prop)
        cl_s, qu_s, co_s = mode_integrals(x, segments, temperature_K, prop)
        se = {
            "classical": segment_standard_error(cl_s, k_eff),
            "quantum": segment_standard_error(qu_s, k_eff),
            "correction": segment_standard_error(co_s, k_eff),
        }
        md = md_values.get((group.name, prop.name))
        for basis in BASES:

            def conv(value, prop=prop, basis=basis):
                return float(to_physical(value, prop, temperature_K, basis,
                                         group.molecule_count, group.atom_count))

            notes = [scan_note] if scan_note else []
            row = TableRow(
                system=system, group=group.name, method="harmonic", property=prop.name,
                temperature_K=temperature_K, basis=basis, unit=unit_of(prop, basis),
                correction=conv(co), correction_se=conv(se["correction"]),
            )
            if md is not None and not extrapolated:
                # md value is per mole of molecules in the molar unit
                per_molecule_to_basis = {
                    "per_mole_molecules": 1.0,
                    "per_mole_atoms": group.molecule_count / group.atom_count,
                    "per_system": group.molecule_count / C.avogadro_per_mol,
                }[basis]
                row.classical = md * per_molecule_to_basis
                row.quantum = row.classical + row.correction
                row.quantum_se = row.correction_se
                row.classical_source = "md_value"
                notes.append("quantum = MD value + correction; its standard error excludes the MD value's own")
            elif prop.log_singular and check.diffusing:
                notes.append(
                    f"absolute harmonic {prop.name} refused: diffusing group ({check.describe()}); "
                    "use 'qcorr liquid' (2PT) for absolute values; the correction is valid"
                )
            else:
                row.classical, row.quantum = conv(cl), conv(qu)
                row.classical_se, row.quantum_se = conv(se["classical"]), conv(se["quantum"])
                row.classical_source = "harmonic_model"
                if md is not None:
                    notes.append("MD value not used: it belongs to the spectrum's temperature")
                if check.diffusing:
                    notes.append(
                        "harmonic-model value of a diffusing group; prefer --md-value plus the correction"
                    )
            if np.isnan(se["correction"]):
                notes.append("one segment: no standard error")
            row.note = "; ".join(notes)
            rows.append(row)
    return rows


def _msd_rows(
    group: GroupSpectrum, *, system: str, temperature_K: float, k_eff: float, check: ZeroFrequencyCheck,
    spectrum_temperature_K: float,
) -> list[TableRow]:
    base = {"system": system, "group": group.name, "method": "harmonic",
            "temperature_K": temperature_K, "basis": "atom_mean"}
    if check.diffusing:
        note = (f"refused: diffusing group ({check.describe()}); the harmonic mean-square "
                "displacement needs bound motion")
        return [
            TableRow(property="mean_square_displacement", unit="angstrom^2", note=note, **base),
            TableRow(property="mean_square_displacement_ratio", unit="1", note=note, **base),
        ]
    x = group.wavenumber_cm
    q, c = mean_square_displacement(x, group.vdos, temperature_K, group.group_mass_g_mol)
    segments = normalised_segments(x, group.vdos_segments, float(np.trapezoid(group.vdos, x)))
    q_s, c_s = mean_square_displacement(x, segments, temperature_K, group.group_mass_g_mol)
    q, c = float(q), float(c)
    note = "mass-weighted mean over the group's atoms of <|u|^2> (= 3 <u_x^2>)"
    ratio_note = "quantum / classical mean-square displacement"
    if not math.isclose(temperature_K, spectrum_temperature_K, rel_tol=1e-12):
        scan = f"; harmonic extrapolation of the spectrum measured at {spectrum_temperature_K:g} K"
        note += scan
        ratio_note += scan
    return [
        TableRow(
            property="mean_square_displacement", unit="angstrom^2", classical=c, quantum=q,
            correction=q - c, classical_se=float(segment_standard_error(c_s, k_eff)),
            quantum_se=float(segment_standard_error(q_s, k_eff)),
            correction_se=float(segment_standard_error(q_s - c_s, k_eff)),
            classical_source="harmonic_model", note=note, **base,
        ),
        TableRow(
            property="mean_square_displacement_ratio", unit="1", classical=1.0, quantum=q / c,
            correction=q / c - 1.0, classical_se=0.0,
            quantum_se=float(segment_standard_error(q_s / c_s, k_eff)),
            correction_se=float(segment_standard_error(q_s / c_s, k_eff)),
            classical_source="harmonic_model", note=ratio_note,
            **base,
        ),
    ]


def _frozen_rows(
    group: GroupSpectrum, wavenumbers: list[float], *, system: str, temperature_K: float,
    properties: list[HarmonicProperty],
) -> list[TableRow]:
    rows = []
    listed = ",".join(f"{w:g}" for w in wavenumbers)
    for prop in properties:
        _, qu, co = frozen_bond_integrals(wavenumbers, temperature_K, prop)
        total_q = qu * group.molecule_count  # whole group, in k or kT units
        total_c = co * group.molecule_count
        for basis in BASES:
            rows.append(
                TableRow(
                    system=system, group=group.name, method="frozen_bond_addon", property=prop.name,
                    temperature_K=temperature_K, basis=basis, unit=unit_of(prop, basis),
                    classical=0.0,
                    quantum=float(to_physical(total_q, prop, temperature_K, basis,
                                              group.molecule_count, group.atom_count)),
                    correction=float(to_physical(total_c, prop, temperature_K, basis,
                                                 group.molecule_count, group.atom_count)),
                    classical_source="constrained_in_md",
                    note=(f"harmonic modes at the user-given wavenumbers {listed} cm-1 per molecule "
                          "(constrained in the MD, absent from the spectrum); add to the group's "
                          "harmonic rows; exact given the wavenumbers, no standard error"),
                )
            )
    return rows


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


@dataclass
class PropertyResult:
    """Rows, cautions and per-group diagnostics of :func:`harmonic_properties`."""

    rows: list[TableRow]
    cautions: list[str]
    groups: dict[str, dict]


def harmonic_properties(
    ds: xr.Dataset,
    *,
    system: str,
    path: str | os.PathLike[str] = "<in memory>",
    temperatures_K: list[float] | None = None,
    properties: list[str] | None = None,
    md_values: dict[tuple[str, str], float] | None = None,
    frozen_bond_wavenumbers: dict[str, list[float]] | None = None,
    zero_frequency_threshold: float = DEFAULT_ZERO_FREQUENCY_THRESHOLD,
    include_msd: bool = True,
) -> PropertyResult:
    """All harmonic properties of every group of a spectrum Dataset, as table rows.

    Parameters
    ----------
    ds : xarray.Dataset
        Spectrum following the contract (``qcorr.spectra.spectrum_file.read_spectrum``).
    system : str
        System identifier for the ``system`` column.
    path : str or path-like
        File name, for messages.
    temperatures_K : list of float, optional
        Temperatures, K (> 0); default: the spectrum's ``temperature_K``.  Other
        temperatures are harmonic extrapolations (noted in each row).
    properties : list of str, optional
        Property names (:data:`qcorr.thermo.weights.PROPERTIES`); default all.
    md_values : dict, optional
        ``{(group, property): value}``, the classical MD value per mole of
        molecules in the table's molar unit (J/(mol K) or kJ/mol), at the
        spectrum's temperature.
    frozen_bond_wavenumbers : dict, optional
        ``{group: [wavenumber cm^-1, ...]}`` per molecule.
    zero_frequency_threshold : float
        See :func:`zero_frequency_check`.
    include_msd : bool
        Add mean-square-displacement rows.

    Returns
    -------
    PropertyResult

    Raises
    ------
    ConfigError
        Unknown property or group, temperature <= 0, bad wavenumber.
    SpectrumFileError
        Bad spectrum content (negative density beyond noise, bad counts, bad grid).
    """
    t0 = spectrum_temperature(ds, path)
    temps = [t0] if not temperatures_K else [float(t) for t in temperatures_K]
    for t in temps:
        if not (math.isfinite(t) and t > 0):
            raise ConfigError(f"--temperatures: {t:g} K is not a positive temperature; give values > 0 K")
    props = [get_property(n, "--properties") for n in (properties or list(PROPERTIES))]
    md_values = dict(md_values or {})
    frozen = dict(frozen_bond_wavenumbers or {})
    if not (math.isfinite(zero_frequency_threshold) and zero_frequency_threshold > 0):
        raise ConfigError(
            f"--zero-frequency-threshold: {zero_frequency_threshold} must be a positive fraction"
        )
    groups = spectrum_groups(ds, path)
    names = [g.name for g in groups]
    for (gname, pname), value in md_values.items():
        if gname not in names:
            raise ConfigError(f"--md-value: no group '{gname}' in spectrum file '{path}'; groups: {', '.join(names)}")
        get_property(pname, "--md-value")
        if not math.isfinite(value):
            raise ConfigError(f"--md-value {gname}:{pname}: value {value} is not a finite number")
    for gname, wns in frozen.items():
        if gname not in names:
            raise ConfigError(
                f"--frozen-bond-wavenumbers: no group '{gname}' in spectrum file '{path}'; groups: {', '.join(names)}"
            )
        if not wns or not all(math.isfinite(w) and w > 0 for w in wns):
            raise ConfigError(
                f"--frozen-bond-wavenumbers {gname}: wavenumbers must be positive numbers in cm-1"
            )
    k_eff = segment_effective_count(ds)
    rows: list[TableRow] = []
    cautions: list[str] = []
    info: dict[str, dict] = {}
    if k_eff < 2 and int(ds.sizes.get("segment", 0)) < 2:
        cautions.append("The spectrum has fewer than two segments: no standard errors.")
    cautions += spectrum_diagnostic_cautions(ds)
    for g in groups:
        where = f"spectrum file '{os.fspath(path)}', group '{g.name}'"
        bin_se = segment_standard_error(g.vdos_segments, k_eff)
        check_nonnegative(g.wavenumber_cm, g.vdos, bin_se, where)
        check = zero_frequency_check(
            g.wavenumber_cm, g.vdos, float(bin_se[0]) if bin_se.size else float("nan"),
            zero_frequency_threshold,
        )
        info[g.name] = {
            "diffusing": check.diffusing,
            "zero_frequency_density_cm": check.zero_frequency_density,
            "zero_frequency_se_cm": check.zero_frequency_se,
            "mean_wavenumber_cm": check.mean_wavenumber,
            "zero_frequency_ratio": check.ratio,
            "zero_frequency_threshold": check.threshold,
            "degrees_of_freedom": g.degrees_of_freedom,
            "molecule_count": g.molecule_count,
            "atom_count": g.atom_count,
            "effective_segment_count": k_eff,
        }
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
        if math.isfinite(g.kinetic_temperature_K) and abs(g.kinetic_temperature_K - t0) > 0.02 * t0:
            cautions.append(
                f"Group '{g.name}': kinetic temperature {g.kinetic_temperature_K:.4g} K differs from "
                f"the stated {t0:g} K by more than 2 %; check the degrees of freedom and equilibration."
            )
        for t in temps:
            rows += _group_rows(
                g, system=system, temperature_K=t, spectrum_temperature_K=t0, properties=props,
                md_values=md_values, k_eff=k_eff, check=check,
            )
            if include_msd:
                rows += _msd_rows(g, system=system, temperature_K=t, k_eff=k_eff, check=check,
                                  spectrum_temperature_K=t0)
            if g.name in frozen:
                rows += _frozen_rows(g, frozen[g.name], system=system, temperature_K=t, properties=props)
    if any(not math.isclose(t, t0, rel_tol=1e-12) for t in temps):
        cautions.append(
            f"Temperature scan: the spectrum was measured at {t0:g} K; values at other temperatures "
            "assume it does not change with temperature (harmonic assumption)."
        )
    return PropertyResult(rows=rows, cautions=cautions, groups=info)
