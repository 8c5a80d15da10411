#!/usr/bin/env python
"""Run qcorr on the validation set and write ``docs/validation.md``.

For each validation system (``scripts/make_validation_data.py``) this script runs the two
commands a user runs – ``qcorr spectrum`` and ``qcorr properties`` – reads the property
table, and sets each quantum-corrected value beside a reference from outside the project:
a handbook value, a published table, or an independent calculation from the MD engine's
own forces (the Wigner–Kirkwood ħ² correction).  Each comparison carries its tolerance
and the reason for it; ``tests/test_validation.py`` fails when a tested comparison leaves
its tolerance.

Usage::

    python scripts/write_validation_report.py [--data-dir DIR] [--work-dir DIR]
                                              [--output docs/validation.md]

The data directory defaults to ``$QCORR_VALIDATION_DIR`` or ``~/.cache/qcorr-validation``;
missing or outdated systems are made first (a few minutes).  Spectrum files and tables go
to ``--work-dir`` (default: a temporary directory, removed afterwards).

Reference values and their status
---------------------------------
Status words: *handbook* / *paper* (read from the named source), *from memory* (quoted
from memory of the named source and not re-read for this report: treat as provisional),
*computed* (an independent calculation made here from the named formula), *common
practice* (a fact of the trade).

References
----------
.. [1] P. H. Berens, D. H. J. Mackay, G. M. White, K. R. Wilson, J. Chem. Phys. 79, 2375 (1983).
.. [2] CRC Handbook of Chemistry and Physics, "Heat capacity of the elements at 25 °C".
.. [3] G. K. White, S. J. Collocott, J. Phys. Chem. Ref. Data 13, 1251 (1984) (copper).
.. [4] C. Kittel, Introduction to Solid State Physics (Wiley): Debye temperatures, bulk
       moduli, electronic heat-capacity coefficients.
.. [5] E. Wigner, Phys. Rev. 40, 749 (1932); J. G. Kirkwood, Phys. Rev. 44, 31 (1933);
       L. D. Landau, E. M. Lifshitz, Statistical Physics Part 1, §33.
.. [6] Á. Berta, D. Ferenc, I. Bakó, Á. Madarász, J. Chem. Theory Comput. 16, 3316 (2020),
       Table 1.
.. [7] NIST Computational Chemistry Comparison and Benchmark Database (CCCBDB), H2O
       experimental vibrational fundamentals 3657, 1595, 3756 cm⁻¹.
"""

from __future__ import annotations

import argparse
import dataclasses
import datetime
import json
import math
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

import make_validation_data as engines  # noqa: E402
from qcorr import __version__ as qcorr_version  # noqa: E402
from qcorr.constants import (  # noqa: E402
    avogadro_per_mol,
    boltzmann_J_per_K,
    gas_constant_J_per_mol_K,
    hbar_J_s,
    planck_J_s,
    speed_of_light_cm_per_s,
)
from qcorr.errors import ConfigError, QcorrError  # noqa: E402
from qcorr.safe_write import write_text_atomic  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent
DEFAULT_OUTPUT = ROOT / "docs" / "validation.md"

# --------------------------------------------------------------------------------------
# Reference data (every number here names its source and status)
# --------------------------------------------------------------------------------------

#: Cu, Cp(298.15 K) in J/(mol K): CRC Handbook [2]; from memory (24.440), consistent with
#: the 0.385 J/(g K) of engineering tables (× 63.546 g/mol = 24.47).
COPPER_CP_298_J_PER_MOL_K = 24.440
#: Cu, Cp(100 K) in J/(mol K): White & Collocott (1984) [3]; from memory.
COPPER_CP_100_J_PER_MOL_K = 16.0
#: Cu data for Cp − Cv = T V_m α_V² K_T (thermodynamic identity; e.g. Callen,
#: Thermodynamics, 2nd ed., eq. 3.75).  All from memory: linear expansion coefficient at
#: 25 °C and near 100 K (CRC "Thermal expansion of metals"), density (common practice),
#: isothermal bulk modulus (Kittel [4]).
COPPER_LINEAR_EXPANSION_PER_K = {298.15: 16.5e-6, 100.0: 10.3e-6}
COPPER_DENSITY_G_PER_CM3 = 8.96
COPPER_BULK_MODULUS_PA = 1.37e11
COPPER_MOLAR_MASS_G_PER_MOL = 63.546  # IUPAC standard atomic weight (common practice)
#: Cu electronic heat-capacity coefficient γ in J/(mol K²): Kittel [4], from memory.
COPPER_ELECTRONIC_GAMMA_J_PER_MOL_K2 = 0.695e-3
#: Cu Debye temperature (K) from Kittel's table [4] (also methods notes §4.2).
COPPER_DEBYE_TEMPERATURE_K = 343.0

#: Liquid water Cp at 25 °C, J/(mol K) (Berta et al. 2020 Table 1 quote 75.4 as experiment).
WATER_CP_EXPERIMENT_J_PER_MOL_K = 75.3
#: Classical → quantum-corrected Cp of *flexible* water models in Berta et al. (2020),
#: Table 1 [6] (J/(mol K)): the corrections implied by the quoted pairs.
WATER_FLEXIBLE_MODEL_CORRECTIONS = {
    "AMOEBA14 flex (1PT)": 85.7 - 110.6,
    "F3C flex (1PT)": 84.5 - 109.6,
    "SPC/E flex (1PT)": 86.6 - 123.7,
    "WATTS flex (1PT)": 72.5 - 107.3,
    "F3C (2PT)": 67.4 - 104.6,
    "ReaxFF (2PT)": 73.0 - 108.4,
    "SPC-Fw (2PT)": 69.3 - 109.5,
}
#: Argon data for the entropy of the liquid at its normal boiling point, from the gas:
#: S°(g, 298.15 K, 1 bar) = 154.846 J/(mol K) (NIST WebBook / CODATA key values), ideal-gas
#: Cp = 5R/2 (common practice), normal boiling point 87.30 K (SklogWiki "Argon"), enthalpy
#: of vaporization there 6.43 kJ/mol (CRC Handbook; from memory).
ARGON_GAS_ENTROPY_298_J_PER_MOL_K = 154.846
ARGON_BOILING_POINT_K = 87.30
ARGON_VAPORIZATION_ENTHALPY_KJ_PER_MOL = 6.43

#: H2O(g) experimental fundamentals, cm⁻¹ (NIST CCCBDB [7]).
WATER_FUNDAMENTALS_CM = (3657.0, 1595.0, 3756.0)
#: Lower edge of the intramolecular band of liquid water in the spectrum, cm⁻¹: above
#: the librational band (which fades out by about 1000–1100 cm⁻¹) and below the H–O–H
#: bend (≈ 1600–1700 cm⁻¹); common practice for splitting water's spectrum.
WATER_INTRAMOLECULAR_CUT_CM = 1150.0


def copper_cp_minus_cv(temperature_K: float) -> float:
    """Cp − Cv = T V_m α_V² K_T for copper, J/(mol K) (inputs from memory; see above)."""
    molar_volume_m3 = COPPER_MOLAR_MASS_G_PER_MOL / COPPER_DENSITY_G_PER_CM3 * 1e-6
    alpha_volume = 3.0 * COPPER_LINEAR_EXPANSION_PER_K[temperature_K]
    return temperature_K * molar_volume_m3 * alpha_volume**2 * COPPER_BULK_MODULUS_PA


def copper_lattice_cv_reference(temperature_K: float) -> tuple[float, str]:
    """Lattice Cv of copper from the handbook Cp: Cp − (Cp − Cv) − γT, J/(mol K)."""
    key = 298.15 if temperature_K > 200 else 100.0
    cp = COPPER_CP_298_J_PER_MOL_K if key == 298.15 else COPPER_CP_100_J_PER_MOL_K
    dilation = copper_cp_minus_cv(key)
    electronic = COPPER_ELECTRONIC_GAMMA_J_PER_MOL_K2 * key
    value = cp - dilation - electronic
    source = (
        f"Cp({key:g} K) = {cp:.3f} "
        + ("(CRC Handbook, heat capacity of the elements at 25 °C)" if key == 298.15
           else "(White & Collocott, J. Phys. Chem. Ref. Data 13, 1251 (1984))")
        + f" − (Cp − Cv = T V α² K_T = {dilation:.2f}) − (electronic γT = {electronic:.2f})"
    )
    return value, source


# --------------------------------------------------------------------------------------
# Comparisons
# --------------------------------------------------------------------------------------


@dataclasses.dataclass
class Comparison:
    """One quantity of one system set beside its reference."""

    system: str
    quantity: str
    unit: str
    classical: float | None
    quantum: float | None
    correction: float | None
    compared: str  # which of the values is compared: "quantum" or "correction"
    reference: float
    reference_source: str
    reference_status: str  # handbook / paper / computed / from memory / common practice
    tolerance: float
    tolerance_reason: str
    explanation: str
    tested: bool = True
    standard_error: float | None = None

    @property
    def value(self) -> float:
        return self.quantum if self.compared == "quantum" else self.correction

    @property
    def difference(self) -> float:
        return self.value - self.reference

    @property
    def passed(self) -> bool:
        return abs(self.difference) <= self.tolerance


def run_qcorr(spec: engines.Spec, data_dir: Path, work_dir: Path) -> tuple[Path, Path]:
    """``qcorr spectrum`` and ``qcorr properties`` on one system; return (spectrum, table)."""
    directory = data_dir / spec.name
    spectrum = work_dir / f"{spec.name}.nc"
    table = work_dir / f"{spec.name}.csv"
    commands = [
        [
            sys.executable, "-m", "qcorr", "spectrum",
            "--topology", str(directory / engines.TOPOLOGY_NAME),
            "--trajectory", str(directory / engines.TRAJECTORY_NAME),
            "--temperature", repr(spec.temperature_K),
            "--segment-ps", repr(spec.segment_ps),
            "--output", str(spectrum),
            "--progress", "never",
        ],
        [
            sys.executable, "-m", "qcorr", "properties", str(spectrum),
            "--output", str(table), "--system", spec.name, "--quiet",
        ],
    ]
    for command in commands:
        result = subprocess.run(command, capture_output=True, text=True)
        if result.returncode != 0:
            raise QcorrError(
                f"{spec.name}: '{' '.join(command[2:4])}' failed: {result.stderr.strip().splitlines()[-1:]}"
            )
    return spectrum, table


def run_liquid(spec: engines.Spec, spectrum: Path, work_dir: Path):
    """``qcorr liquid`` (2PT) on a spectrum; the table as a DataFrame, or None if it fails."""
    import pandas as pd

    table = work_dir / f"{spec.name}_2pt.csv"
    command = [sys.executable, "-m", "qcorr", "liquid", str(spectrum), "--output", str(table),
               "--system", spec.name, "--quiet"]
    result = subprocess.run(command, capture_output=True, text=True)
    if result.returncode != 0:
        print(f"{spec.name}: qcorr liquid failed: {result.stderr.strip()}", file=sys.stderr)
        return None
    return pd.read_csv(table)


def _row(frame, prop: str, basis: str, group: str = "total"):
    rows = frame[(frame.property == prop) & (frame.basis == basis) & (frame.group == group)
                 & (frame.method == "harmonic")]
    if len(rows) != 1:
        raise QcorrError(f"property table: expected one '{prop}' row on basis '{basis}', found {len(rows)}")
    return rows.iloc[0]


def _value(x) -> float | None:
    return None if x is None or (isinstance(x, float) and math.isnan(x)) else float(x)


def wigner_kirkwood_reference(settings: dict) -> float:
    """ΔA to order ħ² from the engine's forces, kJ/mol of atoms, sample-consistent form.

    ΔA = ħ² ⟨Σ|F|²/m⟩ / (24 k² T T_kin): the exact ħ² term [5] with ⟨Σ|F|²/m⟩, which is
    proportional to T, rescaled by T/T_kin of the same frames (a ratio estimator that
    removes the sampling scatter of the run's mean temperature, which the spectrum,
    normalised to the degrees of freedom, does not carry).
    """
    temperature = settings["state"]["temperature_K"]
    t_kin = settings["observed"]["kinetic_temperature_K"]["mean"]
    force2 = settings["observed"]["force_squared_over_mass_per_atom_SI"]["mean"]
    per_atom_J = hbar_J_s**2 * force2 / (24.0 * boltzmann_J_per_K**2 * temperature * t_kin)
    return per_atom_J * avogadro_per_mol / 1000.0


def copper_comparisons(spec, settings: dict, frame) -> list[Comparison]:
    T = spec.temperature_K
    out = []
    cv = _row(frame, "heat_capacity", "per_mole_atoms")
    reference, source = copper_lattice_cv_reference(T)
    low_T = T < 200
    out.append(Comparison(
        system=spec.name, quantity="heat capacity Cv", unit="J/(mol K) per mole of atoms",
        classical=_value(cv.classical), quantum=_value(cv.quantum), correction=_value(cv.correction),
        standard_error=_value(cv.quantum_se), compared="quantum",
        reference=reference, reference_source=source,
        reference_status="from memory (handbook values not re-read)",
        tolerance=1.2 if low_T else 0.6,
        tolerance_reason=(
            "7.5 %: at T ≈ 0.3 θ_D a 5 % error of the EMT phonon frequencies moves Cv by about "
            "0.5 J/(mol K) (Debye-model slope); reference from memory; Cp − Cv and γT uncertain by ~0.05"
            if low_T else
            "2.5 %: near θ_D Cv is insensitive to the phonon frequencies (10 % → 0.2 J/(mol K)); "
            "the anharmonic Cv of the MD (~+1 % of 3R at 300 K) is absent from the harmonic "
            "classical value; Cp − Cv inputs from memory (±0.1)"
        ),
        explanation=(
            "Below θ_D the correction is large (−40 % of 3R), so the result tests the EMT phonon "
            "spectrum: it lies "
            + ("below" if (cv.quantum - reference) < 0 else "above")
            + " the handbook value because EMT copper is a little stiffer than real copper (its "
            "spectrum reaches beyond the measured band top near 243 cm⁻¹) and the 14 Å box holds no "
            "longer-wavelength phonons; both lower Cv well below θ_D."
            if low_T else
            "Close to θ_D the correction is small (−5 % of 3R); the residual reflects the anharmonic "
            "Cv that the harmonic classical value (dof·R) leaves out and the Cp − Cv and electronic "
            "terms taken from memory."
        ),
    ))
    if not low_T:
        a = _row(frame, "helmholtz_free_energy", "per_mole_atoms")
        wk = wigner_kirkwood_reference(settings)
        out.append(Comparison(
            system=spec.name, quantity="free-energy correction ΔA", unit="kJ/mol per mole of atoms",
            classical=None, quantum=None, correction=_value(a.correction),
            standard_error=_value(a.correction_se), compared="correction",
            reference=wk,
            reference_source="Wigner–Kirkwood ħ² term from the engine's forces, ħ²⟨Σ|F|²/m⟩/(24 k² T T_kin)",
            reference_status="computed (independent of qcorr)",
            tolerance=0.03 * wk,
            tolerance_reason=(
                "3 %: next term of the harmonic expansion is −u⁴/2880 vs u²/24, i.e. ≤ u_max²/120 ≈ 1.2 % "
                "for u_max = hcν_max/kT ≈ 1.2; Hann-window broadening adds 1/(3 T_seg²) to ⟨ν²⟩ "
                "(0.3 %); segment scatter ≈ 0.5 %"
            ),
            explanation=(
                "To order ħ² the spectrum's second moment equals ⟨Σ|F|²/m⟩/kT exactly (classical sum "
                "rule), so agreement tests qcorr's normalisation, frequency units and integration "
                "against the engine's forces; the small remainder is the u⁴ term."
            ),
        ))
    zpe = _row(frame, "zero_point_energy", "per_mole_atoms")
    debye_zpe = 9.0 / 8.0 * gas_constant_J_per_mol_K * COPPER_DEBYE_TEMPERATURE_K / 1000.0
    out.append(Comparison(
        system=spec.name, quantity="zero-point energy", unit="kJ/mol per mole of atoms",
        classical=0.0, quantum=_value(zpe.quantum), correction=_value(zpe.correction),
        standard_error=_value(zpe.quantum_se), compared="quantum",
        reference=debye_zpe,
        reference_source=f"Debye model, E₀ = (9/8) R θ_D with θ_D = {COPPER_DEBYE_TEMPERATURE_K:g} K (Kittel)",
        reference_status="computed (model)",
        tolerance=0.15 * debye_zpe,
        tolerance_reason="not tested: the Debye model only approximates the first moment of a real phonon spectrum",
        explanation=(
            "The zero-point energy measures the mean phonon frequency; the Debye model with the "
            "calorimetric θ_D is only a rough guide to it."
        ),
        tested=False,
    ))
    return out


def argon_liquid_entropy_reference() -> float:
    """Entropy of liquid argon at its normal boiling point, J/(mol K), from gas data.

    S_l(T_b) = S°_g(298.15 K) − (5R/2) ln(298.15/T_b) − R ln(1.01325) − ΔH_vap/T_b: the
    ideal gas brought to T_b and 1 atm, then condensed.  Gas non-ideality at T_b (about
    1 J/(mol K)) is neglected.
    """
    R = gas_constant_J_per_mol_K
    gas = (
        ARGON_GAS_ENTROPY_298_J_PER_MOL_K
        - 2.5 * R * math.log(298.15 / ARGON_BOILING_POINT_K)
        - R * math.log(1.01325)
    )
    return gas - ARGON_VAPORIZATION_ENTHALPY_KJ_PER_MOL * 1000.0 / ARGON_BOILING_POINT_K


def argon_comparisons(spec, settings: dict, frame, liquid_frame=None) -> list[Comparison]:
    T = spec.temperature_K
    wk = wigner_kirkwood_reference(settings)
    a = _row(frame, "helmholtz_free_energy", "per_mole_atoms")
    e = _row(frame, "energy", "per_mole_atoms")
    cv = _row(frame, "heat_capacity", "per_mole_atoms")
    common = dict(system=spec.name, classical=None, quantum=None, compared="correction")
    out = [
        Comparison(
            quantity="free-energy correction ΔA", unit="kJ/mol per mole of atoms",
            correction=_value(a.correction), standard_error=_value(a.correction_se),
            reference=wk,
            reference_source="Wigner–Kirkwood ħ² term from the engine's forces, ħ²⟨Σ|F|²/m⟩/(24 k² T T_kin)",
            reference_status="computed (independent of qcorr)",
            tolerance=0.03 * wk,
            tolerance_reason=(
                "3 %: the u⁴ term of the harmonic expansion is ≈ ⟨u⁴⟩/(120⟨u²⟩) < 1 % for argon's "
                "⟨u²⟩ ≈ 0.5; Hann-window broadening of ⟨ν²⟩ 1/(3 T_seg²) ≈ 0.6 % for 6 ps segments; "
                "segment scatter ≈ 1 %"
            ),
            explanation=(
                "For a liquid the harmonic correction is not exact, but to order ħ² it must equal the "
                "Wigner–Kirkwood term, which the engine's forces give directly; argon near its triple "
                f"point is only weakly quantum (ΔA ≈ {wk * 1000.0 / (gas_constant_J_per_mol_K * T):.2f} RT)."
            ),
            **common,
        ),
        Comparison(
            quantity="energy correction ΔE", unit="kJ/mol per mole of atoms",
            correction=_value(e.correction), standard_error=_value(e.correction_se),
            reference=2 * wk,
            reference_source="2 × Wigner–Kirkwood ΔA (ΔE = 2ΔA when ⟨|F|²⟩ ∝ T)",
            reference_status="computed (independent of qcorr)",
            tolerance=0.05 * 2 * wk,
            tolerance_reason="not tested: ΔE = 2ΔA assumes ⟨|F|²⟩ ∝ T, true only in the harmonic limit",
            explanation="Agreement shows the spectrum behaves harmonically to order ħ².",
            tested=False,
            **common,
        ),
        Comparison(
            quantity="heat-capacity correction ΔCv", unit="J/(mol K) per mole of atoms",
            correction=_value(cv.correction), standard_error=_value(cv.correction_se),
            reference=-2 * wk * 1000.0 / T,
            reference_source="−2ΔA/T from the Wigner–Kirkwood ΔA (harmonic-limit relation)",
            reference_status="computed (independent of qcorr)",
            tolerance=0.08 * 2 * wk * 1000.0 / T,
            tolerance_reason="not tested: the next term (u⁴/240 vs u²/12) is ≈ 5 % here, and ⟨|F|²⟩ ∝ T is assumed",
            explanation="A small negative correction (≈ −0.1 R): light quantum effects in liquid argon.",
            tested=False,
            **common,
        ),
    ]
    if liquid_frame is not None:
        rows = liquid_frame[(liquid_frame.property == "entropy") & (liquid_frame.basis == "per_mole_molecules")
                            & (liquid_frame.group == "total")]
        if len(rows) == 1:
            row = rows.iloc[0]
            out.append(Comparison(
                system=spec.name, quantity="2PT entropy (qcorr liquid)", unit="J/(mol K) per mole of atoms",
                classical=_value(row.classical), quantum=_value(row.quantum), correction=_value(row.correction),
                standard_error=_value(row.quantum_se), compared="quantum",
                reference=argon_liquid_entropy_reference(),
                reference_source=(
                    "real liquid argon at 87.30 K and 1 atm: S°(g, 298.15 K) = 154.846 (NIST/CODATA) − "
                    "(5R/2) ln(298.15/87.30) − R ln 1.01325 − ΔH_vap/T_b with ΔH_vap = 6.43 kJ/mol"
                ),
                reference_status="from memory (ΔH_vap); computed",
                tolerance=2.0,
                tolerance_reason=(
                    "not tested: a Lennard-Jones model at 86.5 K and 1.42 g/cm³ is compared with real argon at "
                    "87.3 K and 1 atm (≈ 1.40 g/cm³), gas non-ideality is neglected (≈ 1 J/(mol K)), ΔH_vap is "
                    "from memory; the proper reference is a Lennard-Jones equation of state, not implemented here"
                ),
                explanation=(
                    "2PT (Lin, Blanco, Goddard 2003) splits the spectrum into a hard-sphere gas and a solid; "
                    "for argon near its triple point it lands near the calorimetric entropy of the real liquid."
                ),
                tested=False,
            ))
    return out


def water_band_values(spectrum_path: Path, temperature_K: float) -> dict[str, float]:
    """Degrees of freedom and ZPE of the intramolecular band, per molecule / per mole.

    ZPE = ½ h c ∫ S(ν̃) ν̃ dν̃ over ν̃ ≥ the cut (trapezoid rule on the spectrum's grid),
    the harmonic zero-point energy of the modes in that band; divided by the number of
    molecules and multiplied by N_A.
    """
    import xarray as xr

    with xr.open_dataset(spectrum_path, engine="h5netcdf") as ds:
        x = np.asarray(ds["wavenumber"].values, dtype=float)
        s = np.asarray(ds["vdos"].sel(group="total").values, dtype=float)
        molecules = float(ds["molecule_count"].sel(group="total").values)
    band = x >= WATER_INTRAMOLECULAR_CUT_CM
    bend = (x >= WATER_INTRAMOLECULAR_CUT_CM) & (x < 2500.0)
    stretch = x >= 2500.0
    dof_band = float(np.trapezoid(s[band], x[band]))
    zpe_band = 0.5 * planck_J_s * speed_of_light_cm_per_s * float(np.trapezoid(s[band] * x[band], x[band]))
    zpe_all = 0.5 * planck_J_s * speed_of_light_cm_per_s * float(np.trapezoid(s * x, x))
    to_molar = avogadro_per_mol / molecules / 1000.0
    return {
        "dof_per_molecule": dof_band / molecules,
        "zpe_band_kJ_per_mol": zpe_band * to_molar,
        "zpe_all_kJ_per_mol": zpe_all * to_molar,
        "bend_peak_cm": float(x[bend][np.argmax(s[bend])]),
        "stretch_peak_cm": float(x[stretch][np.argmax(s[stretch])]),
    }


def water_comparisons(spec, settings: dict, frame, spectrum_path: Path) -> list[Comparison]:
    T = spec.temperature_K
    cv = _row(frame, "heat_capacity", "per_mole_molecules")
    zpe = _row(frame, "zero_point_energy", "per_mole_molecules")
    band = water_band_values(spectrum_path, T)
    corrections = list(WATER_FLEXIBLE_MODEL_CORRECTIONS.values())
    low, high = min(corrections), max(corrections)
    mid, half = (low + high) / 2, (high - low) / 2
    reference_zpe = 0.5 * planck_J_s * speed_of_light_cm_per_s * sum(WATER_FUNDAMENTALS_CM) * avogadro_per_mol / 1000.0
    return [
        Comparison(
            system=spec.name, quantity="heat-capacity correction ΔCv", unit="J/(mol K) per mole of molecules",
            classical=_value(cv.classical), quantum=_value(cv.quantum), correction=_value(cv.correction),
            standard_error=_value(cv.correction_se), compared="correction",
            reference=mid,
            reference_source=(
                f"range {low:.1f} … {high:.1f} of the corrections implied by Berta et al., J. Chem. Theory "
                "Comput. 16, 3316 (2020), Table 1, for flexible models (classical → corrected Cp)"
            ),
            reference_status="paper",
            tolerance=half + 5.0,
            tolerance_reason=(
                f"the published range (±{half:.1f}) widened by 5 J/(mol K) for model differences "
                "(flexible TIP3P's librations and force constants are not those of the listed models)"
            ),
            explanation=(
                "The correction is negative and large because the three intramolecular modes (u ≈ 8–18) "
                "and the librations (u ≈ 2–4) are frozen out quantum mechanically; with the classical "
                "MD Cp of flexible models (104–124 J/(mol K), Berta Table 1) it moves Cp toward the "
                f"experimental {WATER_CP_EXPERIMENT_J_PER_MOL_K} J/(mol K). The classical column is the "
                "harmonic dof·R, not an MD heat capacity."
            ),
        ),
        Comparison(
            system=spec.name, quantity="zero-point energy of the intramolecular band (ν̃ ≥ 1150 cm⁻¹)",
            unit="kJ/mol per mole of molecules",
            classical=0.0, quantum=band["zpe_band_kJ_per_mol"], correction=band["zpe_band_kJ_per_mol"],
            compared="quantum",
            reference=reference_zpe,
            reference_source="½ N_A h c Σν̃ of the H2O(g) fundamentals 3657, 1595, 3756 cm⁻¹ (NIST CCCBDB)",
            reference_status="handbook (database)",
            tolerance=0.10 * reference_zpe,
            tolerance_reason=(
                "10 %: gas fundamentals lie ≈ 4–5 % below the harmonic frequencies that a harmonic-bond "
                "model reproduces; the liquid red-shifts real O–H stretches by ≈ 3 %, which harmonic "
                "bonds barely show; the 0.5 fs Verlet step blue-shifts the stretch by ≈ 0.5 %"
            ),
            explanation=(
                f"The model's bend peaks at {band['bend_peak_cm']:.0f} cm⁻¹ (gas fundamental 1595) and its "
                f"stretch band at {band['stretch_peak_cm']:.0f} cm⁻¹ (gas 3657/3756; liquid water's "
                "stretch band is red-shifted to ≈ 3400 cm⁻¹, common practice): the CHARMM harmonic force "
                "constants place the bend too high and the stretches low, and the two errors partly "
                "cancel in ½Σhν."
            ),
        ),
        Comparison(
            system=spec.name, quantity="degrees of freedom in the intramolecular band",
            unit="per molecule",
            classical=None, quantum=band["dof_per_molecule"], correction=None, compared="quantum",
            reference=3.0,
            reference_source="3 intramolecular modes per H2O molecule (3N − 6 for N = 3)",
            reference_status="common practice",
            tolerance=0.15,
            tolerance_reason=(
                "not tested: 3 per molecule holds exactly only for uncoupled harmonic modes; in the "
                "liquid the band's share of the kinetic energy also scatters by about sqrt(2/3N) per "
                "vibrational relaxation time (≈ 1 ps), ±0.05 here, and the librational tail crosses the cut"
            ),
            explanation=(
                "Shows how cleanly the band split used for the zero-point energy above separates "
                "intramolecular from intermolecular motion."
            ),
            tested=False,
        ),
        Comparison(
            system=spec.name, quantity="zero-point energy, whole spectrum (qcorr properties)",
            unit="kJ/mol per mole of molecules",
            classical=0.0, quantum=_value(zpe.quantum), correction=_value(zpe.correction),
            standard_error=_value(zpe.quantum_se), compared="quantum",
            reference=band["zpe_all_kJ_per_mol"],
            reference_source="½ N_A h c ∫S(ν̃) ν̃ dν̃ computed here from the spectrum file",
            reference_status="computed (direct formula)",
            tolerance=1e-6 * band["zpe_all_kJ_per_mol"],
            tolerance_reason="same integral by two routes: rounding only",
            explanation=(
                "Intermolecular modes (translations, librations) add about "
                f"{band['zpe_all_kJ_per_mol'] - band['zpe_band_kJ_per_mol']:.1f} kJ/mol to the intramolecular ZPE."
            ),
        ),
    ]


def evaluate(data_dir: Path, work_dir: Path, systems: list[str] | None = None, jobs: int = 1):
    """Make/reuse the validation data, run qcorr, return (comparisons, settings, seconds)."""
    specs = engines.select_specs(systems, engines.VALIDATION_SYSTEMS)
    import pandas as pd

    settings = engines.make_systems(specs, data_dir, jobs=jobs)
    comparisons: list[Comparison] = []
    seconds: dict[str, float] = {}
    for spec in specs:
        start = time.perf_counter()
        spectrum, table = run_qcorr(spec, data_dir, work_dir)
        seconds[spec.name] = time.perf_counter() - start
        frame = pd.read_csv(table)
        if spec.kind == "crystal":
            comparisons += copper_comparisons(spec, settings[spec.name], frame)
        elif spec.kind == "water":
            comparisons += water_comparisons(spec, settings[spec.name], frame, spectrum)
        else:
            liquid_frame = run_liquid(spec, spectrum, work_dir)
            comparisons += argon_comparisons(spec, settings[spec.name], frame, liquid_frame)
    return comparisons, settings, seconds


# --------------------------------------------------------------------------------------
# Markdown
# --------------------------------------------------------------------------------------


def _fmt(x: float | None, digits: int = 4) -> str:
    if x is None:
        return "–"
    return f"{x:.{digits}g}"


def render(comparisons: list[Comparison], settings: dict, seconds: dict[str, float]) -> str:
    today = datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d")
    lines = [
        "# Validation: qcorr on trajectories from real MD engines",
        "",
        f"Written by `scripts/write_validation_report.py` on {today} with qcorr {qcorr_version}; "
        "do not edit by hand. The trajectories come from `scripts/make_validation_data.py` "
        "(fixed seeds; every setting is recorded in each system's `settings.json`). "
        "`tests/test_validation.py` runs the same comparisons and fails when a tested value leaves "
        "its tolerance.",
        "",
        "Reference status: *handbook*/*paper* = read from the named source; *from memory* = quoted "
        "from memory of the named source, not re-read (provisional); *computed* = an independent "
        "calculation made here; *common practice* = a fact of the trade.",
        "",
        "## Systems",
        "",
        "| system | engine, model | atoms | T (K) | production (ps) | frame spacing (fs) | "
        "production thermostat | segment (ps) | mean kinetic T (K) |",
        "|---|---|---|---|---|---|---|---|---|",
    ]
    for name, s in settings.items():
        lines.append(
            f"| `{name}` | {s['engine']['name']} {s['engine']['version']}: {s['model']['description']} | "
            f"{s['state']['atom_count']} | {s['state']['temperature_K']:g} | {s['run']['production_ps']:g} | "
            f"{s['run']['frame_interval_fs']:g} | {s['run']['production_thermostat']} | "
            f"{s['recommended_analysis']['segment_ps']:g} | "
            f"{s['observed']['kinetic_temperature_K']['mean']:.2f} |"
        )
    lines += [
        "",
        "## Results",
        "",
        "Quantum-corrected = classical + correction (Berens, Mackay, White, Wilson, J. Chem. Phys. 79, "
        "2375 (1983)); the classical column is the harmonic-model value (degrees of freedom × k for "
        "Cv). The compared value is marked **bold**. ± is qcorr's standard error from the segment spectra.",
        "",
    ]
    for name in settings:
        rows = [c for c in comparisons if c.system == name]
        if not rows:
            continue
        lines += [f"### `{name}`", ""]
        lines += [
            "| quantity | unit | classical | quantum-corrected | correction | reference | difference | "
            "tolerance | status |",
            "|---|---|---|---|---|---|---|---|---|",
        ]
        for c in rows:
            q = _fmt(c.quantum)
            d = _fmt(c.correction)
            se = f" ± {_fmt(c.standard_error, 2)}" if c.standard_error is not None else ""
            if c.compared == "quantum":
                q = f"**{q}**{se}"
            else:
                d = f"**{d}**{se}"
            verdict = ("pass" if c.passed else "**FAIL**") if c.tested else "not tested"
            lines.append(
                f"| {c.quantity} | {c.unit} | {_fmt(c.classical)} | {q} | {d} | {_fmt(c.reference)} | "
                f"{c.difference:+.3g} | ±{_fmt(c.tolerance, 2)} | {verdict} |"
            )
        lines.append("")
        for c in rows:
            lines += [
                f"* **{c.quantity}.** {c.explanation} "
                f"Reference: {c.reference_source} [{c.reference_status}]. Tolerance: {c.tolerance_reason}.",
            ]
        lines.append("")
    left_out = [name for name in engines.VALIDATION_SYSTEMS if name not in settings]
    if left_out:
        lines += [
            "## Not in this run",
            "",
            "This page was written for part of the validation set only; left out: "
            + ", ".join(f"`{name}`" for name in left_out)
            + ". Run the script without `--systems` for all of them.",
            "",
        ]
    lines += [
        "## Reproducing this page",
        "",
        "```bash",
        "python scripts/make_validation_data.py --jobs 2     # trajectories (cached in $QCORR_VALIDATION_DIR",
        "                                                    # or ~/.cache/qcorr-validation)",
        "python scripts/write_validation_report.py          # runs qcorr spectrum + qcorr properties, writes this page",
        "python -m pytest tests/test_validation.py          # the same comparisons as tests",
        "```",
        "",
        "For each system the report runs `qcorr spectrum --topology topology.pdb --trajectory "
        "trajectory.trr --temperature T --segment-ps S` with T and S from the Systems table, then "
        "`qcorr properties`.",
        "",
        "## Cost",
        "",
        "| system | trajectory generation, wall (s) | CPU (s) | qcorr spectrum + properties, wall (s) |",
        "|---|---|---|---|",
    ]
    for name, s in settings.items():
        lines.append(
            f"| `{name}` | {s.get('wall_time_s', float('nan')):.0f} | {s.get('cpu_time_s', float('nan')):.0f} | "
            f"{seconds.get(name, float('nan')):.1f} |"
        )
    lines += [
        "",
        "Generation times were measured on a shared 2-core machine; the data are cached and reused.",
        "",
    ]
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Run qcorr on the validation set and write docs/validation.md.")
    parser.add_argument("--data-dir", type=Path, default=None,
                        help="validation trajectories (default: $QCORR_VALIDATION_DIR or ~/.cache/qcorr-validation)")
    parser.add_argument("--work-dir", type=Path, default=None,
                        help="keep spectrum files and tables here (default: a temporary directory)")
    parser.add_argument("--output", type=Path, default=DEFAULT_OUTPUT, help=f"report to write (default {DEFAULT_OUTPUT})")
    parser.add_argument("--jobs", type=int, default=1, help="systems generated at once (default 1)")
    parser.add_argument("--systems", nargs="+", default=None, metavar="NAME",
                        help="only these systems (default: all); the page names the ones left out")
    args = parser.parse_args(argv)
    try:
        if args.jobs < 1:
            raise ConfigError(f"--jobs must be at least 1, got {args.jobs}")
        data_dir = args.data_dir or engines.default_output_dir()
        with tempfile.TemporaryDirectory(prefix="qcorr-validation-work-") as tmp:
            work_dir = args.work_dir or Path(tmp)
            work_dir.mkdir(parents=True, exist_ok=True)
            comparisons, settings, seconds = evaluate(data_dir, work_dir, systems=args.systems, jobs=args.jobs)
        write_text_atomic(args.output, render(comparisons, settings, seconds))
        failed = [c for c in comparisons if c.tested and not c.passed]
        for c in comparisons:
            status = ("ok  " if c.passed else "FAIL") if c.tested else "info"
            print(f"{status} {c.system}: {c.quantity}: {c.value:.4g} vs {c.reference:.4g} (±{c.tolerance:.2g})")
        print(f"wrote {args.output}", file=sys.stderr)
    except QcorrError as err:
        print(f"write_validation_report: error: {err}", file=sys.stderr)
        return 2
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
