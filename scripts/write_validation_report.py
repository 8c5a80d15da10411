#!/usr/bin/env python
"""Run qcorr on the validation set and write ``docs/validation.md``.

For each validation system (``scripts/make_validation_data.py``) this script runs the two
commands a user runs – ``qcorr spectrum`` and ``qcorr properties`` – reads the property
table, and sets values beside references from outside qcorr.  Each row is one of three
kinds:

* **validation** – a reference independent of qcorr's code (lattice dynamics of the same
  crystal, the Wigner–Kirkwood ħ² term from the engine's own forces) with a tolerance
  built from named parts: the reference's uncertainty and the known limits of the method,
  each stated with its size and reason; the parts add (worst case).
  ``tests/test_validation.py`` fails when such a row leaves its tolerance;
* **informational** – a comparison with a real substance or published model results where
  no tolerance can be derived (the force field's own error against the real substance is
  not known from a source); shown with its sourced reference and the reason, never counted
  as a pass;
* **consistency** – the same quantity computed two ways from the same data (an internal
  check of the implementation, not a validation), listed in their own section.

Usage::

    python scripts/write_validation_report.py [--data-dir DIR] [--work-dir DIR]
                                              [--output docs/validation.md]

The data directory defaults to ``$QCORR_VALIDATION_DIR`` or ``~/.cache/qcorr-validation``;
missing or outdated systems are made first (a few minutes).  Spectrum files and tables go
to ``--work-dir`` (default: a temporary directory, removed afterwards).

Reference status words: *handbook* / *paper* / *standard* (read from the named source),
*from memory* (quoted from memory of the named source and not re-read: provisional),
*computed* (an independent calculation made here from the named formula), *common
practice* (a fact of the trade).  The real-substance data come from ``tests/reference_data.py``.

References: the numbered list :data:`REFERENCES`, printed at the end of the page; [n] in
the texts below points into it.
"""

from __future__ import annotations

import argparse
import dataclasses
import datetime
import math
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(1, str(Path(__file__).resolve().parent.parent / "tests"))

import make_validation_data as engines  # noqa: E402
import reference_data as real  # noqa: E402

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

#: numbered references cited as [n] in the row texts (printed on the page)
REFERENCES = (
    'P. H. Berens, D. H. J. Mackay, G. M. White, K. R. Wilson, J. Chem. Phys. 79, 2375 (1983).',
    'CRC Handbook of Chemistry and Physics, 97th ed., "Heat capacity of the elements at 25 °C" (read in a secondary table citing it).',
    'NIST Cryogenic Technologies Group, "Material Properties: OFHC Copper (UNS C10100/C10200)", curve fits of the specific heat and the linear expansion coefficient, 4–300 K.',
    'D. L. Martin, Phys. Rev. B 8, 5357 (1973): γ and θ₀ of copper.',
    'E. Wigner, Phys. Rev. 40, 749 (1932); J. G. Kirkwood, Phys. Rev. 44, 31 (1933); L. D. Landau, E. M. Lifshitz, Statistical Physics Part 1, §33.',
    'Á. Berta, D. Ferenc, I. Bakó, Á. Madarász, J. Chem. Theory Comput. 16, 3316 (2020), Table 1.',
    'NIST Computational Chemistry Comparison and Benchmark Database (CCCBDB), H2O experimental vibrational fundamentals 3657, 1595, 3756 cm⁻¹.',
    'IAPWS R6-95(2018), Revised Release on the IAPWS Formulation 1995 for the Thermodynamic Properties of Ordinary Water Substance (W. Wagner, A. Pruß, J. Phys. Chem. Ref. Data 31, 387 (2002)), via the ``iapws`` package.',
    'Ch. Tegeler, R. Span, W. Wagner, J. Phys. Chem. Ref. Data 28, 779 (1999), via CoolProp.',
    'M. Born, K. Huang, Dynamical Theory of Crystal Lattices (Oxford, 1954): harmonic lattice dynamics from the force-constant matrix (common practice).',
)

#: statistical parts of tolerances: this many standard errors ("3 standard errors", common practice)
STANDARD_ERRORS = 3.0

# --------------------------------------------------------------------------------------
# Reference data not in tests/reference_data.py (every number names its source and status)
# --------------------------------------------------------------------------------------

#: Classical → quantum-corrected Cp of flexible water models in Berta et al. (2020), Table 1
#: [6] (J/(mol K), as stored in PMC7304866, table 1), by method: the group "1PT or 1PT+AC" is
#: the harmonic correction of the whole spectrum (Berens et al. [1]), the method of
#: ``qcorr properties``, in some rows with an anharmonic correction added (the footnote letters
#: saying which are not legible in the stored copy); "GSTA" is the paper's own (anharmonic) method.  Values are the printed pairs (corrected,
#: classical); most literature pairs there were converted from Cv with cp = cV + 0.8, which
#: cancels in the difference.
WATER_FLEXIBLE_1PT_PAIRS = {
    "AMOEBA14": (85.7, 110.6),
    "F3C": (84.5, 109.6),
    "SPC/E (flexible)": (86.6, 123.7),
    "WATTS": (72.5, 107.3),
}
WATER_TIP3F_GSTA_PAIR = ((72.8, 0.7), (106.9, 0.6))  # (value, ±) corrected, classical

#: H2O(g) experimental fundamentals, cm⁻¹ (NIST CCCBDB [7]).
WATER_FUNDAMENTALS_CM = (3657.0, 1595.0, 3756.0)
#: Lower edge of the intramolecular band of liquid water in the spectrum, cm⁻¹: above
#: the librational band (which fades out by about 1000–1100 cm⁻¹) and below the H–O–H
#: bend (≈ 1600–1700 cm⁻¹); common practice for splitting water's spectrum.
WATER_INTRAMOLECULAR_CUT_CM = 1150.0

#: finite-difference step for the EMT force constants, Å: small against the thermal
#: amplitude (≈ 0.1 Å at 300 K) so the cubic anharmonic term, which the central
#: difference cancels, and the quartic one (relative error O(h²)) stay negligible
LATTICE_DYNAMICS_STEP_A = 0.01


# --------------------------------------------------------------------------------------
# Independent calculations
# --------------------------------------------------------------------------------------


def einstein_heat_capacity(wavenumbers_cm: np.ndarray, temperature_K: float) -> float:
    """Σ R u² eᵘ/(eᵘ − 1)² over the listed harmonic modes, u = hcν̃/kT: J/(mol K) per mole of
    the system they belong to (A. Einstein, Ann. Phys. 22, 180 (1907))."""
    u = planck_J_s * speed_of_light_cm_per_s * np.asarray(wavenumbers_cm, float) / (boltzmann_J_per_K * temperature_K)
    x = np.exp(-u)
    return float(np.sum(u * u * x / (1.0 - x) ** 2)) * gas_constant_J_per_mol_K


def copper_lattice_dynamics(settings: dict) -> dict:
    """Harmonic normal modes of the validation crystal from the engine's own forces.

    The crystal of the MD run (fcc Cu, the recorded lattice constant and cells per side,
    ASE's EMT) at rest; force constants Φ = −∂F/∂u by central differences (step
    :data:`LATTICE_DYNAMICS_STEP_A`) of one atom's displacements, copied to every atom by the
    lattice's translation symmetry (all fcc sites are equivalent); the eigenvalues of the
    mass-weighted matrix are ω² (Born & Huang [10]).  The three zero modes (uniform
    translation) are dropped, leaving 3N − 3 modes like the MD's degrees of freedom.

    Returns wavenumbers (cm⁻¹), ω² (s⁻²), atom count.
    """
    from ase import units
    from ase.build import bulk
    from ase.calculators.emt import EMT

    a = float(settings["model"]["lattice_constant_A"])
    n = int(settings["settings"]["cells_per_side"])
    atoms = bulk("Cu", "fcc", a=a, cubic=True).repeat(n)
    atoms.calc = EMT()
    count = len(atoms)
    h = LATTICE_DYNAMICS_STEP_A
    rest = atoms.get_positions().copy()
    block = np.zeros((3, count, 3))  # Φ[atom 0, direction d ; atom j, direction e], eV/Å²
    for d in range(3):
        forces = []
        for sign in (1.0, -1.0):
            moved = rest.copy()
            moved[0, d] += sign * h
            atoms.set_positions(moved)
            forces.append(atoms.get_forces())
        block[d] = -(forces[0] - forces[1]) / (2.0 * h)
    atoms.set_positions(rest)
    frac = np.linalg.solve(atoms.cell.array.T, rest.T).T
    matrix = np.zeros((3 * count, 3 * count))
    for i in range(count):
        # atom k plays j's role when atom i plays atom 0's: frac_k = frac_j − frac_i + frac_0
        target = (frac - frac[i] + frac[0]) % 1.0
        offset = (target[:, None, :] - frac[None, :, :] + 0.5) % 1.0 - 0.5
        k = np.argmin(np.abs(offset).sum(axis=-1), axis=1)
        for j in range(count):
            matrix[3 * i:3 * i + 3, 3 * j:3 * j + 3] = block[:, k[j], :]
    matrix = 0.5 * (matrix + matrix.T)
    mass_kg = float(atoms.get_masses()[0]) * units._amu
    eV_per_A2_in_SI = units._e / 1e-20  # J/m² per eV/Å²
    omega2 = np.sort(np.linalg.eigvalsh(matrix)) * eV_per_A2_in_SI / mass_kg
    if np.any(omega2[3:] <= 0) or np.max(np.abs(omega2[:3])) > 1e-6 * omega2[-1]:
        raise QcorrError("copper lattice dynamics: the crystal at rest is not a stable minimum")
    omega2 = omega2[3:]
    wavenumbers = np.sqrt(omega2) / (2.0 * math.pi * speed_of_light_cm_per_s)
    return {"wavenumbers_cm": wavenumbers, "omega2_per_s2": omega2, "atoms": count}


def verlet_frequency_ratio(omega_per_s: np.ndarray, timestep_s: float) -> np.ndarray:
    """ω̃/ω of a harmonic mode integrated by velocity Verlet: ω̃ = (2/Δt) arcsin(ωΔt/2)
    (the scheme's exact discrete solution; common practice, e.g. E. Hairer, C. Lubich,
    G. Wanner, Geometric Numerical Integration, 2nd ed. (Springer 2006), ch. I – from
    memory; checked in tests/test_validation.py)."""
    x = np.asarray(omega_per_s) * timestep_s / 2.0
    return np.arcsin(x) / x


def spectrum_moments(spectrum_path: Path) -> dict[str, float]:
    """⟨ν̃²⟩ and ⟨ν̃⁴⟩ (cm⁻², cm⁻⁴) of the total group's spectrum, weights S(ν̃)/dof."""
    import xarray as xr

    with xr.open_dataset(spectrum_path, engine="h5netcdf") as ds:
        x = np.asarray(ds["wavenumber"].values, dtype=float)
        s = np.asarray(ds["vdos"].sel(group="total").values, dtype=float)
        segment_ps = float(ds.attrs["segment_length_ps"])
    total = float(np.trapezoid(s, x))
    return {
        "nu2_cm2": float(np.trapezoid(s * x**2, x)) / total,
        "nu4_cm4": float(np.trapezoid(s * x**4, x)) / total,
        "segment_ps": segment_ps,
    }


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


# --------------------------------------------------------------------------------------
# Comparisons
# --------------------------------------------------------------------------------------

KINDS = ("validation", "informational", "consistency")


@dataclasses.dataclass
class Comparison:
    """One quantity of one system set beside its reference.

    ``tolerance_parts`` are (size, reason) pairs in the row's unit; the tolerance is their
    sum.  Informational rows have none and say in ``not_tested_because`` why.
    """

    system: str
    quantity: str
    unit: str
    classical: float | None
    quantum: float | None
    correction: float | None
    compared: str  # which of the values is compared: "quantum" or "correction"
    reference: float
    reference_source: str
    reference_status: str  # handbook / paper / standard / computed / from memory / common practice
    explanation: str
    kind: str = "validation"
    tolerance_parts: tuple[tuple[float, str], ...] = ()
    not_tested_because: str = ""
    reference_range: tuple[float, float] | None = None
    standard_error: float | None = None

    def __post_init__(self) -> None:
        if self.kind not in KINDS:
            raise ValueError(f"kind {self.kind!r} not in {KINDS}")
        if self.kind == "informational" and not self.not_tested_because:
            raise ValueError(f"{self.system}: {self.quantity}: an informational row says why it is not tested")
        if self.kind != "informational" and not self.tolerance_parts:
            raise ValueError(f"{self.system}: {self.quantity}: a tested row needs its tolerance parts")

    @property
    def tested(self) -> bool:
        return self.kind == "validation"

    @property
    def tolerance(self) -> float | None:
        return sum(abs(size) for size, _ in self.tolerance_parts) if self.tolerance_parts else None

    @property
    def tolerance_reason(self) -> str:
        return "; ".join(f"{_fmt(abs(size), 2)}: {reason}" for size, reason in self.tolerance_parts)

    @property
    def value(self) -> float:
        return self.quantum if self.compared == "quantum" else self.correction

    @property
    def difference(self) -> float:
        return self.value - self.reference

    @property
    def passed(self) -> bool:
        return self.tolerance is not None and abs(self.difference) <= self.tolerance


def _statistics_part(standard_errors: list[float], what: str) -> tuple[float, str]:
    se = math.sqrt(sum(x * x for x in standard_errors if x is not None and math.isfinite(x)))
    return STANDARD_ERRORS * se, f"{STANDARD_ERRORS:g} standard errors ({what})"


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


def wigner_kirkwood_comparison(spec, settings: dict, frame, spectrum_path: Path, explanation: str) -> Comparison:
    """qcorr's ΔA against the Wigner–Kirkwood ħ² term of the engine's forces, with its parts."""
    a = _row(frame, "helmholtz_free_energy", "per_mole_atoms")
    wk = wigner_kirkwood_reference(settings)
    m = spectrum_moments(spectrum_path)
    T = spec.temperature_K
    c2 = (planck_J_s * speed_of_light_cm_per_s / (boltzmann_J_per_K * T)) ** 2
    u2, u4 = c2 * m["nu2_cm2"], c2**2 * m["nu4_cm4"]
    quartic = u4 / (120.0 * u2)
    nu2_Hz2 = m["nu2_cm2"] * speed_of_light_cm_per_s**2
    hann = 1.0 / (3.0 * (m["segment_ps"] * 1e-12) ** 2) / nu2_Hz2
    omega2 = 4 * math.pi**2 * nu2_Hz2
    omega4 = 16 * math.pi**4 * m["nu4_cm4"] * speed_of_light_cm_per_s**4
    dt = spec.timestep_fs * 1e-15
    verlet = omega4 * dt**2 / (6.0 * omega2)
    f2 = settings["observed"]["force_squared_over_mass_per_atom_SI"]
    wk_se = wk * f2["block_standard_error"] / f2["mean"]
    return Comparison(
        system=spec.name, quantity="free-energy correction ΔA", unit="kJ/mol per mole of atoms",
        classical=None, quantum=None, correction=_value(a.correction),
        standard_error=_value(a.correction_se), compared="correction",
        reference=wk,
        reference_source="Wigner–Kirkwood ħ² term from the engine's forces, ħ²⟨Σ|F|²/m⟩/(24 k² T T_kin)",
        reference_status="computed (independent of qcorr)",
        tolerance_parts=(
            (quartic * wk, f"next term of the harmonic expansion, ln(sinh(u/2)/(u/2)) = u²/24 − u⁴/2880 + …: "
                           f"relative ⟨u⁴⟩/(120⟨u²⟩) = {quartic:.2%} (moments of the spectrum)"),
            (hann * wk, f"Hann-window broadening adds 1/(3 T_seg²) to ⟨ν²⟩ (variance of the window's spectral "
                        f"kernel, computed): {hann:.2%} for {m['segment_ps']:g} ps segments"),
            (verlet * wk, f"velocity Verlet at Δt = {spec.timestep_fs:g} fs: the velocities' second moment is "
                          f"(1 − (ωΔt)²/6) times ⟨F²/m⟩/kT (computed for a harmonic mode; checked in the tests): "
                          f"{verlet:.2%}"),
            _statistics_part([_value(a.correction_se), wk_se],
                             f"qcorr's segment error {_fmt(_value(a.correction_se), 2)} and the engine's block error "
                             f"of ⟨Σ|F|²/m⟩, {f2['block_standard_error'] / f2['mean']:.2%}, an upper estimate for the "
                             "ratio to T_kin"),
        ),
        explanation=explanation,
    )


def copper_comparisons(spec, settings: dict, frame, spectrum_path: Path) -> list[Comparison]:
    T = spec.temperature_K
    out = []
    cv = _row(frame, "heat_capacity", "per_mole_atoms")
    zpe = _row(frame, "zero_point_energy", "per_mole_atoms")
    dof = float(settings["state"]["degrees_of_freedom"])
    atoms = int(settings["state"]["atom_count"])

    # ---- lattice dynamics of the same EMT crystal (validation)
    ld = copper_lattice_dynamics(settings)
    nu, omega2, n = ld["wavenumbers_cm"], ld["omega2_per_s2"], ld["atoms"]

    def cv_of(scale: float = 1.0, wavenumbers=None) -> float:
        return einstein_heat_capacity(nu * scale if wavenumbers is None else wavenumbers, T) / n

    def zpe_of(wavenumbers) -> float:
        return 0.5 * planck_J_s * speed_of_light_cm_per_s * float(np.sum(wavenumbers)) * avogadro_per_mol / n / 1000.0

    dt = float(settings["settings"]["timestep_fs"]) * 1e-15
    omega = np.sqrt(omega2)
    t_kin = settings["observed"]["kinetic_temperature_K"]["mean"]
    f2 = settings["observed"]["force_squared_over_mass_per_atom_SI"]
    harmonic_f2 = boltzmann_J_per_K * t_kin * float(np.sum(omega2 / (1.0 - (omega * dt) ** 2 / 4.0))) / n
    ratio, ratio_se = f2["mean"] / harmonic_f2, f2["block_standard_error"] / harmonic_f2
    far = ratio + STANDARD_ERRORS * ratio_se if ratio >= 1.0 else ratio - STANDARD_ERRORS * ratio_se
    scale = math.sqrt(far)
    verlet = verlet_frequency_ratio(omega, dt)
    segment_ps = spectrum_moments(spectrum_path)["segment_ps"]
    kernel_var_cm2 = 1.0 / (3.0 * (segment_ps * 1e-12) ** 2) / speed_of_light_cm_per_s**2
    step = 0.5  # cm⁻¹, for the second derivative of Cv with respect to a uniform shift
    curvature = (cv_of(wavenumbers=nu + step) - 2 * cv_of() + cv_of(wavenumbers=nu - step)) / step**2
    anharmonic_text = (
        f"anharmonicity at {T:g} K: the engine's ⟨Σ|F|²/m⟩ is {ratio:.4f} ± {ratio_se:.4f} times the harmonic "
        "k T_kin Σω²/(1 − (ωΔt)²/4) of these modes (velocity-Verlet positions; computed), i.e. a frequency "
        f"scale up to √({far:.4f}) = {scale:.4f} at {STANDARD_ERRORS:g} standard errors"
    )
    verlet_text = (f"velocity Verlet at Δt = {spec.timestep_fs:g} fs shifts the MD frequencies by "
                   f"(2/Δt) arcsin(ωΔt/2)/ω − 1 ≤ {float(verlet.max()) - 1:.2%}")
    ld_source = (f"harmonic lattice dynamics of the same EMT crystal ({n} atoms, {len(nu)} modes, "
                 f"{float(nu.min()):.0f}–{float(nu.max()):.0f} cm⁻¹) from central differences of the engine's forces")
    out.append(Comparison(
        system=spec.name, quantity="heat capacity Cv against lattice dynamics", unit="J/(mol K) per mole of atoms",
        classical=_value(cv.classical), quantum=_value(cv.quantum), correction=_value(cv.correction),
        standard_error=_value(cv.quantum_se), compared="quantum",
        reference=cv_of(), reference_source=ld_source + ", Einstein functions summed",
        reference_status="computed (independent of qcorr)",
        tolerance_parts=(
            (cv_of() - cv_of(scale), anharmonic_text),
            (cv_of() - cv_of(wavenumbers=nu * verlet), verlet_text),
            (0.5 * kernel_var_cm2 * curvature,
             f"Hann-window broadening of the spectrum, variance 1/(3 T_seg²) = ({math.sqrt(kernel_var_cm2):.1f} cm⁻¹)², "
             "to second order"),
            _statistics_part([_value(cv.quantum_se)], "qcorr's segment error"),
        ),
        explanation=(
            "The same crystal two ways: qcorr from the velocities of the MD run (VACF → VDOS → Berens "
            "weights), the reference from the force constants at rest (normal modes → Einstein "
            "functions). Agreement tests the spectrum's normalisation, its frequency axis and the "
            f"heat-capacity weight where the correction is {'large' if T < 200 else 'small'} "
            f"({(_value(cv.correction) or 0.0) / (_value(cv.classical) or 1.0):+.0%} of the classical value); the MD "
            "frequencies are a little stiffer than the harmonic ones (anharmonicity at fixed volume)."
        ),
    ))
    out.append(Comparison(
        system=spec.name, quantity="zero-point energy against lattice dynamics", unit="kJ/mol per mole of atoms",
        classical=0.0, quantum=_value(zpe.quantum), correction=_value(zpe.correction),
        standard_error=_value(zpe.quantum_se), compared="quantum",
        reference=zpe_of(nu), reference_source=ld_source + ", ½ N_A h c Σν̃ / N",
        reference_status="computed (independent of qcorr)",
        tolerance_parts=(
            ((scale - 1.0) * zpe_of(nu), anharmonic_text),
            (zpe_of(nu * verlet) - zpe_of(nu), verlet_text),
            _statistics_part([_value(zpe.quantum_se)], "qcorr's segment error; a symmetric window kernel "
                             "leaves the first moment unchanged"),
        ),
        explanation="The zero-point energy is the spectrum's first moment: it tests the frequency axis directly.",
    ))
    if T > 200:
        out.append(wigner_kirkwood_comparison(
            spec, settings, frame, spectrum_path,
            "To order ħ² the spectrum's second moment equals ⟨Σ|F|²/m⟩/kT exactly (classical sum rule), so "
            "agreement tests qcorr's normalisation, frequency units and integration against the engine's forces; "
            "the small remainder is the u⁴ term.",
        ))

    # ---- real copper (informational)
    sensitivity = cv_of(1.0) - cv_of(1.01)  # J/(mol K) per 1 % of frequency
    if T < 200:
        cp, cp_unc = real.copper_cp_nist(T), real.copper_nist_fit_error(T) * real.copper_cp_nist(T)
        cp_text = (f"Cp({T:g} K) = {cp:.2f} ± {cp_unc:.2f} (NIST OFHC-copper fit [3], stated fit error "
                   f"{real.copper_nist_fit_error(T):.0%}; White & Collocott, J. Phys. Chem. Ref. Data 13, 1251 "
                   "(1984) give 16.0 from memory)")
        status = "handbook (NIST fit); Cp − Cv partly from memory"
        key = T
    else:
        key = 298.15
        cp = real.COPPER_CP_298_J_PER_G_K * real.COPPER_MOLAR_MASS_G_PER_MOL
        offset = real.copper_cp_nist(T) - real.copper_cp_nist(key)
        cp += offset
        cp_unc = real.COPPER_CP_298_ROUNDING_J_PER_G_K * real.COPPER_MOLAR_MASS_G_PER_MOL
        cp_text = (f"Cp = {real.COPPER_CP_298_J_PER_G_K} J/(g K) × {real.COPPER_MOLAR_MASS_G_PER_MOL} g/mol at 25 °C "
                   f"(CRC Handbook [2]) {offset:+.3f} to {T:g} K (slope of the NIST fit [3]) = {cp:.2f} ± {cp_unc:.2f} "
                   "(rounding of 0.385)")
        status = "handbook (CRC, read in a secondary table); Cp − Cv partly from memory"
    dilation, dilation_unc = real.copper_cp_minus_cv(T)
    electronic = real.COPPER_ELECTRONIC_GAMMA_J_PER_MOL_K2 * T
    basis = dof / (3 * atoms)
    reference = (cp - dilation - electronic) * basis
    out.append(Comparison(
        system=spec.name, quantity="heat capacity Cv against real copper", unit="J/(mol K) per mole of atoms",
        classical=_value(cv.classical), quantum=_value(cv.quantum), correction=_value(cv.correction),
        standard_error=_value(cv.quantum_se), compared="quantum", kind="informational",
        reference=reference,
        reference_source=(
            f"[{cp_text} − (Cp − Cv = T V_m (3α)² K_T = {dilation:.3f} ± {dilation_unc:.3f}, α from the NIST fit, "
            f"V_m and K_T from memory) − (electronic γT = {electronic:.3f}, γ = 0.691 mJ/(mol K²), Martin [4])] × "
            f"{dof:g}/{3 * atoms} (the run's degrees of freedom per 3N)"
        ),
        reference_status=status,
        not_tested_because=(
            "the EMT model's phonon frequencies differ from real copper's by an amount no source here gives, and "
            f"Cv at {T:g} K moves by {sensitivity:.2f} J/(mol K) per 1 % of frequency (lattice dynamics above, "
            "computed): the difference measures the model, not qcorr, which is tested against lattice dynamics of "
            "the same model above; real copper's intrinsic anharmonic Cv is not subtracted either"
        ),
        explanation=(
            f"Reference uncertainty ±{cp_unc + dilation_unc:.2f} J/(mol K) (Cp and Cp − Cv); "
            + ("well below θ_D the correction is large, so Cv here reflects EMT's phonon spectrum."
               if T < 200 else "near θ_D Cv is insensitive to the phonon frequencies.")
        ),
    ))
    debye = real.COPPER_DEBYE_TEMPERATURE_0K_K
    out.append(Comparison(
        system=spec.name, quantity="zero-point energy against the Debye model", unit="kJ/mol per mole of atoms",
        classical=0.0, quantum=_value(zpe.quantum), correction=_value(zpe.correction),
        standard_error=_value(zpe.quantum_se), compared="quantum", kind="informational",
        reference=9.0 / 8.0 * gas_constant_J_per_mol_K * debye / 1000.0,
        reference_source=f"Debye model, E₀ = (9/8) R θ with θ₀ = {debye:g} K of real copper (Martin [4])",
        reference_status="computed (model) from a paper's value",
        not_tested_because="the Debye model with the elastic-limit θ₀ only approximates the first moment of a "
                           "real phonon spectrum, and EMT is not real copper",
        explanation="A rough guide to the mean phonon frequency.",
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
    iapws = real.water_iapws95(298.15, 0.1)
    pairs = {name: corrected - classical for name, (corrected, classical) in WATER_FLEXIBLE_1PT_PAIRS.items()}
    low, high = min(pairs.values()), max(pairs.values())
    (gsta_cp, gsta_cp_se), (gsta_cl, gsta_cl_se) = WATER_TIP3F_GSTA_PAIR
    reference_zpe = 0.5 * planck_J_s * speed_of_light_cm_per_s * sum(WATER_FUNDAMENTALS_CM) * avogadro_per_mol / 1000.0
    listed = ", ".join(f"{name} {value:.1f}" for name, value in pairs.items())
    return [
        Comparison(
            system=spec.name, quantity="heat-capacity correction ΔCv", unit="J/(mol K) per mole of molecules",
            classical=_value(cv.classical), quantum=_value(cv.quantum), correction=_value(cv.correction),
            standard_error=_value(cv.correction_se), compared="correction", kind="informational",
            reference=(low + high) / 2, reference_range=(low, high),
            reference_source=(
                f"corrections (corrected − classical Cp) of the flexible-model rows of the group '1PT or 1PT+AC' "
                f"in Berta et al., J. Chem. Theory Comput. 16, 3316 (2020), Table 1 – the harmonic whole-spectrum "
                f"correction qcorr makes, some rows with an added anharmonic correction (which ones is not legible "
                f"in the copy read): {listed}; the table's flexible TIP3P row ('TIP3F') uses the authors' "
                f"anharmonic GSTA method: {gsta_cp - gsta_cl:.1f} ± {math.hypot(gsta_cp_se, gsta_cl_se):.1f}"
            ),
            reference_status="paper",
            not_tested_because=(
                "no row of that table is this model (CHARMM flexible TIP3P) with this method, and the spread of "
                f"the rows ({low:.1f} … {high:.1f}) is model and method dependence, not an uncertainty, so no "
                "tolerance can be derived from it. The former ±13 was the half-range of seven 1PT and 2PT rows "
                "(±7.7) widened by 5 J/(mol K) without a derivation; it is withdrawn"
            ),
            explanation=(
                "The correction is large because the three intramolecular modes (u ≈ 8–18) and the librations "
                "(u ≈ 2–4) are frozen out quantum mechanically; added to a classical MD Cp of flexible models "
                "(104–124 J/(mol K), Berta Table 1) it moves Cp toward real water's "
                f"{iapws.cp_J_per_mol_K:.2f} J/(mol K) at 298.15 K and 0.1 MPa (IAPWS-95 [8]; Cv "
                f"{iapws.cv_J_per_mol_K:.2f}, so Cp − Cv = {iapws.cp_J_per_mol_K - iapws.cv_J_per_mol_K:.2f}, "
                "which confirms Berta's conversion cp = cV + 0.8). The classical column is the harmonic dof·R, "
                "not an MD heat capacity."
            ),
        ),
        Comparison(
            system=spec.name, quantity="zero-point energy of the intramolecular band (ν̃ ≥ 1150 cm⁻¹)",
            unit="kJ/mol per mole of molecules",
            classical=0.0, quantum=band["zpe_band_kJ_per_mol"], correction=band["zpe_band_kJ_per_mol"],
            compared="quantum", kind="informational",
            reference=reference_zpe,
            reference_source="½ N_A h c Σν̃ of the H2O(g) fundamentals 3657, 1595, 3756 cm⁻¹ (NIST CCCBDB [7])",
            reference_status="handbook (database)",
            not_tested_because=(
                "the model's intramolecular frequencies are not fitted to real water's: its bend lies "
                f"{band['bend_peak_cm'] / 1595.0 - 1:+.0%} and its stretch band "
                f"{band['stretch_peak_cm'] / (0.5 * (3657.0 + 3756.0)) - 1:+.0%} off the gas fundamentals, so the "
                "near-agreement of the sum is a cancellation, and no source here gives the model's own frequencies"
            ),
            explanation=(
                f"The model's bend peaks at {band['bend_peak_cm']:.0f} cm⁻¹ (gas fundamental 1595) and its stretch "
                f"band at {band['stretch_peak_cm']:.0f} cm⁻¹ (gas 3657/3756): the CHARMM harmonic force constants "
                "place the bend too high and the stretches low."
            ),
        ),
        Comparison(
            system=spec.name, quantity="degrees of freedom in the intramolecular band",
            unit="per molecule",
            classical=None, quantum=band["dof_per_molecule"], correction=None, compared="quantum",
            kind="informational",
            reference=3.0,
            reference_source="3 intramolecular modes per H2O molecule (3N − 6 for N = 3)",
            reference_status="common practice",
            not_tested_because=(
                "3 per molecule holds exactly only for uncoupled harmonic modes; in the liquid the librational "
                "tail crosses the cut and the band's share of the kinetic energy scatters by about sqrt(2/3N) per "
                "vibrational relaxation time"
            ),
            explanation=(
                "Shows how cleanly the band split used for the zero-point energy above separates "
                "intramolecular from intermolecular motion."
            ),
        ),
        Comparison(
            system=spec.name, quantity="zero-point energy, whole spectrum (qcorr properties)",
            unit="kJ/mol per mole of molecules",
            classical=0.0, quantum=_value(zpe.quantum), correction=_value(zpe.correction),
            standard_error=_value(zpe.quantum_se), compared="quantum", kind="consistency",
            reference=band["zpe_all_kJ_per_mol"],
            reference_source="½ N_A h c ∫S(ν̃) ν̃ dν̃ computed here from the spectrum file",
            reference_status="computed (same data, same integral)",
            tolerance_parts=((1e-6 * band["zpe_all_kJ_per_mol"],
                              "rounding: two trapezoid sums of the same spectrum (relative 1e-6)"),),
            explanation=(
                "The same integral by two routes. Intermolecular modes (translations, librations) add about "
                f"{band['zpe_all_kJ_per_mol'] - band['zpe_band_kJ_per_mol']:.1f} kJ/mol to the intramolecular ZPE."
            ),
        ),
    ]


def argon_comparisons(spec, settings: dict, frame, spectrum_path: Path, liquid_frame=None) -> list[Comparison]:
    T = spec.temperature_K
    wk = wigner_kirkwood_reference(settings)
    e = _row(frame, "energy", "per_mole_atoms")
    cv = _row(frame, "heat_capacity", "per_mole_atoms")
    common = dict(system=spec.name, classical=None, quantum=None, compared="correction", kind="informational")
    out = [
        wigner_kirkwood_comparison(
            spec, settings, frame, spectrum_path,
            "For a liquid the harmonic correction is not exact, but to order ħ² it must equal the Wigner–Kirkwood "
            "term, which the engine's forces give directly; argon near its triple point is only weakly quantum "
            f"(ΔA ≈ {wk * 1000.0 / (gas_constant_J_per_mol_K * T):.2f} RT).",
        ),
        Comparison(
            quantity="energy correction ΔE", unit="kJ/mol per mole of atoms",
            correction=_value(e.correction), standard_error=_value(e.correction_se),
            reference=2 * wk,
            reference_source="2 × Wigner–Kirkwood ΔA (ΔE = 2ΔA when ⟨|F|²⟩ ∝ T)",
            reference_status="computed (independent of qcorr)",
            not_tested_because="ΔE = 2ΔA assumes ⟨|F|²⟩ ∝ T, true only in the harmonic limit",
            explanation="Agreement shows the spectrum behaves harmonically to order ħ².",
            **common,
        ),
        Comparison(
            quantity="heat-capacity correction ΔCv", unit="J/(mol K) per mole of atoms",
            correction=_value(cv.correction), standard_error=_value(cv.correction_se),
            reference=-2 * wk * 1000.0 / T,
            reference_source="−2ΔA/T from the Wigner–Kirkwood ΔA (harmonic-limit relation)",
            reference_status="computed (independent of qcorr)",
            not_tested_because="the next term (u⁴/240 vs u²/12) is ≈ 5 % here, and ⟨|F|²⟩ ∝ T is assumed",
            explanation="A small negative correction (≈ −0.1 R): light quantum effects in liquid argon.",
            **common,
        ),
    ]
    if liquid_frame is not None:
        rows = liquid_frame[(liquid_frame.property == "entropy") & (liquid_frame.basis == "per_mole_molecules")
                            & (liquid_frame.group == "total")]
        if len(rows) == 1:
            row = rows.iloc[0]
            density = float(settings["state"]["density_g_per_cm3"]) * 1000.0
            state = real.argon_tegeler(T, density)
            saturated = real.argon_saturated_liquid(T)
            out.append(Comparison(
                system=spec.name, quantity="2PT entropy (qcorr liquid)", unit="J/(mol K) per mole of atoms",
                classical=_value(row.classical), quantum=_value(row.quantum), correction=_value(row.correction),
                standard_error=_value(row.quantum_se), compared="quantum", kind="informational",
                reference=state.entropy_J_per_mol_K,
                reference_source=(
                    f"real argon at the run's {T:g} K and {density / 1000.0:.4f} g/cm³ ({state.pressure_Pa / 1e6:.1f} MPa), "
                    "absolute entropy from the Tegeler–Span–Wagner equation of state [9] (CoolProp); the saturated "
                    f"liquid at {T:g} K ({saturated.density_kg_per_m3 / 1000.0:.4f} g/cm³) has "
                    f"{saturated.entropy_J_per_mol_K:.2f}"
                ),
                reference_status="standard reference equation of state",
                not_tested_because=(
                    "a Lennard-Jones model is compared with real argon; the model's own entropy at this state, by "
                    "thermodynamic integration, is the proper reference: tests/test_liquid_validation.py and "
                    "docs/liquids.md compare 2PT with it (default -1.0 %)"
                ),
                explanation=(
                    "2PT (S.-T. Lin, M. Blanco, W. A. Goddard III, J. Chem. Phys. 119, 11792 (2003)) splits the "
                    "spectrum into a hard-sphere gas and a solid; shown beside real argon's absolute entropy at the "
                    "run's temperature and density."
                ),
            ))
    return out


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
            comparisons += copper_comparisons(spec, settings[spec.name], frame, spectrum)
        elif spec.kind == "water":
            comparisons += water_comparisons(spec, settings[spec.name], frame, spectrum)
        else:
            liquid_frame = run_liquid(spec, spectrum, work_dir)
            comparisons += argon_comparisons(spec, settings[spec.name], frame, spectrum, liquid_frame)
    return comparisons, settings, seconds


# --------------------------------------------------------------------------------------
# Markdown
# --------------------------------------------------------------------------------------


def _fmt(x: float | None, digits: int = 4) -> str:
    if x is None:
        return "–"
    return f"{x:.{digits}g}"


def _verdict(c: Comparison) -> str:
    if c.kind == "informational":
        return "informational"
    if c.kind == "consistency":
        return "consistent" if c.passed else "**INCONSISTENT**"
    return "pass" if c.passed else "**FAIL**"


def _table_row(c: Comparison) -> str:
    q = _fmt(c.quantum)
    d = _fmt(c.correction)
    se = f" ± {_fmt(c.standard_error, 2)}" if c.standard_error is not None else ""
    if c.compared == "quantum":
        q = f"**{q}**{se}"
    else:
        d = f"**{d}**{se}"
    if c.reference_range is not None:
        low, high = c.reference_range
        reference = f"{_fmt(low)} … {_fmt(high)}"
        inside = low <= c.value <= high
        difference = "inside" if inside else f"outside by {min(abs(c.value - low), abs(c.value - high)):.3g}"
    else:
        reference, difference = _fmt(c.reference), f"{c.difference:+.3g}"
    tolerance = f"±{_fmt(c.tolerance, 2)}" if c.tolerance is not None else "–"
    return (f"| {c.quantity} | {c.unit} | {_fmt(c.classical)} | {q} | {d} | {reference} | {difference} | "
            f"{tolerance} | {_verdict(c)} |")


def _notes(c: Comparison) -> str:
    text = f"* **{c.quantity}.** {c.explanation} Reference: {c.reference_source} [{c.reference_status}]."
    if c.kind == "informational":
        text += f" Not tested: {c.not_tested_because}."
    else:
        text += f" Tolerance ±{_fmt(c.tolerance, 2)} = sum of: {c.tolerance_reason}."
    return text


TABLE_HEAD = [
    "| quantity | unit | classical | quantum-corrected | correction | reference | difference | tolerance | status |",
    "|---|---|---|---|---|---|---|---|---|",
]


def render(comparisons: list[Comparison], settings: dict, seconds: dict[str, float]) -> str:
    today = datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d")
    validation = [c for c in comparisons if c.kind == "validation"]
    informational = [c for c in comparisons if c.kind == "informational"]
    consistency = [c for c in comparisons if c.kind == "consistency"]
    lines = [
        "# Validation: qcorr on trajectories from real MD engines",
        "",
        f"Written by `scripts/write_validation_report.py` on {today} with qcorr {qcorr_version}; "
        "do not edit by hand. The trajectories come from `scripts/make_validation_data.py` "
        "(fixed seeds; every setting is recorded in each system's `settings.json`). "
        "`tests/test_validation.py` runs the same comparisons and fails when a validation row leaves "
        "its tolerance.",
        "",
        f"**Summary: {len(validation)} validation checks, {sum(c.passed for c in validation)} pass; "
        f"{len(informational)} informational comparisons (no pass or fail); {len(consistency)} consistency "
        f"check(s), {sum(c.passed for c in consistency)} consistent (listed separately, not counted as validation).**",
        "",
        "Row kinds: *validation* = a reference independent of qcorr's code, with a tolerance that is the sum "
        "of named parts (the reference's uncertainty and the method's known limits, each with its size and "
        "reason); *informational* = a sourced reference for which no tolerance can be derived (the reason is "
        "given), never counted as a pass; *consistency* = the same quantity computed two ways from the same "
        "data, an internal check only.",
        "",
        "Reference status: *handbook*/*paper*/*standard* = read from the named source; *from memory* = quoted "
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
        rows = [c for c in comparisons if c.system == name and c.kind != "consistency"]
        if not rows:
            continue
        lines += [f"### `{name}`", "", *TABLE_HEAD]
        lines += [_table_row(c) for c in rows]
        lines.append("")
        lines += [_notes(c) for c in rows]
        lines.append("")
    if consistency:
        lines += [
            "## Consistency checks (not validation)",
            "",
            "The same quantity computed twice from the same data by different code paths. Agreement "
            "shows the two routes are implemented alike; it says nothing about whether either is right.",
            "",
            "| system | " + TABLE_HEAD[0][2:],
            "|---|" + TABLE_HEAD[1][1:],
        ]
        lines += [f"| `{c.system}` " + _table_row(c) for c in consistency]
        lines.append("")
        lines += [_notes(c).replace("* **", f"* `{c.system}`: **", 1) for c in consistency]
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
    lines += ["## References", ""]
    lines += [f"{i}. {text}" for i, text in enumerate(REFERENCES, start=1)]
    lines.append("")
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
        "`qcorr properties` (and `qcorr liquid` for argon). Real-substance data: `tests/reference_data.py` "
        "(IAPWS-95 via iapws, argon via CoolProp, copper tables).",
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
        failed = [c for c in comparisons if c.kind != "informational" and not c.passed]
        for c in comparisons:
            status = {"validation": "ok  " if c.passed else "FAIL", "consistency": "same" if c.passed else "DIFF",
                      "informational": "info"}[c.kind]
            tolerance = f"±{c.tolerance:.2g}" if c.tolerance is not None else "not tested"
            print(f"{status} {c.system}: {c.quantity}: {c.value:.4g} vs {c.reference:.4g} ({tolerance})")
        print(f"wrote {args.output}", file=sys.stderr)
    except QcorrError as err:
        print(f"write_validation_report: error: {err}", file=sys.stderr)
        return 2
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
