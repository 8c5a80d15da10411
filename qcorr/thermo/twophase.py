"""Two-phase thermodynamics (2PT) of one kind of molecule from its component spectra.

The 2PT model splits a diffusive density of states (DoS) ``S(ν)`` into a
gas-like part, modelled as a hard-sphere (HS) gas whose velocity
autocorrelation decays exponentially (Enskog), and a solid-like remainder that
is weighted as a set of harmonic oscillators (Lin, Blanco, Goddard 2003 [1]_).
Molecular fluids apply the split to the centre-of-mass (translational) and the
rotational DoS; the intramolecular vibrational DoS is purely solid-like
(Lin, Maiti, Goddard 2010 [2]_).

Conventions (all functions, no I/O here):

* DoS per unit wavenumber, one-sided, in cm (cm⁻¹ on the axis), normalised so
  that its trapezoid integral is the number of degrees of freedom (dof) of the
  set of molecules it describes.
* ``S(0)`` values are per unit wavenumber (cm) unless the name says seconds.
* Results are per molecule in units of k (entropy, heat capacity) or kT
  (energies); conversions to J/(mol K) and kJ/mol use ``qcorr.constants``.

Sources.  The equations here (Δ, the fluidicity equation, the Lorentzian gas spectrum,
the hard-sphere entropy, the rigid-rotor gas, the weights) are implemented from
[1]_ and [2]_ as summarised in ``methods.md`` §3, and checked for internal consistency (sum rules, limits, the
Carnahan–Starling form of the fluidicity equation, the Sackur–Tetrode and rigid-rotor limits;
``tests/test_twophase.py``).  They were *not* checked against the printed papers: in the
stored copies available to us only the abstracts of [1]_ and [2]_ could be read (searches
for the body text of both, and of the refinements of Desjarlais, Phys. Rev. E 88, 062145
(2013) and Sun et al., J. Chem. Phys. 147, 194505 (2017), returned abstracts only), so no
printed equation number can be given.  The defaults are validated against thermodynamic
integration instead (``docs/liquids.md``, ``tests/test_liquid_validation.py``).

Choices that the literature, as far as it could be read, does not settle are explicit
arguments:

* ``hard_sphere_form="published"`` keeps the ``ln z(y)`` term inside the
  logarithm of the HS entropy (the reference ideal gas is taken at the
  pressure of the HS gas); ``"constant-volume"`` drops it, which is the
  Carnahan–Starling entropy of fN hard spheres in the volume V at fixed
  (N, V, T) [3]_.  The two differ by ``k ln z`` per gas particle.
* ``gas_volume="all-particles"`` (default) uses V/N; ``"gas-particles"`` uses V/(fN)
  (the volume per *gas* particle, consistent with the gas packing fraction y, which
  is computed from the gas density fN/V).  The default is an empirical choice: with
  ``hard_sphere_form="published"`` it is the variant closest to thermodynamic
  integration on the Lennard-Jones references (``docs/liquids.md``); no derivation
  of ours supports V/N over V/(fN).
* The rotational fluidicity is either obtained from the rotational S(0) with
  the same Δ → f equation (default, as described for [2]_ in the team notes)
  or set equal to the translational fluidicity.

References
----------
.. [1] S.-T. Lin, M. Blanco, W. A. Goddard III, "The two-phase model for
   calculating thermodynamic properties of liquids from molecular dynamics:
   Validation for the phase diagram of Lennard-Jones fluids",
   J. Chem. Phys. 119, 11792 (2003). doi:10.1063/1.1624057
.. [2] S.-T. Lin, P. K. Maiti, W. A. Goddard III, "Two-phase thermodynamic
   model for efficient and accurate absolute entropy of water from molecular
   dynamics simulations", J. Phys. Chem. B 114, 8191 (2010).
   doi:10.1021/jp103120q
.. [3] N. F. Carnahan, K. E. Starling, "Equation of state for nonattracting
   rigid spheres", J. Chem. Phys. 51, 635 (1969). doi:10.1063/1.1672048
.. [4] P. H. Berens, D. H. J. Mackay, G. M. White, K. R. Wilson, "Thermodynamics
   and quantum corrections from molecular dynamics for liquid water",
   J. Chem. Phys. 79, 2375 (1983).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike, NDArray

from qcorr import constants as C
from qcorr.errors import ConfigError, PhysicsError
from qcorr.thermo.hard_sphere_gas import (
    GAS_VOLUME_CHOICES,
    fluidicity,
    gas_dos,
    gas_packing_fraction,
    hard_sphere_entropy,
    normalized_diffusivity,
)
from qcorr.thermo.rigid_rotor import rigid_rotor_entropy, rotational_temperatures
from qcorr.thermo.solid_weights import SOLID_WEIGHTS, weighted_integral

ROTATIONAL_FLUIDICITY_CHOICES = ("from-rotation", "same-as-translation")

__all__ = [
    "ROTATIONAL_FLUIDICITY_CHOICES",
    "SOLID_WEIGHTS",
    "TOTALS",
    "ComponentResult",
    "GroupResult",
    "two_phase_component",
    "two_phase_group",
    "vibrational_component",
    "weighted_integral",
]


# --------------------------------------------------------------------------
# diffusivity and fluidicity (Lin, Blanco, Goddard 2003 [1])


# --------------------------------------------------------------------------
# one component (translation, rotation or vibration) of one molecule type
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class ComponentResult:
    """2PT result for one motion component of one molecule type, per molecule.

    Attributes
    ----------
    component : str
        ``"translation"``, ``"rotation"`` or ``"vibration"``.
    dof_per_molecule : float
        ∫S dν̃ / N (3, 2 or 3, or the vibrational dof).
    normalized_diffusivity, fluidicity, packing_fraction : float
        Δ, f, y (0 for vibration).
    entropy, entropy_classical : float
        Per molecule, units of k; quantum or classical harmonic weights on the
        solid part; the gas part is the same in both.
    gas_entropy, solid_entropy, solid_entropy_classical : float
        Parts of the above (k per molecule).
    heat_capacity, heat_capacity_classical : float
        Per molecule, units of k.
    energy_minus_classical : float
        ∫S_s (W_E^q − 1) dν̃ / N in units of kT: the quantum energy (zero-point
        included) minus the classical MD energy of this component.
    zero_point_energy : float
        ∫S_s u/2 dν̃ / N in units of kT.
    solid_dos_minimum : float
        Smallest value of the solid-like DoS (cm, per molecule); negative
        values show where the HS gas exceeds the DoS.
    gas_dos, solid_dos : ndarray
        DoS of the parts for all N molecules (cm).
    gas_dof : float
        Gas degrees of freedom G = f × (3 or 2 or 3) × N of the Lorentzian over [0, ∞)
        (its part on the grid is less when the grid ends early).
    """

    component: str
    dof_per_molecule: float
    normalized_diffusivity: float
    fluidicity: float
    packing_fraction: float
    entropy: float
    entropy_classical: float
    gas_entropy: float
    solid_entropy: float
    solid_entropy_classical: float
    heat_capacity: float
    heat_capacity_classical: float
    energy_minus_classical: float
    zero_point_energy: float
    solid_dos_minimum: float
    gas_dos: NDArray[np.float64] = field(repr=False)
    solid_dos: NDArray[np.float64] = field(repr=False)
    gas_dof: float = 0.0


def _solid_result(
    component: str,
    wavenumber_cm: NDArray[np.float64],
    solid: NDArray[np.float64],
    gas: NDArray[np.float64],
    molecule_count: float,
    temperature_K: float,
    dof: float,
    delta: float,
    f: float,
    y: float,
    gas_entropy_total: float,
    gas_dof: float,
) -> ComponentResult:
    q = weighted_integral(wavenumber_cm, solid, temperature_K, "quantum")
    c = weighted_integral(wavenumber_cm, solid, temperature_K, "classical")
    u = C.second_radiation_constant_cm_K * wavenumber_cm / temperature_K
    zpe = float(np.trapezoid(solid * 0.5 * u, wavenumber_cm))
    n = molecule_count
    # gas part: W_E = W_Cv = 1/2 per gas dof (ideal hard-sphere gas / free rotor)
    return ComponentResult(
        component=component,
        dof_per_molecule=dof / n,
        normalized_diffusivity=delta,
        fluidicity=f,
        packing_fraction=y,
        entropy=(q["entropy"] + gas_entropy_total) / n,
        entropy_classical=(c["entropy"] + gas_entropy_total) / n,
        gas_entropy=gas_entropy_total / n,
        solid_entropy=q["entropy"] / n,
        solid_entropy_classical=c["entropy"] / n,
        heat_capacity=(q["heat_capacity"] + 0.5 * gas_dof) / n,
        heat_capacity_classical=(c["heat_capacity"] + 0.5 * gas_dof) / n,
        energy_minus_classical=q["energy_minus_classical"] / n,
        zero_point_energy=zpe / n,
        solid_dos_minimum=float(np.min(solid)) / n,
        gas_dos=gas,
        solid_dos=solid,
        gas_dof=gas_dof,
    )


def two_phase_component(
    component: str,
    wavenumber_cm: ArrayLike,
    dos_cm: ArrayLike,
    *,
    molecule_count: float,
    temperature_K: float,
    mass_u: float,
    volume_A3: float,
    zero_frequency_dos_cm: float | None = None,
    fluidicity_value: float | None = None,
    principal_moments_u_A2: ArrayLike | None = None,
    symmetry_number: int = 1,
    hard_sphere_form: str = "published",
    gas_volume: str = "all-particles",
    dof_per_molecule: int | None = None,
    density_molecule_count: float | None = None,
) -> ComponentResult:
    """Split a translational or rotational DoS into HS gas + solid and weight both.

    Parameters
    ----------
    component : {"translation", "rotation"}
    wavenumber_cm, dos_cm : arrays (n,)
        Grid from 0 cm⁻¹ and the DoS of all N molecules (cm); ∫ = dof.
    molecule_count : float
        N.
    temperature_K, mass_u, volume_A3 : float
        T (K), molecular mass (u), mean volume (Å³).
    zero_frequency_dos_cm : float, optional
        S̃(0) (cm) to use in Δ and in the gas DoS; default ``dos_cm[0]``.  Pass
        ``12 m N D c/kT`` to use a diffusion coefficient from the MSD.
    fluidicity_value : float, optional
        Use this f instead of solving for it (rotation with
        ``same-as-translation``).
    principal_moments_u_A2 : array (3,) or (2,), optional
        Mean principal moments for rotation; 2 values (equal, perpendicular)
        or a DoS with 2 dof per molecule mean a linear rotor.
    symmetry_number : int
        Rotational symmetry number σ.
    hard_sphere_form, gas_volume : str
        See :func:`hard_sphere_entropy` and the module notes.
    dof_per_molecule : int, optional
        Nominal degrees of freedom per molecule of this motion (3 for translation,
        2 or 3 for rotation), which sets the gas dof 3fN or 2fN; default: the
        DoS integral per molecule, rounded.
    density_molecule_count : float, optional
        Molecules whose number density N_ρ/V enters Δ and the gas volume (V/(f N_ρ) or
        V/N_ρ); default N.  A component of a mixture is evaluated at the total density
        (:mod:`qcorr.thermo.twophase_mixture`).

    Returns
    -------
    ComponentResult

    Notes
    -----
    Gas weights per gas dof: W_S = S_gas/(k · dof per molecule) with S_gas the HS
    entropy (translation) or rigid-rotor entropy (rotation), W_E = W_Cv = 1/2
    [1]_, [2]_.  The solid part ``S − S_g`` keeps its sign (a negative
    low-frequency remainder is reported, not clipped).
    """
    if component not in ("translation", "rotation"):
        raise ConfigError(f"component {component!r} must be 'translation' or 'rotation'")
    if gas_volume not in GAS_VOLUME_CHOICES:
        raise ConfigError(f"gas volume choice {gas_volume!r} is not one of {GAS_VOLUME_CHOICES}")
    x = np.asarray(wavenumber_cm, dtype=float)
    s = np.asarray(dos_cm, dtype=float)
    n = float(molecule_count)
    if not (n > 0 and math.isfinite(n)):
        raise PhysicsError(f"{component}: 2PT needs a positive molecule count; got {molecule_count}")
    dof = float(np.trapezoid(s, x))
    if dof_per_molecule is None:
        dof_per_molecule = round(dof / n) if n > 0 else 0
    if dof_per_molecule not in (2, 3):
        raise PhysicsError(
            f"{component}: {dof_per_molecule} degrees of freedom per molecule (DoS integral "
            f"{dof / n:.3g} per molecule); 2PT needs 3 (translation) or 2 or 3 (rotation)"
        )
    s0 = float(s[0]) if zero_frequency_dos_cm is None else float(zero_frequency_dos_cm)
    if s0 < 0 or not math.isfinite(s0):
        raise PhysicsError(f"{component}: DoS at zero frequency is {s0} cm; it must be >= 0")
    n_rho = n if density_molecule_count is None else float(density_molecule_count)
    # Δ of [1]_ with S(0)/N per molecule and the density N_ρ/V: scale S(0) by N_ρ/N
    delta = normalized_diffusivity(s0 * n_rho / n, n_rho, temperature_K, mass_u, volume_A3)
    if fluidicity_value is None:
        f = fluidicity(delta)
    else:
        f = float(fluidicity_value)
        if not 0.0 <= f <= 1.0:
            raise PhysicsError(f"{component}: fluidicity {f} outside [0, 1]")
    y = gas_packing_fraction(f, delta)
    if component == "translation" and not y < 1.0:
        raise PhysicsError(f"translation: gas packing fraction {y:.3f} >= 1 for f={f}, delta={delta}")
    gas_dof = f * dof_per_molecule * n
    gas = gas_dos(x, s0, gas_dof)
    solid = s - gas
    if f <= 0.0:
        gas_entropy_total = 0.0
    elif component == "translation":
        per = volume_A3 / (f * n_rho) if gas_volume == "gas-particles" else volume_A3 / n_rho
        gas_entropy_total = f * n * hard_sphere_entropy(
            temperature_K, mass_u, per, y, hard_sphere_form
        )
    else:
        if principal_moments_u_A2 is None:
            raise PhysicsError("rotation: principal moments of inertia are needed for the gas part")
        moments = np.asarray(principal_moments_u_A2, dtype=float)
        if dof_per_molecule == 2 or moments.size == 2:
            theta = rotational_temperatures([float(np.max(moments))])
        else:
            theta = rotational_temperatures(moments)
        gas_entropy_total = f * n * rigid_rotor_entropy(temperature_K, theta, symmetry_number)
    return _solid_result(
        component, x, solid, gas, n, temperature_K, dof, delta, f, y, gas_entropy_total, gas_dof
    )


def vibrational_component(
    wavenumber_cm: ArrayLike, dos_cm: ArrayLike, *, molecule_count: float, temperature_K: float
) -> ComponentResult:
    """Intramolecular vibration: the whole DoS is solid-like (harmonic weights)."""
    x = np.asarray(wavenumber_cm, dtype=float)
    s = np.asarray(dos_cm, dtype=float)
    dof = float(np.trapezoid(s, x))
    return _solid_result(
        "vibration", x, s, np.zeros_like(s), float(molecule_count), temperature_K, dof,
        0.0, 0.0, 0.0, 0.0, 0.0,
    )


# --------------------------------------------------------------------------
# one molecule type: translation + rotation + vibration
# --------------------------------------------------------------------------

#: per-molecule totals of :class:`GroupResult` (units of k, or kT for energies)
TOTALS = (
    "entropy", "entropy_classical", "heat_capacity", "heat_capacity_classical",
    "energy_minus_classical", "zero_point_energy",
)


@dataclass(frozen=True)
class GroupResult:
    """2PT result for one molecule type (per molecule; k or kT units).

    ``components`` maps ``translation`` / ``rotation`` / ``vibration`` to their
    :class:`ComponentResult` (absent parts are left out); the totals are sums.
    """

    components: dict[str, ComponentResult]
    entropy: float
    entropy_classical: float
    heat_capacity: float
    heat_capacity_classical: float
    energy_minus_classical: float
    zero_point_energy: float


def two_phase_group(
    wavenumber_cm: ArrayLike,
    parts: dict[str, ArrayLike],
    *,
    molecule_count: float,
    temperature_K: float,
    mass_u: float,
    volume_A3: float,
    principal_moments_u_A2: ArrayLike | None = None,
    symmetry_number: int = 1,
    hard_sphere_form: str = "published",
    gas_volume: str = "all-particles",
    rotational_fluidicity: str = "from-rotation",
    translation_zero_frequency_cm: float | None = None,
    rotational_dof_per_molecule: int | None = None,
    density_molecule_count: float | None = None,
) -> GroupResult:
    """2PT totals for N molecules of one kind from their component DoS.

    Parameters
    ----------
    wavenumber_cm : array (n,)
    parts : dict
        ``"translation"`` (required), optionally ``"rotation"`` and
        ``"vibration"``: DoS of all N molecules, cm.
    molecule_count, temperature_K, mass_u, volume_A3 : float
        N, T (K), molecular mass (u), mean volume (Å³).
    principal_moments_u_A2 : array (3,), optional
        Needed with a rotational part.
    symmetry_number : int
    hard_sphere_form, gas_volume : str
        See :func:`hard_sphere_entropy`.
    rotational_fluidicity : {"from-rotation", "same-as-translation"}
        Rotational f from the rotational S(0) through the same Δ → f equation
        (default), or equal to the translational f.
    translation_zero_frequency_cm : float, optional
        Translational S̃(0) to use (e.g. from an MSD diffusion coefficient).
    rotational_dof_per_molecule : int, optional
        2 (linear) or 3; default: the rotational DoS integral per molecule, rounded.
    density_molecule_count : float, optional
        Molecules that set the density in Δ and the gas volume; default N (see
        :func:`two_phase_component`).

    Returns
    -------
    GroupResult
    """
    if rotational_fluidicity not in ROTATIONAL_FLUIDICITY_CHOICES:
        raise ConfigError(
            f"rotational fluidicity {rotational_fluidicity!r} is not one of "
            f"{ROTATIONAL_FLUIDICITY_CHOICES}"
        )
    if "translation" not in parts:
        raise ConfigError("2PT needs a translational density of states")
    common = {"molecule_count": molecule_count, "temperature_K": temperature_K, "mass_u": mass_u,
                  "volume_A3": volume_A3, "density_molecule_count": density_molecule_count}
    comps: dict[str, ComponentResult] = {}
    comps["translation"] = two_phase_component(
        "translation", wavenumber_cm, parts["translation"], **common,
        zero_frequency_dos_cm=translation_zero_frequency_cm,
        hard_sphere_form=hard_sphere_form, gas_volume=gas_volume, dof_per_molecule=3,
    )
    if parts.get("rotation") is not None:
        f_rot = comps["translation"].fluidicity if rotational_fluidicity == "same-as-translation" else None
        comps["rotation"] = two_phase_component(
            "rotation", wavenumber_cm, parts["rotation"], **common, fluidicity_value=f_rot,
            principal_moments_u_A2=principal_moments_u_A2, symmetry_number=symmetry_number,
            dof_per_molecule=rotational_dof_per_molecule,
        )
    if parts.get("vibration") is not None:
        comps["vibration"] = vibrational_component(
            wavenumber_cm, parts["vibration"], molecule_count=molecule_count,
            temperature_K=temperature_K,
        )
    totals = {name: float(sum(getattr(c, name) for c in comps.values())) for name in TOTALS}
    return GroupResult(components=comps, **totals)
