"""Harmonic weighting functions W(u) of the reduced frequency u = h nu / (k T).

One harmonic mode of frequency nu contributes, at temperature T,

========================  ================  ======================================  ==========
property                  quantum W^q(u)    classical W^c(u)                        multiplier
========================  ================  ======================================  ==========
heat_capacity             u^2 e^u/(e^u-1)^2  1                                       k
energy (with ZPE)         (u/2) coth(u/2)   1                                       k T
thermal_energy (no ZPE)   u/(e^u-1)         1                                       k T
zero_point_energy         u/2               0                                       k T
entropy                   u/(e^u-1)         1 - ln u                                k
                          - ln(1-e^-u)
helmholtz_free_energy     ln(2 sinh(u/2))   ln u                                    k T
========================  ================  ======================================  ==========

The classical oscillator uses the phase-space cell h, so quantum and classical
entropies and free energies agree as u -> 0.  The corrections are
``W^q - W^c``; applied to a vibrational density of states they are the
quantum corrections of Berens, Mackay, White and Wilson [1]_.  The quantum
forms are the harmonic-oscillator results found in any statistical-mechanics
text, e.g. McQuarrie [2]_, chapter 8.

Numerics
--------
Every function is vectorised, never overflows for u in [0, 1e4], and has a
relative error below 1e-14 wherever its value is a normal double (the tests
compare against 40-digit mpmath on u in [1e-8, 1e3]):

* no ``exp(u)`` is ever formed: ``u/(e^u-1) = u e^-u / (-expm1(-u))``;
  ``ln(1-e^-u)`` is ``log(-expm1(-u))`` for u <= ln 2 and
  ``log1p(-exp(-u))`` above (Maechler [3]_);
* for u > 50 the exponentially small quantities are formed as
  ``(prefactor * exp(-u/2)) * exp(-u/2)`` so they keep full precision down to
  the smallest normal double (~1e-308; below that they lose precision
  gradually and underflow to 0);
* for u < 1 the corrections, which vanish like u^2, are summed from their
  Bernoulli-number series (radius of convergence 2 pi), e.g.
  ``(u/2) coth(u/2) = sum_n B_2n u^2n / (2n)!`` (Abramowitz & Stegun [4]_,
  4.5.67), so there is no cancellation;
* the free energy ``ln(2 sinh(u/2))`` has a root at u0 = 2 asinh(1/2); near it
  the argument is expanded about u0 so the result keeps full relative
  precision; likewise ``1 - ln u`` near u = e.

At u = 0 exactly: W^q_E = W^q_Cv = 1, every correction is 0, and the
absolute entropy and free-energy weights are infinite (log-singular); the
integrals in :mod:`qcorr.thermo.harmonic` never evaluate them there.

Cautions: these are harmonic weights.  Applied to a classical MD spectrum they
treat every spectral component as an independent harmonic mode; anharmonic,
diffusive or tunnelling motion is not described correctly.  Results support,
not replace, validated practice.

References
----------
.. [1] P. H. Berens, D. H. J. Mackay, G. M. White, K. R. Wilson, "Thermodynamics
   and quantum corrections from molecular dynamics for liquid water",
   J. Chem. Phys. 79, 2375 (1983).
.. [2] D. A. McQuarrie, Statistical Mechanics (Harper & Row, 1976; University
   Science Books, 2000), ch. 8.
.. [3] M. Maechler, "Accurately computing log(1 - exp(-|a|))", R package Rmpfr
   vignette (2012).
.. [4] M. Abramowitz, I. A. Stegun, Handbook of Mathematical Functions (NBS, 1964).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from fractions import Fraction

import numpy as np
from numpy.typing import ArrayLike, NDArray

from qcorr import units
from qcorr.errors import ConfigError

FloatArray = NDArray[np.float64]

#: below this u the corrections are summed from their Bernoulli series
_SERIES_LIMIT = 1.0
#: above this u exponentially small terms are formed as exp(log(prefactor) - u)
_LARGE_U = 50.0
#: number of series terms: (1/(2 pi))^(2*13) ~ 1e-21, ample for u < 1
_SERIES_TERMS = 13


def _bernoulli_even(n_terms: int) -> list[Fraction]:
    """Exact B_2, B_4, ..., B_2n (Akiyama-Tanigawa algorithm)."""
    top = 2 * n_terms
    a = [Fraction(0)] * (top + 1)
    numbers = []
    for m in range(top + 1):
        a[m] = Fraction(1, m + 1)
        for j in range(m, 0, -1):
            a[j - 1] = j * (a[j - 1] - a[j])
        numbers.append(a[0])  # B_m with B_1 = +1/2
    return [numbers[2 * n] for n in range(1, n_terms + 1)]


_B = _bernoulli_even(_SERIES_TERMS)
# (u/2)coth(u/2) - 1 = sum_n B_2n u^2n/(2n)!
_C_ENERGY = np.array([float(b / math.factorial(2 * n)) for n, b in enumerate(_B, 1)])
# ln(sinh(u/2)/(u/2)) = sum_n B_2n u^2n / (2n (2n)!)
_C_FREE = np.array([float(b / (2 * n * math.factorial(2 * n))) for n, b in enumerate(_B, 1)])
# entropy correction = energy - free energy
_C_ENTROPY = np.array(
    [float(b * Fraction(2 * n - 1, 2 * n) / math.factorial(2 * n)) for n, b in enumerate(_B, 1)]
)
# heat-capacity weight - 1 = sum_n (1 - 2n) B_2n u^2n/(2n)!
_C_HEAT = np.array([float(b * (1 - 2 * n) / math.factorial(2 * n)) for n, b in enumerate(_B, 1)])

#: root of ln(2 sinh(u/2)): u0 = 2 asinh(1/2) = 2 ln((1 + sqrt 5)/2), as a double-double
_FREE_ROOT_HI = 0.9624236501192069
_FREE_ROOT_LO = -4.651563402692547e-17
#: e as a double-double
_E_HI = 2.718281828459045
_E_LO = 1.4456468917292502e-16


def _as_u(u: ArrayLike) -> FloatArray:
    arr = np.asarray(u, dtype=float)
    if np.any(arr < 0) or np.any(np.isnan(arr)):
        raise ValueError("reduced frequency u = h nu / (k T) must be >= 0 and not NaN")
    return arr


def _series(u: FloatArray, coefficients: FloatArray) -> FloatArray:
    """sum_n c_n u^(2n), n = 1..len(c), by Horner's rule in u^2."""
    u2 = u * u
    acc = np.zeros_like(u)
    for c in coefficients[::-1]:
        acc = acc * u2 + c
    return acc * u2


def _log1mexp(u: FloatArray) -> FloatArray:
    """ln(1 - e^-u) for u > 0 without cancellation (Maechler 2012)."""
    out = np.empty_like(u)
    small = u <= math.log(2.0)
    with np.errstate(divide="ignore"):
        out[small] = np.log(-np.expm1(-u[small]))
    out[~small] = np.log1p(-np.exp(-u[~small]))
    return out


def _times_exp_minus(prefactor: FloatArray, u: FloatArray) -> FloatArray:
    """prefactor * e^-u, as (prefactor e^-u/2) e^-u/2 so nothing is subnormal too early."""
    with np.errstate(under="ignore"):  # values below ~5e-324 are 0, as they should be
        half = np.exp(-0.5 * u)
        return (prefactor * half) * half


# ---------------------------------------------------------------- thermal energy
def thermal_energy_quantum(u: ArrayLike) -> FloatArray:
    """Quantum thermal energy weight u/(e^u - 1) (zero-point energy excluded); x kT.

    Parameters
    ----------
    u : array_like
        Reduced frequency h nu / (k T) >= 0 (dimensionless).

    Returns
    -------
    ndarray
        Dimensionless weight; 1 at u = 0.
    """
    u = _as_u(u)
    out = np.ones_like(u)
    mid = (u > 0) & (u <= _LARGE_U)
    big = u > _LARGE_U
    out[mid] = u[mid] * np.exp(-u[mid]) / (-np.expm1(-u[mid]))
    # u e^-u / (1 - e^-u) = u e^-u (1 + e^-u + ...); e^-50 ~ 2e-22 is below round-off
    out[big] = _times_exp_minus(u[big], u[big])
    return out


def thermal_energy_classical(u: ArrayLike) -> FloatArray:
    """Classical thermal energy weight, 1 (equipartition); x kT."""
    return np.ones_like(_as_u(u))


def thermal_energy_correction(u: ArrayLike) -> FloatArray:
    """u/(e^u - 1) - 1 (negative: the quantum oscillator holds less thermal energy); x kT."""
    u = _as_u(u)
    return energy_correction(u) - 0.5 * u


# ---------------------------------------------------------------- zero-point energy
def zero_point_energy_quantum(u: ArrayLike) -> FloatArray:
    """Zero-point energy weight u/2 (= h nu / 2 kT); x kT."""
    return 0.5 * _as_u(u)


def zero_point_energy_classical(u: ArrayLike) -> FloatArray:
    """A classical oscillator has no zero-point energy: 0; x kT."""
    return np.zeros_like(_as_u(u))


def zero_point_energy_correction(u: ArrayLike) -> FloatArray:
    """u/2; x kT."""
    return 0.5 * _as_u(u)


# ---------------------------------------------------------------- energy
def energy_quantum(u: ArrayLike) -> FloatArray:
    """Quantum energy weight (u/2) coth(u/2) = u/2 + u/(e^u - 1), zero point included; x kT."""
    u = _as_u(u)
    return 0.5 * u + thermal_energy_quantum(u)


def energy_classical(u: ArrayLike) -> FloatArray:
    """Classical energy weight, 1 (kinetic + potential of a harmonic mode); x kT."""
    return np.ones_like(_as_u(u))


def energy_correction(u: ArrayLike) -> FloatArray:
    """(u/2) coth(u/2) - 1 >= 0; x kT.  Series below u = 1 (Berens et al. 1983).

    Examples
    --------
    >>> round(float(energy_correction(1.0)), 15)  # (1/2) coth(1/2) - 1 = 0.081976706869326424...
    0.081976706869326
    >>> round(float(energy_correction(1e-6) * 12e12), 12)  # -> u^2/12 as u -> 0
    1.0
    """
    u = _as_u(u)
    out = np.empty_like(u)
    small = u < _SERIES_LIMIT
    out[small] = _series(u[small], _C_ENERGY)
    out[~small] = 0.5 * u[~small] + thermal_energy_quantum(u[~small]) - 1.0
    return out


# ---------------------------------------------------------------- heat capacity
def heat_capacity_quantum(u: ArrayLike) -> FloatArray:
    """Quantum heat-capacity weight u^2 e^u / (e^u - 1)^2 = [(u/2)/sinh(u/2)]^2; x k.

    Examples
    --------
    >>> round(float(heat_capacity_quantum(2.0)), 12)  # Einstein function at theta_E/T = 2
    0.724061660966
    """
    u = _as_u(u)
    out = np.empty_like(u)
    small = u < _SERIES_LIMIT
    big = u > _LARGE_U
    mid = ~small & ~big
    out[small] = 1.0 + _series(u[small], _C_HEAT)
    em = np.expm1(-u[mid])
    out[mid] = u[mid] ** 2 * np.exp(-u[mid]) / (em * em)
    # (u e^-u/2)^2: u^2 itself overflows beyond u ~ 1e154 (and inf x 0 is NaN)
    with np.errstate(under="ignore"):
        root = u[big] * np.exp(-0.5 * u[big])
    out[big] = root * root
    return out


def heat_capacity_classical(u: ArrayLike) -> FloatArray:
    """Classical heat-capacity weight, 1 (Dulong-Petit per mode); x k."""
    return np.ones_like(_as_u(u))


def heat_capacity_correction(u: ArrayLike) -> FloatArray:
    """u^2 e^u/(e^u - 1)^2 - 1 <= 0; x k."""
    u = _as_u(u)
    out = np.empty_like(u)
    small = u < _SERIES_LIMIT
    out[small] = _series(u[small], _C_HEAT)
    out[~small] = heat_capacity_quantum(u[~small]) - 1.0
    return out


# ---------------------------------------------------------------- Helmholtz free energy
def helmholtz_free_energy_quantum(u: ArrayLike) -> FloatArray:
    """Quantum Helmholtz free-energy weight ln(2 sinh(u/2)) = u/2 + ln(1 - e^-u); x kT.

    -inf at u = 0 (log-singular).  Near its root u0 = 2 asinh(1/2) it is
    evaluated as ``log1p(2 sinh^2(d/4) + sqrt(5) sinh(d/2))`` with
    d = u - u0, an exact rearrangement that keeps full relative precision.
    """
    u = _as_u(u)
    out = np.empty_like(u)
    near = (u > 0.5) & (u < 2.0)
    far = ~near
    zero = u == 0
    out[zero] = -np.inf
    rest = far & ~zero
    out[rest] = 0.5 * u[rest] + _log1mexp(u[rest])
    d = (u[near] - _FREE_ROOT_HI) - _FREE_ROOT_LO
    out[near] = np.log1p(2.0 * np.sinh(0.25 * d) ** 2 + math.sqrt(5.0) * np.sinh(0.5 * d))
    return out


def helmholtz_free_energy_classical(u: ArrayLike) -> FloatArray:
    """Classical Helmholtz free-energy weight ln u (phase-space cell h); x kT."""
    u = _as_u(u)
    with np.errstate(divide="ignore"):
        return np.log(u)


def helmholtz_free_energy_correction(u: ArrayLike) -> FloatArray:
    """ln[sinh(u/2)/(u/2)] >= 0; x kT.  Series below u = 1 (Berens et al. 1983)."""
    u = _as_u(u)
    out = np.empty_like(u)
    small = u < _SERIES_LIMIT
    big = ~small
    out[small] = _series(u[small], _C_FREE)
    out[big] = 0.5 * u[big] + _log1mexp(u[big]) - np.log(u[big])
    return out


# ---------------------------------------------------------------- entropy
def entropy_quantum(u: ArrayLike) -> FloatArray:
    """Quantum entropy weight u/(e^u - 1) - ln(1 - e^-u); x k.  +inf at u = 0."""
    u = _as_u(u)
    out = np.empty_like(u)
    big = u > _LARGE_U
    pos = (u > 0) & ~big
    out[u == 0] = np.inf
    out[pos] = thermal_energy_quantum(u[pos]) - _log1mexp(u[pos])
    # (1 + u) e^-u + O(u e^-2u); e^-50 relative is below round-off
    out[big] = _times_exp_minus(1.0 + u[big], u[big])
    return out


def entropy_classical(u: ArrayLike) -> FloatArray:
    """Classical entropy weight 1 - ln u (phase-space cell h); x k.  +inf at u = 0.

    Near its root u = e it is evaluated as ``-log1p((u - e)/e)`` with u - e
    formed in double-double, which keeps full relative precision.
    """
    u = _as_u(u)
    out = np.empty_like(u)
    near = (u > 1.5) & (u < 5.0)
    with np.errstate(divide="ignore"):
        out[~near] = 1.0 - np.log(u[~near])
    out[near] = -np.log1p(((u[near] - _E_HI) - _E_LO) / _E_HI)
    return out


def entropy_correction(u: ArrayLike) -> FloatArray:
    """u/(e^u - 1) - ln(1 - e^-u) - 1 + ln u >= 0; x k.  Series below u = 1.

    Examples
    --------
    >>> round(float(entropy_correction(1.0)), 13)
    0.0406518522564
    """
    u = _as_u(u)
    out = np.empty_like(u)
    small = u < _SERIES_LIMIT
    big = ~small
    out[small] = _series(u[small], _C_ENTROPY)
    out[big] = entropy_quantum(u[big]) - 1.0 + np.log(u[big])
    return out


# ---------------------------------------------------------------- registry
WeightFunction = Callable[[ArrayLike], FloatArray]


@dataclass(frozen=True)
class HarmonicProperty:
    """One thermodynamic property of a set of harmonic modes.

    Attributes
    ----------
    name : str
        Property name used in tables and on the command line.
    description : str
        One line for humans.
    quantum, classical, correction : callable
        Weighting functions of u (see the module docstring).
    times_kT : bool
        True if the weight multiplies kT (energies, kJ/mol), False if it
        multiplies k (heat capacity, entropy, J/(mol K)).
    log_singular : bool
        True if the absolute weights diverge like ln u at nu -> 0 (entropy,
        free energy): the absolute harmonic value is then undefined for a
        spectrum with S(0) > 0 (a diffusing group).
    """

    name: str
    description: str
    quantum: WeightFunction
    classical: WeightFunction
    correction: WeightFunction
    times_kT: bool
    log_singular: bool

    @property
    def molar_unit(self) -> str:
        """Unit of the value per mole (of molecules or atoms)."""
        return units.MOLAR_ENERGY if self.times_kT else units.MOLAR_HEAT_CAPACITY

    @property
    def system_unit(self) -> str:
        """Unit of the value for the whole simulated system."""
        return units.SYSTEM_ENERGY if self.times_kT else units.SYSTEM_HEAT_CAPACITY


PROPERTIES: dict[str, HarmonicProperty] = {
    p.name: p
    for p in (
        HarmonicProperty(
            "heat_capacity",
            "constant-volume heat capacity Cv",
            heat_capacity_quantum,
            heat_capacity_classical,
            heat_capacity_correction,
            times_kT=False,
            log_singular=False,
        ),
        HarmonicProperty(
            "energy",
            "vibrational energy E, zero-point energy included",
            energy_quantum,
            energy_classical,
            energy_correction,
            times_kT=True,
            log_singular=False,
        ),
        HarmonicProperty(
            "thermal_energy",
            "vibrational energy E - ZPE, zero-point energy excluded",
            thermal_energy_quantum,
            thermal_energy_classical,
            thermal_energy_correction,
            times_kT=True,
            log_singular=False,
        ),
        HarmonicProperty(
            "zero_point_energy",
            "zero-point energy ZPE = sum h nu / 2",
            zero_point_energy_quantum,
            zero_point_energy_classical,
            zero_point_energy_correction,
            times_kT=True,
            log_singular=False,
        ),
        HarmonicProperty(
            "entropy",
            "entropy S",
            entropy_quantum,
            entropy_classical,
            entropy_correction,
            times_kT=False,
            log_singular=True,
        ),
        HarmonicProperty(
            "helmholtz_free_energy",
            "Helmholtz free energy A = E - TS",
            helmholtz_free_energy_quantum,
            helmholtz_free_energy_classical,
            helmholtz_free_energy_correction,
            times_kT=True,
            log_singular=True,
        ),
    )
}


def property_names() -> list[str]:
    """Names of all harmonic properties, in table order."""
    return list(PROPERTIES)


def get_property(name: str, option: str = "property") -> HarmonicProperty:
    """Look up a property by name.

    Parameters
    ----------
    name : str
        Property name, e.g. ``"heat_capacity"``.
    option : str
        Where the name came from (command-line option), for the error message.

    Raises
    ------
    ConfigError
        If the name is unknown; the message lists the valid names.
    """
    try:
        return PROPERTIES[name]
    except KeyError:
        raise ConfigError(
            f"{option}: unknown property '{name}'; valid names are: {', '.join(PROPERTIES)}"
        ) from None
