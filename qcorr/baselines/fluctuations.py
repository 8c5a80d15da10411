"""Standard errors of correlated time series, and heat capacities from fluctuations.

Block averaging
---------------
Successive MD samples are correlated, so the naive s/√n underestimates the error of a mean.
:func:`blocked_standard_error` uses the blocking transformation of Flyvbjerg & Petersen [1]_:
the series is halved repeatedly by averaging neighbouring pairs; at level l (n_l blocks) the
estimate is e_l = sqrt(c_l / (n_l − 1)), c_l the variance of the block means, with its own
relative error 1/sqrt(2(n_l − 1)).  e_l rises with l until the blocks are longer than the
correlation time, then stays on a plateau.  We take the estimate of the coarsest level that
still has :data:`MINIMUM_BLOCKS` blocks (our choice: 16 blocks give the estimate a relative
error of 18 %), and call it converged when it agrees with the previous level within two of
its own errors [1]_; otherwise the run is short against its correlation time and the error
is flagged as underestimated.

Fluctuation formulas (molar energies E in kJ per mole of systems, R the gas constant)
-------------------------------------------------------------------------------------
* canonical (NVT), total energy:      C_V = ⟨δE²⟩ / (R T²)
* isothermal–isobaric (NPT), enthalpy H = E + p V:   C_P = ⟨δH²⟩ / (R T²)

  (Allen & Tildesley [2]_ §2.5; common practice), T the thermostat's temperature;
* microcanonical (NVE), kinetic energy K over f quadratic degrees of freedom
  (Lebowitz, Percus & Verlet [3]_):  ⟨δK²⟩ = (f/2)(RT)²(1 − f R / (2 C_V)), so

      C_V = (f R / 2) / (1 − x),   x = 2⟨δK²⟩ / (f (RT)²) = f ⟨δK²⟩ / (2 ⟨K⟩²),

  with the run's own temperature RT = 2⟨K⟩/f.  x < 1 in NVE; x = 1 is the canonical
  variance.  The formula is ill-conditioned as x → 1: the standard error is propagated
  (delta method) and a value whose error is not finite or exceeds the value is refused.

The variance ⟨δX²⟩ is the mean of y_t = (X_t − X̄)² (times n/(n − 1)); its standard error is
the blocked standard error of y (the error of X̄ itself enters at second order).

References
----------
.. [1] H. Flyvbjerg, H. G. Petersen, J. Chem. Phys. 91, 461 (1989). doi:10.1063/1.457480
.. [2] M. P. Allen, D. J. Tildesley, Computer Simulation of Liquids, 2nd ed. (Oxford
   University Press, 2017), §2.5 (section number from memory).
.. [3] J. L. Lebowitz, J. K. Percus, L. Verlet, Phys. Rev. 153, 250 (1967).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from qcorr import constants as C
from qcorr.errors import PhysicsError

#: fewest blocks at the level whose estimate is used (relative error 1/sqrt(30) = 18 %)
MINIMUM_BLOCKS = 16
#: R in kJ/(mol K)
R_KJ = C.gas_constant_J_per_mol_K / 1000.0


@dataclass(frozen=True)
class BlockedError:
    """Result of :func:`blocked_standard_error`.

    Attributes
    ----------
    mean : float
        Mean of the series.
    standard_error : float
        Standard error of the mean at the chosen blocking level (NaN: fewer than 2 samples).
    block_size : int
        Samples per block at that level.
    converged : bool
        The estimate agrees with the previous level's within two of its errors (a plateau).
    estimates : tuple of float
        The estimate of every level, finest first.
    """

    mean: float
    standard_error: float
    block_size: int
    converged: bool
    estimates: tuple[float, ...]


def blocked_standard_error(values: ArrayLike, minimum_blocks: int = MINIMUM_BLOCKS) -> BlockedError:
    """Standard error of the mean of a correlated series by blocking (Flyvbjerg & Petersen 1989).

    Parameters
    ----------
    values : array_like
        The series, equally spaced in time (1-D).
    minimum_blocks : int
        The chosen level is the coarsest with at least this many blocks (level 0 if none).

    Returns
    -------
    BlockedError
    """
    x = np.asarray(values, dtype=float).ravel()
    mean = float(np.mean(x)) if x.size else math.nan
    estimates, sizes, counts = [], [], []
    size = 1
    while x.size >= 2:
        estimates.append(math.sqrt(float(np.var(x)) / (x.size - 1)))
        sizes.append(size)
        counts.append(x.size)
        half = x.size // 2
        x = 0.5 * (x[0:2 * half:2] + x[1:2 * half:2])
        size *= 2
    if not estimates:
        return BlockedError(mean, math.nan, 1, False, ())
    usable = [i for i, n in enumerate(counts) if n >= minimum_blocks] or [0]
    level = usable[-1]
    error = estimates[level] / math.sqrt(2.0 * (counts[level] - 1))
    converged = level > 0 and abs(estimates[level] - estimates[level - 1]) <= 2.0 * error
    return BlockedError(mean, estimates[level], sizes[level], converged, tuple(estimates))


@dataclass(frozen=True)
class Fluctuation:
    """A variance of a series with its standard error (units: the series' unit squared)."""

    mean: float
    mean_se: float
    variance: float
    variance_se: float
    converged: bool


def fluctuation(values: ArrayLike) -> Fluctuation:
    """Mean and variance of a correlated series, each with a blocked standard error."""
    x = np.asarray(values, dtype=float).ravel()
    n = x.size
    if n < 2:
        raise PhysicsError(f"a fluctuation needs at least 2 samples, got {n}")
    m = blocked_standard_error(x)
    y = (x - m.mean) ** 2 * (n / (n - 1.0))
    v = blocked_standard_error(y)
    return Fluctuation(m.mean, m.standard_error, v.mean, v.standard_error, m.converged and v.converged)


@dataclass(frozen=True)
class HeatCapacity:
    """A heat capacity from fluctuations, J/(mol K) per mole of systems, with its standard error."""

    value: float
    standard_error: float
    converged: bool
    formula: str


def canonical_heat_capacity(energy_kJ_per_mol: ArrayLike, temperature_K: float) -> HeatCapacity:
    """C_V = ⟨δE²⟩/(R T²) of a canonical run (or C_P from the enthalpy of an NPT run).

    Parameters
    ----------
    energy_kJ_per_mol : array_like
        Total energy (or enthalpy E + pV) of the whole system per sample, kJ per mole of systems.
    temperature_K : float
        The thermostat's temperature, K.

    Returns
    -------
    HeatCapacity
        J/(mol K) per mole of systems.
    """
    f = fluctuation(energy_kJ_per_mol)
    scale = 1000.0 / (R_KJ * temperature_K**2)  # (kJ/mol)^2 -> J/(mol K)
    return HeatCapacity(f.variance * scale, f.variance_se * scale, f.converged,
                        "<dX^2>/(R T^2) (canonical fluctuation formula)")


@dataclass(frozen=True)
class MicrocanonicalHeatCapacity(HeatCapacity):
    """The Lebowitz–Percus–Verlet C_V with the quantities the NVE checks need.

    Attributes
    ----------
    variance_ratio, variance_ratio_se : float
        x = ⟨δK²⟩ / ((f/2)(RT)²) and its standard error (x = 1: canonical).
    temperature_K, temperature_se_K : float
        The run's kinetic temperature 2⟨K⟩/(f R) and its standard error.
    """

    variance_ratio: float = math.nan
    variance_ratio_se: float = math.nan
    temperature_K: float = math.nan
    temperature_se_K: float = math.nan


def microcanonical_heat_capacity(
    kinetic_kJ_per_mol: ArrayLike, degrees_of_freedom: float, *, where: str = "kinetic energy"
) -> MicrocanonicalHeatCapacity:
    """C_V of an NVE run from its kinetic-energy fluctuations (Lebowitz, Percus, Verlet 1967).

    Parameters
    ----------
    kinetic_kJ_per_mol : array_like
        Kinetic energy of the whole system per sample, kJ per mole of systems.
    degrees_of_freedom : float
        f, the quadratic kinetic degrees of freedom (3N − constraints − 3 with the centre of
        mass fixed).
    where : str
        Names the data in error messages.

    Returns
    -------
    MicrocanonicalHeatCapacity
        J/(mol K) per mole of systems.

    Raises
    ------
    PhysicsError
        The variance is not below the canonical one (x ≥ 1 within three standard errors: the
        run is not microcanonical), or the propagated standard error is not finite or
        exceeds the value (the formula is ill-conditioned for this run).
    """
    f_dof = float(degrees_of_freedom)
    if not f_dof > 0:
        raise PhysicsError(f"{where}: degrees of freedom {f_dof} must be positive")
    fl = fluctuation(kinetic_kJ_per_mol)
    x = f_dof * fl.variance / (2.0 * fl.mean**2)
    rel = math.hypot(fl.variance_se / fl.variance, 2.0 * fl.mean_se / fl.mean) if fl.variance > 0 else math.inf
    x_se = x * rel
    temperature = 2.0 * fl.mean / (f_dof * R_KJ)
    t_se = 2.0 * fl.mean_se / (f_dof * R_KJ)
    if x >= 1.0 - 3.0 * x_se:
        raise PhysicsError(
            f"{where}: the kinetic-energy variance is {x:.3f} ± {x_se:.3f} times the canonical "
            "(f/2)(kT)^2, not clearly below it as in a microcanonical (NVE) run: the run is "
            "thermostatted or too short; for a thermostatted run declare --ensemble nvt (C_V from the "
            "total-energy fluctuations of an energy file)")
    value = 0.5 * f_dof * C.gas_constant_J_per_mol_K / (1.0 - x)
    se = value * x_se / (1.0 - x)
    if not (math.isfinite(se) and se <= value):
        raise PhysicsError(
            f"{where}: the microcanonical heat capacity {value:.4g} J/(mol K) has a standard error "
            f"{se:.3g} larger than itself (kinetic-energy variance ratio {x:.3f} ± {x_se:.3f}); the "
            "Lebowitz-Percus-Verlet formula is ill-conditioned for this run: use a longer run")
    return MicrocanonicalHeatCapacity(
        value, se, fl.converged,
        "(f R/2)/(1 - f<dK^2>/(2<K>^2)) (Lebowitz-Percus-Verlet, microcanonical)",
        variance_ratio=x, variance_ratio_se=x_se, temperature_K=temperature, temperature_se_K=t_se,
    )


def kinetic_variance_ratio(kinetic_kJ_per_mol: ArrayLike, degrees_of_freedom: float) -> tuple[float, float]:
    """x = f⟨δK²⟩/(2⟨K⟩²) and its standard error: 1 in any canonical run (the kinetic energy of
    f quadratic degrees of freedom is Gamma(f/2, kT) whatever the potential), below 1 in NVE."""
    fl = fluctuation(kinetic_kJ_per_mol)
    x = float(degrees_of_freedom) * fl.variance / (2.0 * fl.mean**2)
    rel = math.hypot(fl.variance_se / fl.variance, 2.0 * fl.mean_se / fl.mean) if fl.variance > 0 else math.inf
    return x, x * rel


@dataclass(frozen=True)
class Drift:
    """Means of the first and second half of a series and how many standard errors apart."""

    first_half: float
    second_half: float
    standard_errors_apart: float


#: halves further apart than this many combined standard errors are a drift (our choice:
#: a normal deviate beyond 4 has probability 6e-5, so a stationary run is almost never refused)
DRIFT_STANDARD_ERRORS = 4.0
#: blocks of the standard error in the drift test (our choice; relative error 1/sqrt(14) = 27 %)
DRIFT_MINIMUM_BLOCKS = 8


def half_drift(values: ArrayLike) -> Drift:
    """Compare the means of the two halves of a series.

    For a stationary series each half's mean has √2 times the standard error of the whole
    series' mean, so their difference has twice it.  That standard error is the blocked one of
    the whole series with each half's own mean subtracted (a step between the halves does not
    inflate it), at the coarsest level with at least :data:`DRIFT_MINIMUM_BLOCKS` blocks: the
    test must not take the slow energy exchange of a weakly coupled thermostat (correlation
    times of tens of ps, seen in 300-ps Nosé–Hoover runs of water) for a drift.
    """
    x = np.asarray(values, dtype=float).ravel()
    half = x.size // 2
    first, second = float(np.mean(x[:half])), float(np.mean(x[half:2 * half]))
    residual = np.concatenate([x[:half] - first, x[half:2 * half] - second])
    se = 2.0 * blocked_standard_error(residual, DRIFT_MINIMUM_BLOCKS).standard_error
    apart = abs(first - second) / se if se > 0 else (0.0 if first == second else math.inf)
    return Drift(first, second, apart)
