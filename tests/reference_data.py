"""Properties of real water, argon and copper from published formulations and tables.

Used by ``tests/test_validation.py`` and ``scripts/write_validation_report.py`` (and meant for
later tests of corrected observables).  Every value names its source; *from memory* marks
the few inputs that were not read in a source.  Units are in every name.

Water: IAPWS-95, "Revised Release on the IAPWS Formulation 1995 for the Thermodynamic
Properties of Ordinary Water Substance for General and Scientific Use", IAPWS R6-95(2018)
(W. Wagner, A. Pruß, J. Phys. Chem. Ref. Data 31, 387 (2002)), evaluated with the ``iapws``
package.  Its entropy and enthalpy are relative to the formulation's reference state,
u = 0 and s = 0 for the saturated liquid at the triple point (273.16 K) – not third-law
values; an absolute entropy needs S°(H2O, l, 298.15 K) from CODATA (J. D. Cox, D. D.
Wagman, V. A. Medvedev, CODATA Key Values for Thermodynamics, Hemisphere 1989), which is not
used here.

Argon: Ch. Tegeler, R. Span, W. Wagner, J. Phys. Chem. Ref. Data 28, 779 (1999), evaluated
with CoolProp (its "Argon" fluid names this equation of state).  CoolProp's argon entropy
is the conventional absolute (third-law) entropy: its ideal-gas limit at 298.15 K and 1 bar
equals the CODATA key value 154.846 ± 0.003 J/(mol K) (checked in tests/test_validation.py).

Copper: see the constants below.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

GAS_CONSTANT_J_PER_MOL_K = 8.314462618  # CODATA 2018 (exact: N_A k), as scipy.constants.R

# --------------------------------------------------------------------------------- water


@dataclass(frozen=True)
class WaterState:
    """Liquid or vapour water at (T, p) from IAPWS-95; molar values per mole of H2O.

    ``entropy_J_per_mol_K`` and ``enthalpy_J_per_mol`` are relative to the IAPWS-95
    reference state (u = s = 0 for the saturated liquid at the triple point).
    """

    temperature_K: float
    pressure_MPa: float
    density_kg_per_m3: float
    cp_J_per_mol_K: float
    cv_J_per_mol_K: float
    entropy_J_per_mol_K: float
    enthalpy_J_per_mol: float


def water_iapws95(temperature_K: float = 298.15, pressure_MPa: float = 0.1) -> WaterState:
    """Water at *temperature_K* and *pressure_MPa* from IAPWS-95 (``iapws.IAPWS95``).

    The package returns kJ/kg and kJ/(kg K); molar values use its molar mass
    M = 18.015268 g/mol (the value of the release).
    """
    from iapws import IAPWS95

    w = IAPWS95(T=float(temperature_K), P=float(pressure_MPa))
    if w.status != 1:
        raise ValueError(f"IAPWS-95 has no state at {temperature_K} K, {pressure_MPa} MPa: {w.msg}")
    molar = w.M  # g/mol, so kJ/kg x g/mol = J/mol
    return WaterState(
        temperature_K=float(temperature_K), pressure_MPa=float(pressure_MPa),
        density_kg_per_m3=float(w.rho), cp_J_per_mol_K=float(w.cp) * molar,
        cv_J_per_mol_K=float(w.cv) * molar, entropy_J_per_mol_K=float(w.s) * molar,
        enthalpy_J_per_mol=float(w.h) * molar,
    )


def water_cp_iapws95(temperatures_K, pressure_MPa: float = 0.1) -> np.ndarray:
    """Isobaric heat capacity of water, J/(mol K), at each temperature (IAPWS-95)."""
    return np.array([water_iapws95(t, pressure_MPa).cp_J_per_mol_K for t in np.atleast_1d(temperatures_K)])


# --------------------------------------------------------------------------------- argon


@dataclass(frozen=True)
class ArgonState:
    """Argon at (T, ρ) from the Tegeler–Span–Wagner equation of state (CoolProp)."""

    temperature_K: float
    density_kg_per_m3: float
    pressure_Pa: float
    entropy_J_per_mol_K: float  # absolute (third-law) entropy, see the module docstring
    cp_J_per_mol_K: float
    cv_J_per_mol_K: float


def argon_tegeler(temperature_K: float, density_kg_per_m3: float) -> ArgonState:
    """Argon at *temperature_K* and *density_kg_per_m3* (CoolProp, fluid "Argon")."""
    from CoolProp.CoolProp import PropsSI

    def prop(name: str) -> float:
        return float(PropsSI(name, "T", float(temperature_K), "Dmass", float(density_kg_per_m3), "Argon"))

    return ArgonState(
        temperature_K=float(temperature_K), density_kg_per_m3=float(density_kg_per_m3),
        pressure_Pa=prop("P"), entropy_J_per_mol_K=prop("SMOLAR"), cp_J_per_mol_K=prop("CPMOLAR"),
        cv_J_per_mol_K=prop("CVMOLAR"),
    )


def argon_saturated_liquid(temperature_K: float) -> ArgonState:
    """Saturated liquid argon at *temperature_K* (CoolProp, quality 0)."""
    from CoolProp.CoolProp import PropsSI

    density = float(PropsSI("Dmass", "T", float(temperature_K), "Q", 0, "Argon"))
    return argon_tegeler(temperature_K, density)


def argon_ideal_gas_entropy(temperature_K: float, pressure_Pa: float = 1e5) -> float:
    """Ideal-gas entropy of argon, J/(mol K), from the equation of state's low-pressure limit:
    S(T, p₀) + R ln(p₀/p) with p₀ = 1 Pa, where the residual entropy is below 1e-7 J/(mol K)."""
    from CoolProp.CoolProp import PropsSI

    low = 1.0
    s_low = float(PropsSI("SMOLAR", "T", float(temperature_K), "P", low, "Argon"))
    return s_low + GAS_CONSTANT_J_PER_MOL_K * math.log(low / float(pressure_Pa))


# --------------------------------------------------------------------------------- copper

#: standard atomic weight of Cu, g/mol (IUPAC; common practice)
COPPER_MOLAR_MASS_G_PER_MOL = 63.546

#: specific heat of Cu at 25 °C, J/(g K): CRC Handbook of Chemistry and Physics, 97th ed.,
#: "Heat capacity of the elements at 25 °C" – read in a secondary table that cites it
#: (three significant figures, so ±0.0005 J/(g K) from rounding)
COPPER_CP_298_J_PER_G_K = 0.385
COPPER_CP_298_ROUNDING_J_PER_G_K = 0.0005

#: electronic heat-capacity coefficient γ of Cu, J/(mol K²), and the low-temperature limiting
#: Debye temperature θ₀, K: D. L. Martin, "Specific heat of copper, silver, and gold below
#: 30 K", Phys. Rev. B 8, 5357 (1973), abstract (0.691 ± 0.001 mJ/(mol K²), 344.3 ± 0.2 K)
COPPER_ELECTRONIC_GAMMA_J_PER_MOL_K2 = 0.691e-3
COPPER_DEBYE_TEMPERATURE_0K_K = 344.3

#: NIST Cryogenic Technologies Group, "Material Properties: OFHC Copper (UNS C10100/C10200)"
#: (trc.nist.gov/cryogenics, revised 02/03/2010): log10 y = sum_i c_i (log10 T)^i, T in K,
#: fitted to data from 4 to 300 K.  Specific heat y in J/(kg K), stated fit error 10 % below
#: 15 K and 5 % from 15 K; linear expansion coefficient y in 1e-6/K, stated fit error 10 %
#: below 50 K and 5 % from 50 K.  (The page prints the last expansion coefficient as
#: "-1,30843441"; read as -1.30843441: with it the fit gives 16.6e-6/K at 300 K.)
COPPER_NIST_SPECIFIC_HEAT_FIT = (-1.91844, -0.15973, 8.61013, -18.996, 21.9661, -12.7328, 3.54322, -0.3797, 0.0)
COPPER_NIST_EXPANSION_FIT = (
    -17.9081289, 67.131914, -118.809316, 109.9845997, -53.8696089, 13.30247491, -1.30843441,
)
COPPER_NIST_FIT_RANGE_K = (4.0, 300.0)


def copper_nist_fit_error(temperature_K: float, which: str = "specific_heat") -> float:
    """Relative fit error the NIST page states for the fit at this temperature."""
    edge = 15.0 if which == "specific_heat" else 50.0
    return 0.10 if temperature_K < edge else 0.05


def _nist_fit(coefficients, temperature_K: float) -> float:
    low, high = COPPER_NIST_FIT_RANGE_K
    if not low <= temperature_K <= high:
        raise ValueError(f"the NIST copper fits hold from {low:g} to {high:g} K, not {temperature_K} K")
    x = math.log10(temperature_K)
    return 10.0 ** sum(c * x**i for i, c in enumerate(coefficients))


def copper_cp_nist(temperature_K: float) -> float:
    """Cp of copper, J/(mol K), from the NIST fit (J/(kg K) × M)."""
    return _nist_fit(COPPER_NIST_SPECIFIC_HEAT_FIT, temperature_K) * COPPER_MOLAR_MASS_G_PER_MOL * 1e-3


def copper_linear_expansion_nist(temperature_K: float) -> float:
    """Linear thermal expansion coefficient of copper, 1/K, from the NIST fit."""
    return _nist_fit(COPPER_NIST_EXPANSION_FIT, temperature_K) * 1e-6


#: From memory (not read in a source for this module): density of Cu at room temperature,
#: g/cm³ (CRC Handbook), and its isothermal bulk modulus, Pa (C. Kittel, Introduction to
#: Solid State Physics, table of bulk moduli).  They enter only Cp − Cv (below 3 % of Cp).
COPPER_DENSITY_G_PER_CM3 = 8.96
COPPER_BULK_MODULUS_PA = 1.37e11
#: relative uncertainty allowed for each of these from-memory inputs (our estimate)
COPPER_FROM_MEMORY_RELATIVE_UNCERTAINTY = 0.05


def copper_cp_minus_cv(temperature_K: float) -> tuple[float, float]:
    """(Cp − Cv, its uncertainty), J/(mol K): T V_m α_V² K_T with α_V = 3α (thermodynamic
    identity; e.g. H. B. Callen, Thermodynamics, 2nd ed., eq. 3.75 – equation number from
    memory), α from the NIST fit (5 %), V_m and K_T from memory (5 % each): relative
    uncertainty 2 × 5 % + 5 % + 5 %."""
    molar_volume_m3 = COPPER_MOLAR_MASS_G_PER_MOL / COPPER_DENSITY_G_PER_CM3 * 1e-6
    alpha_v = 3.0 * copper_linear_expansion_nist(temperature_K)
    value = temperature_K * molar_volume_m3 * alpha_v**2 * COPPER_BULK_MODULUS_PA
    relative = 2 * copper_nist_fit_error(temperature_K, "expansion") + 2 * COPPER_FROM_MEMORY_RELATIVE_UNCERTAINTY
    return value, relative * value
