"""The rigid rotor: rotational temperatures and the classical rigid-rotor entropy.

Used for the gas-like part of the rotational density of states in two-phase
thermodynamics (Lin, Maiti, Goddard [1]_); formulas from McQuarrie [2]_.

References
----------
.. [1] S.-T. Lin, P. K. Maiti, W. A. Goddard III, J. Phys. Chem. B 114, 8191 (2010).
   doi:10.1021/jp103120q
.. [2] D. A. McQuarrie, Statistical Mechanics (University Science Books, 2000), Ch. 8.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike, NDArray

from qcorr import constants as C
from qcorr.errors import ConfigError, PhysicsError


def rotational_temperatures(principal_moments_u_A2: ArrayLike) -> NDArray[np.float64]:
    """Rotational temperatures Θ = h²/(8π² I k) in K from moments in u Å²."""
    moments = np.asarray(principal_moments_u_A2, dtype=float) * C.atomic_mass_kg * C.angstrom_m**2
    return C.planck_J_s**2 / (8.0 * math.pi**2 * moments * C.boltzmann_J_per_K)


def rigid_rotor_entropy(
    temperature_K: float, rotational_temperatures_K: ArrayLike, symmetry_number: int
) -> float:
    """Classical (high-temperature) rigid-rotor entropy per molecule in units of k.

    Nonlinear (three Θ): ``S/k = ln[(π^{1/2}/σ) (T³/(Θ_A Θ_B Θ_C))^{1/2}] + 3/2``;
    linear (one Θ): ``S/k = ln[T/(σ Θ)] + 1`` (McQuarrie, Statistical Mechanics,
    2000, Ch. 8 [2]_; as used for the rotational gas part in [1]_).
    """
    theta = np.atleast_1d(np.asarray(rotational_temperatures_K, dtype=float))
    if symmetry_number < 1:
        raise ConfigError(f"symmetry number must be an integer >= 1; got {symmetry_number}")
    if np.any(~np.isfinite(theta)) or np.any(theta <= 0):
        raise PhysicsError(f"rotational temperatures must be positive; got {theta.tolist()}")
    if theta.size == 1:
        return math.log(temperature_K / (symmetry_number * theta[0])) + 1.0
    if theta.size == 3:
        return (
            math.log(math.sqrt(math.pi) / symmetry_number * math.sqrt(temperature_K**3 / np.prod(theta)))
            + 1.5
        )
    raise PhysicsError(f"need 1 (linear) or 3 (nonlinear) rotational temperatures; got {theta.size}")
