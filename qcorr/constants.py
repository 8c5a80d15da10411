"""Physical constants and unit conversions, all from :mod:`scipy.constants`.

scipy.constants holds the CODATA recommended values (2018 set in SciPy >= 1.4;
h, k, N_A and c are exact in the 2019 SI).  Nothing in qcorr types a constant
by hand: every module imports it from here.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import constants as _sc

planck_J_s: float = _sc.h
hbar_J_s: float = _sc.hbar
boltzmann_J_per_K: float = _sc.k
avogadro_per_mol: float = _sc.N_A
gas_constant_J_per_mol_K: float = _sc.R
speed_of_light_m_per_s: float = _sc.c
speed_of_light_cm_per_s: float = _sc.c * 100.0
atomic_mass_kg: float = _sc.atomic_mass  # 1 u (dalton) in kg
angstrom_m: float = _sc.angstrom
picosecond_s: float = _sc.pico
femtosecond_s: float = _sc.femto
bar_Pa: float = _sc.bar

#: second radiation constant c2 = h c / k in cm K (u = c2 * wavenumber / T)
second_radiation_constant_cm_K: float = planck_J_s * speed_of_light_cm_per_s / boltzmann_J_per_K

#: 1 THz expressed in cm^-1 (= 1e12 / c[cm/s])
wavenumber_per_THz: float = 1.0e12 / speed_of_light_cm_per_s


def wavenumber_to_THz(wavenumber_cm: ArrayLike) -> NDArray[np.float64]:
    """Convert wavenumbers in cm^-1 to frequencies in THz."""
    return np.asarray(wavenumber_cm, dtype=float) / wavenumber_per_THz


def THz_to_wavenumber(frequency_THz: ArrayLike) -> NDArray[np.float64]:
    """Convert frequencies in THz to wavenumbers in cm^-1."""
    return np.asarray(frequency_THz, dtype=float) * wavenumber_per_THz


def reduced_frequency(wavenumber_cm: ArrayLike, temperature_K: float) -> NDArray[np.float64]:
    """u = h nu / (k T) for wavenumbers in cm^-1 at temperature in K (dimensionless)."""
    return second_radiation_constant_cm_K * np.asarray(wavenumber_cm, dtype=float) / temperature_K

#: thermochemical calorie in J (exact, 4.184 J; the kcal of LAMMPS "real" units)
calorie_J: float = _sc.calorie
#: electronvolt in J (exact in the 2019 SI)
electron_volt_J: float = _sc.electron_volt
#: 1 bar nm^3 of one system, expressed in kJ per mole of systems (p V in GROMACS/OpenMM units)
bar_nm3_kJ_per_mol: float = _sc.bar * 1e-27 * _sc.N_A / 1000.0
