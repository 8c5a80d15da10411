"""Integrals of a vibrational spectrum against the harmonic weighting functions.

Given the vibrational density of states S(nu~) of an atom group (per unit
wavenumber, integral = degrees of freedom; the spectrum-file contract in
``DEVELOPERS.md``), every property X of :mod:`qcorr.thermo.weights` is

    X = m * integral_0^inf S(nu~) W_X(u) dnu~,   u = h c nu~ / (k T),

with m = k for heat capacity and entropy and m = kT for energies
(Berens, Mackay, White, Wilson [1]_).  The quantum correction
dX = m * integral S (W^q - W^c) dnu~ is added to a classical MD value,
X_q = X_MD + dX, when the user supplies X_MD; the absolute harmonic values
(classical and quantum) describe a solid, where S(0) = 0.  This module also
converts "modes x weight" into the units of the property table's bases.

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

References
----------
.. [1] P. H. Berens, D. H. J. Mackay, G. M. White, K. R. Wilson, J. Chem. Phys. 79,
   2375 (1983).
.. [2] P. J. Davis, P. Rabinowitz, Methods of Numerical Integration, 2nd ed.
   (Academic Press, 1984), section 2.5 (product integration).
.. [3] A. A. Maradudin, E. W. Montroll, G. H. Weiss, I. P. Ipatova, Theory of Lattice
   Dynamics in the Harmonic Approximation, 2nd ed. (Academic Press, 1971):
   mean-square displacement of a harmonic crystal.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike, NDArray

from qcorr import constants as C
from qcorr.errors import ConfigError
from qcorr.outputs.table import BASES
from qcorr.thermo.weights import HarmonicProperty, energy_quantum

FloatArray = NDArray[np.float64]


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
    <x^2>_cl = kT / (m (2 pi nu)^2) (Maradudin et al. [3]_).  Summed over the
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
