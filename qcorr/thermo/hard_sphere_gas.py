"""The gas-like part of two-phase thermodynamics: diffusivity, fluidicity, hard-sphere gas.

A diffusive density of states (DoS) with S(0) > 0 holds a gas-like part, modelled
as a hard-sphere gas whose velocity autocorrelation decays exponentially (Enskog);
its share of the degrees of freedom, the fluidicity f, solves the universal
equation of Lin, Blanco and Goddard [1]_ in the normalised diffusivity Δ.  This
module holds those pieces and the entropy of the hard-sphere gas
(Carnahan–Starling [2]_), plus the Yeh–Hummer finite-size correction of the
self-diffusion coefficient [3]_.  Conventions as in :mod:`qcorr.thermo.twophase`:
DoS per unit wavenumber in cm; entropies per particle in units of k.

References
----------
.. [1] S.-T. Lin, M. Blanco, W. A. Goddard III, J. Chem. Phys. 119, 11792 (2003).
   doi:10.1063/1.1624057
.. [2] N. F. Carnahan, K. E. Starling, "Equation of state for nonattracting
   rigid spheres", J. Chem. Phys. 51, 635 (1969). doi:10.1063/1.1672048
.. [3] I.-C. Yeh, G. Hummer, J. Phys. Chem. B 108, 15873 (2004). doi:10.1021/jp0477147
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.optimize import brentq

from qcorr import constants as C
from qcorr.errors import ConfigError, PhysicsError

#: forms of the hard-sphere entropy (see :func:`hard_sphere_entropy`)
HARD_SPHERE_FORMS = ("published", "constant-volume")
#: volume per gas particle: V/(fN) or V/N
GAS_VOLUME_CHOICES = ("gas-particles", "all-particles")


def self_diffusion_from_zero_frequency(
    zero_frequency_dos_cm: float, molecule_count: float, temperature_K: float, mass_u: float
) -> float:
    """Self-diffusion coefficient D (m²/s) from the translational DoS at ν = 0.

    Green–Kubo gives ``S(0) = 12 m N D / kT`` for the DoS per unit frequency
    (``methods.md`` §2.5); per unit wavenumber ``S̃(0) = c S(0)``.
    """
    s0_s = zero_frequency_dos_cm / C.speed_of_light_cm_per_s
    mass_kg = mass_u * C.atomic_mass_kg
    return s0_s * C.boltzmann_J_per_K * temperature_K / (12.0 * mass_kg * molecule_count)


def zero_frequency_from_self_diffusion(
    self_diffusion_m2_per_s: float, molecule_count: float, temperature_K: float, mass_u: float
) -> float:
    """Translational DoS at ν = 0 per unit wavenumber (cm) of N molecules with self-diffusion D.

    The inverse of :func:`self_diffusion_from_zero_frequency`: Green–Kubo
    ``S̃(0) = c · 12 m N D / kT`` (Lin, Blanco, Goddard [1]_), with D in m²/s, T in K,
    the molecular mass m in u and c in cm/s.
    """
    return (self_diffusion_m2_per_s * 12.0 * mass_u * C.atomic_mass_kg * molecule_count
            / (C.boltzmann_J_per_K * temperature_K) * C.speed_of_light_cm_per_s)


def normalized_diffusivity(
    zero_frequency_dos_cm: float,
    molecule_count: float,
    temperature_K: float,
    mass_u: float,
    volume_A3: float,
) -> float:
    """Normalised diffusivity Δ of Lin, Blanco, Goddard [1]_ (dimensionless).

    ``Δ = (2 S(0) / 9N) (π k T / m)^{1/2} (N/V)^{1/3} (6/π)^{2/3}`` with S(0) the
    DoS per unit frequency (s) of N particles of mass m in volume V.  Δ is the
    ratio of the self-diffusivity to the dilute hard-sphere diffusivity at the
    diameter where the packing fraction of the whole density is 1.

    Parameters
    ----------
    zero_frequency_dos_cm : float
        S̃(0), DoS per unit wavenumber at ν = 0, in cm (integral of the DoS = 3N
        for translation).
    molecule_count : float
        N.
    temperature_K, mass_u, volume_A3 : float
        T in K, particle mass in u (g/mol), volume in Å³.
    """
    for name, value in (
        ("molecule count", molecule_count),
        ("temperature (K)", temperature_K),
        ("mass (u)", mass_u),
        ("volume (A^3)", volume_A3),
    ):
        if not (value > 0 and math.isfinite(value)):
            raise PhysicsError(f"2PT needs a positive {name}; got {value}")
    s0_s = zero_frequency_dos_cm / C.speed_of_light_cm_per_s
    mass_kg = mass_u * C.atomic_mass_kg
    density = molecule_count / (volume_A3 * C.angstrom_m**3)
    return (
        (2.0 * s0_s / (9.0 * molecule_count))
        * math.sqrt(math.pi * C.boltzmann_J_per_K * temperature_K / mass_kg)
        * density ** (1.0 / 3.0)
        * (6.0 / math.pi) ** (2.0 / 3.0)
    )


def fluidicity_equation(f: float, delta: float) -> float:
    """Left-hand side of the universal fluidicity equation of [1]_.

    ``2Δ^{-9/2} f^{15/2} − 6Δ^{-3} f^5 − Δ^{-3/2} f^{7/2} + 6Δ^{-3/2} f^{5/2} + 2f − 2``;
    its root in (0, 1) is the fluidicity.  With ``y = f^{5/2}/Δ^{3/2}`` it equals
    ``2(y − 1)³ + f(2 − y)``, i.e. ``f = (1 − y)³/(1 − y/2)``.
    """
    return (
        2.0 * delta**-4.5 * f**7.5
        - 6.0 * delta**-3.0 * f**5
        - delta**-1.5 * f**3.5
        + 6.0 * delta**-1.5 * f**2.5
        + 2.0 * f
        - 2.0
    )


def fluidicity(delta: float) -> float:
    """Fluidicity f(Δ) in (0, 1), solved by bracketing (Brent) on [0, 1].

    The equation is −2 at f = 0 and positive at f = 1 for every Δ > 0
    (``methods.md`` §3.1), so a root always lies in the bracket.  Δ = 0 gives
    f = 0 (a solid).

    Examples
    --------
    >>> round(fluidicity(1.0), 6)
    0.541187
    """
    if not (delta >= 0 and math.isfinite(delta)):
        raise PhysicsError(f"normalised diffusivity must be finite and >= 0; got {delta}")
    if delta == 0.0:
        return 0.0
    # written in y to avoid overflow of delta**-4.5 for tiny delta
    def g(f: float) -> float:
        y = f**2.5 / delta**1.5
        return 2.0 * (y - 1.0) ** 3 + f * (2.0 - y)

    return float(brentq(g, 0.0, 1.0, xtol=1e-15, rtol=4 * np.finfo(float).eps, maxiter=200))


def gas_packing_fraction(f: float, delta: float) -> float:
    """Packing fraction y = f^{5/2}/Δ^{3/2} of the hard-sphere gas part [1]_."""
    if delta == 0.0:
        return 0.0
    return f**2.5 / delta**1.5


def carnahan_starling_compressibility(y: float) -> float:
    """Carnahan–Starling compressibility factor z = (1 + y + y² − y³)/(1 − y)³ [2]_."""
    return (1.0 + y + y * y - y**3) / (1.0 - y) ** 3


def gas_dos(
    wavenumber_cm: ArrayLike, zero_frequency_dos_cm: float, gas_dof: float
) -> NDArray[np.float64]:
    """Hard-sphere (Enskog) gas DoS per unit wavenumber (cm).

    ``S_g(ν̃) = S̃(0) / [1 + (π S̃(0) ν̃ / (2 G))²]`` where G is the number of gas
    degrees of freedom (3fN for translation [1]_; the same form with the
    rotational dof for rotation).  It is the one-sided transform of an
    exponentially decaying VACF, has S_g(0) = S̃(0) and integrates to G over
    [0, ∞).
    """
    x = np.asarray(wavenumber_cm, dtype=float)
    if gas_dof <= 0 or zero_frequency_dos_cm <= 0:
        return np.zeros_like(x)
    return zero_frequency_dos_cm / (1.0 + (math.pi * zero_frequency_dos_cm * x / (2.0 * gas_dof)) ** 2)


#: Yeh & Hummer, J. Phys. Chem. B 108, 15873 (2004): the constant xi of the
#: finite-size correction of D for a cubic periodic box (Ewald sum of the
#: Oseen tensor over a simple cubic lattice)
YEH_HUMMER_XI = 2.837297


def finite_size_diffusion_correction(
    temperature_K: float, viscosity_Pa_s: float, box_edge_A: float
) -> float:
    """Yeh–Hummer correction ``D_inf − D_PBC = ξ k T / (6 π η L)`` in m²/s.

    Parameters
    ----------
    temperature_K : float
    viscosity_Pa_s : float
        Shear viscosity η of the model, Pa s.
    box_edge_A : float
        Edge L of the cubic box, Å.
    """
    if not (viscosity_Pa_s > 0 and box_edge_A > 0 and temperature_K > 0):
        raise ConfigError("finite-size correction needs positive temperature, viscosity and box edge")
    return (YEH_HUMMER_XI * C.boltzmann_J_per_K * temperature_K
            / (6.0 * math.pi * viscosity_Pa_s * box_edge_A * C.angstrom_m))


# --------------------------------------------------------------------------
# gas-part entropies
# --------------------------------------------------------------------------


def _thermal_wavelength_m(temperature_K: float, mass_u: float) -> float:
    mass_kg = mass_u * C.atomic_mass_kg
    return C.planck_J_s / math.sqrt(2.0 * math.pi * mass_kg * C.boltzmann_J_per_K * temperature_K)


def hard_sphere_entropy(
    temperature_K: float,
    mass_u: float,
    volume_per_particle_A3: float,
    packing_fraction: float,
    form: str = "published",
) -> float:
    """Entropy per hard-sphere gas particle in units of k.

    ``S/k = 5/2 + ln[Λ⁻³ v z(y)] + y(3y − 4)/(1 − y)²`` for ``form="published"``
    (the 2PT form of [1]_ and Lin, Maiti, Goddard (2010) as reproduced in ``methods.md`` §3.2 — the
    reference ideal gas is at the HS pressure, hence ``ln z``);
    ``form="constant-volume"`` omits ``ln z(y)`` (Carnahan–Starling excess
    entropy at fixed N, V, T [2]_).  With y = 0 both reduce to the
    Sackur–Tetrode entropy.

    Parameters
    ----------
    temperature_K, mass_u : float
        T in K, particle mass in u.
    volume_per_particle_A3 : float
        v in Å³ (V/(fN) or V/N; see the module notes).
    packing_fraction : float
        y in [0, 1).
    form : {"published", "constant-volume"}
    """
    if form not in HARD_SPHERE_FORMS:
        raise ConfigError(f"hard-sphere entropy form {form!r} is not one of {HARD_SPHERE_FORMS}")
    y = float(packing_fraction)
    if not 0.0 <= y < 1.0:
        raise PhysicsError(f"hard-sphere packing fraction {y} is outside [0, 1)")
    lam = _thermal_wavelength_m(temperature_K, mass_u)
    v = volume_per_particle_A3 * C.angstrom_m**3
    log_arg = v / lam**3
    if form == "published":
        log_arg *= carnahan_starling_compressibility(y)
    return 2.5 + math.log(log_arg) + y * (3.0 * y - 4.0) / (1.0 - y) ** 2
