"""The corrected heat of vaporisation of a liquid–gas pair of runs of one molecule.

With the corrected tables of a liquid run and a gas-phase run of the same molecule and
force field at one temperature (``qcorr corrected``), per mole of molecules:

    ΔH_vap,classical = H_gas − H_liquid,
    H_gas    = ⟨H⟩ of an NPT gas run, or ⟨E⟩ + RT (ideal gas) of an NVT or NVE gas run,
    H_liquid = ⟨H⟩ = ⟨E + pV⟩ of an NPT liquid run, or ⟨E⟩ of an NVT or NVE one (pV neglected),
    ΔH_vap,corrected = ΔH_vap,classical + (ΔE_gas − ΔE_liquid),

with ΔE the harmonic energy correction (zero-point energy included) of each run's spectrum
(Berens, Mackay, White, Wilson, J. Chem. Phys. 79, 2375 (1983)); the pV terms are classical.
The assumptions are listed in :data:`VAPORISATION_ASSUMPTIONS` and written to the table.
"""

from __future__ import annotations

import math
import os

import pandas as pd

from qcorr import constants as C
from qcorr import units
from qcorr.baselines.corrected import Reference
from qcorr.errors import ConfigError
from qcorr.outputs.table import TableRow, read_table, rows_to_frame

#: the assumptions behind the corrected heat of vaporisation (written as cautions)
VAPORISATION_ASSUMPTIONS = (
    "Heat of vaporisation: the two runs are the same molecule and force field at the same "
    "temperature; the gas is ideal (H = E + RT per mole) unless the gas run is NPT.",
    "The quantum correction is the difference of the two phases' harmonic energy corrections "
    "(zero-point energy included); the pV terms are classical.  The gas run's translations and "
    "free rotations are treated as harmonic modes of their spectrum, which they are not: this "
    "overstates the gas's correction (0.9 kJ/mol for rigid SPC/E water at 298 K, "
    "docs/corrected_water.md); it is small only where the spectrum lies far below kT/h.",
    "Bonds constrained in the MD are absent from both spectra: their zero-point energies, and "
    "the shift of those energies between the phases, are not in the correction.",
    "Energies are on the engine's energy scale (potential zero, cutoff and long-range "
    "corrections) of each run; the difference is meaningful only if both runs use the same "
    "model and treatment.",
)


def _mean(frame: pd.DataFrame, label: str, phase: str) -> tuple[float, float, str, str]:
    """(H, SE, how, classical_source) of one phase, kJ/mol per mole of molecules."""
    attrs = frame.attrs
    if "harmonic_corrections" not in attrs:
        raise ConfigError(f"--{phase} '{label}' is not a 'qcorr corrected' table; give the table it wrote")

    def row(prop):
        rows = frame[(frame["method"] == "corrected") & (frame["property"] == prop)
                 & (frame["basis"] == "per_mole_molecules")]
        return rows.iloc[0] if len(rows) else None

    enthalpy, energy = row("enthalpy"), row("energy")
    if enthalpy is not None:
        se = float(enthalpy["classical_se"])
        return float(enthalpy["classical"]), se, "<H> (NPT)", str(enthalpy["classical_source"])
    if energy is None:
        raise ConfigError(f"--{phase} '{label}' has no mean energy or enthalpy (an energy file of the run, or "
                          "a user value)")
    value, se = float(energy["classical"]), float(energy["classical_se"])
    if phase == "gas":
        rt = C.gas_constant_J_per_mol_K * float(attrs["temperature_K"]) / 1000.0
        return value + rt, se, "<E> + RT (ideal gas)", str(energy["classical_source"])
    return value, se, "<E> (pV neglected)", str(energy["classical_source"])


def vaporisation_enthalpy(
    liquid: str | os.PathLike[str] | pd.DataFrame,
    gas: str | os.PathLike[str] | pd.DataFrame,
    *,
    name: str,
    reference: Reference | None = None,
) -> pd.DataFrame:
    """Corrected heat of vaporisation of a liquid–gas pair (module docstring), kJ/mol.

    Parameters
    ----------
    liquid, gas : path-like or pandas.DataFrame
        The ``qcorr corrected`` tables of the liquid and the gas-phase run.
    name : str
        The pair's name: the ``system`` column of the row.
    reference : Reference, optional
        A reference ΔH_vap (kJ/mol) with its source.

    Returns
    -------
    pandas.DataFrame
        One row, property ``vaporisation_enthalpy`` (method ``corrected``, per mole of
        molecules); ``attrs`` holds the inputs, the parts and the assumptions (``cautions``).

    Raises
    ------
    ConfigError
        Not corrected tables, different temperatures or molecules, no mean energy.
    """
    if not str(name).strip():
        raise ConfigError("--name: give the pair a non-empty name")
    frames, labels = [], []
    for item, phase in ((liquid, "liquid"), (gas, "gas")):
        frames.append(item if isinstance(item, pd.DataFrame) else read_table(item))
        labels.append(f"{phase} table (in memory)" if isinstance(item, pd.DataFrame) else os.fspath(item))
    (liq, gas_frame), (liq_label, gas_label) = frames, labels
    t_l, t_g = (float(f.attrs.get("temperature_K", math.nan)) for f in frames)
    if not math.isclose(t_l, t_g, rel_tol=1e-9):
        raise ConfigError(f"--liquid '{liq_label}' is at {t_l:g} K and --gas '{gas_label}' at {t_g:g} K; "
                          "the heat of vaporisation needs both at one temperature")
    m_l, m_g = (float(f.attrs.get("molecule_mass_g_mol", math.nan)) for f in frames)
    if not math.isclose(m_l, m_g, rel_tol=1e-6):
        raise ConfigError(f"--liquid '{liq_label}' has molecules of {m_l:.6g} g/mol and --gas '{gas_label}' "
                          f"of {m_g:.6g} g/mol: not the same molecule")
    h_l, se_l, how_l, src_l = _mean(liq, liq_label, "liquid")
    h_g, se_g, how_g, src_g = _mean(gas_frame, gas_label, "gas")
    e_l, e_g = (f.attrs["harmonic_corrections"]["energy"] for f in frames)
    classical, classical_se = h_g - h_l, math.hypot(se_g, se_l)
    correction = float(e_g["value"]) - float(e_l["value"])
    correction_se = math.hypot(float(e_g["standard_error"]), float(e_l["standard_error"]))
    quantum, quantum_se = classical + correction, math.hypot(classical_se, correction_se)
    ref = {}
    if reference is not None:
        ref_se = reference.standard_error if math.isfinite(reference.standard_error) else 0.0
        ref = {"reference": reference.value,
               "reference_se": reference.standard_error if math.isfinite(reference.standard_error) else None,
               "reference_source": reference.source, "deviation": quantum - reference.value,
               "deviation_se": math.hypot(quantum_se, ref_se)}
    # one token for the column: a typed-in part makes the whole a user value
    source = "user_value" if "user_value" in (src_l, src_g) else src_l
    row = TableRow(
        system=name, group=str(liq["group"].iloc[0]), method="corrected", property="vaporisation_enthalpy",
        temperature_K=t_l, basis="per_mole_molecules", unit=units.MOLAR_ENERGY, classical=classical,
        quantum=quantum, correction=correction, classical_se=classical_se, quantum_se=quantum_se,
        correction_se=correction_se, classical_source=source,
        note=(f"classical: H_gas [{how_g}, {src_g}] - H_liquid [{how_l}, {src_l}]; correction: Delta E(gas) - Delta E(liquid), "
              "harmonic, zero-point energy included; assumptions in the sidecar's cautions"),
        **ref)
    frame = rows_to_frame([row])
    frame.attrs = {
        "method": "heat of vaporisation from a liquid and a gas-phase run, plus the difference of their "
                  "harmonic energy corrections",
        "inputs": {"liquid": liq_label, "gas": gas_label},
        "parts_kJ_per_mol": {"H_liquid": [h_l, se_l, how_l], "H_gas": [h_g, se_g, how_g],
                             "Delta_E_liquid": [float(e_l["value"]), float(e_l["standard_error"])],
                             "Delta_E_gas": [float(e_g["value"]), float(e_g["standard_error"])]},
        "options": {"name": name, "reference": None if reference is None else reference.as_json()},
        "cautions": list(VAPORISATION_ASSUMPTIONS),
    }
    return frame
