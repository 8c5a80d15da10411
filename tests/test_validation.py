"""Validation of qcorr's corrected values on trajectories from real MD engines (issue 5).

The validation set is made by ``scripts/make_validation_data.py`` (ASE/EMT copper at 100 K
and 300 K, flexible TIP3P water and Lennard-Jones argon with OpenMM) into
``$QCORR_VALIDATION_DIR`` or ``~/.cache/qcorr-validation`` – reused when up to date,
otherwise made first (a few CPU minutes).  ``scripts/write_validation_report.py`` runs
``qcorr spectrum`` and ``qcorr properties`` on it and builds the comparisons; each holds
its reference (with source and status) and a tolerance with the reason for it, written in
that script beside the reference values.  These tests fail when a corrected value leaves
its tolerance, and check separately the direction of each correction.
"""

from __future__ import annotations

import importlib.util
import math
import sys
from pathlib import Path

import pytest

from qcorr.constants import (
    avogadro_per_mol,
    boltzmann_J_per_K,
    hbar_J_s,
    second_radiation_constant_cm_K,
    speed_of_light_cm_per_s,
)

ROOT = Path(__file__).resolve().parent.parent
SCRIPTS = ROOT / "scripts"


def _load(name: str):
    spec = importlib.util.spec_from_file_location(name, SCRIPTS / f"{name}.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module  # dataclasses look their module up here
    sys.path.insert(0, str(SCRIPTS))
    try:
        spec.loader.exec_module(module)
    finally:
        sys.path.remove(str(SCRIPTS))
    return module


report = _load("write_validation_report")
engines = report.engines

#: every comparison that must hold (system, quantity as named in the report script)
TESTED = [
    ("copper_100K", "heat capacity Cv"),
    ("copper_300K", "heat capacity Cv"),
    ("copper_300K", "free-energy correction ΔA"),
    ("argon_liquid_86K", "free-energy correction ΔA"),
    ("water_flexible_298K", "heat-capacity correction ΔCv"),
    ("water_flexible_298K", "zero-point energy of the intramolecular band (ν̃ ≥ 1150 cm⁻¹)"),
    ("water_flexible_298K", "zero-point energy, whole spectrum (qcorr properties)"),
]


# ------------------------------------------------------------------ fast checks of the helpers
def test_wigner_kirkwood_of_a_harmonic_oscillator():
    """ΔA(ħ²) = kT u²/24 for one harmonic mode (Landau & Lifshitz, Statistical Physics §33).

    A 1D oscillator of mass m and angular frequency ω has ⟨F²⟩ = m ω² kT, so ⟨F²/m⟩ = ω² kT.
    """
    T = 300.0
    wavenumber = 200.0  # cm^-1
    omega = 2 * math.pi * speed_of_light_cm_per_s * wavenumber
    force2_over_m = omega**2 * boltzmann_J_per_K * T
    u = second_radiation_constant_cm_K * wavenumber / T
    expected = boltzmann_J_per_K * T * u**2 / 24 * avogadro_per_mol / 1000.0
    assert engines.wigner_kirkwood_free_energy_kJ_per_mol(force2_over_m, T) == pytest.approx(expected, rel=1e-12)
    # the report's sample-consistent form reduces to it when T_kin = T
    settings = {
        "state": {"temperature_K": T},
        "observed": {
            "kinetic_temperature_K": {"mean": T},
            "force_squared_over_mass_per_atom_SI": {"mean": force2_over_m},
        },
    }
    assert report.wigner_kirkwood_reference(settings) == pytest.approx(expected, rel=1e-12)
    assert hbar_J_s > 0


def test_copper_cp_minus_cv_arithmetic():
    """Cp − Cv = T V_m α_V² K_T with the script's inputs, evaluated by hand here."""
    v_m = 63.546 / 8.96 * 1e-6  # m^3/mol
    expected = 298.15 * v_m * (3 * 16.5e-6) ** 2 * 1.37e11
    assert report.copper_cp_minus_cv(298.15) == pytest.approx(expected, rel=1e-12)
    assert 0.5 < expected < 0.9  # of the size quoted for Cu at 298 K (methods notes §4.2, from memory)


def test_copper_reference_is_below_the_dulong_petit_value():
    value, source = report.copper_lattice_cv_reference(298.15)
    assert value < 3 * 8.314462618 and "CRC" in source


# ------------------------------------------------------------------ the validation run
@pytest.fixture(scope="module")
def validation(tmp_path_factory):
    data_dir = engines.default_output_dir()
    work_dir = tmp_path_factory.mktemp("validation-work")
    comparisons, settings, _ = report.evaluate(data_dir, work_dir, jobs=2)  # CI has 2 cores
    return {(c.system, c.quantity): c for c in comparisons}, settings


@pytest.mark.slow
@pytest.mark.parametrize("key", TESTED, ids=[f"{s}: {q}" for s, q in TESTED])
def test_corrected_value_within_tolerance_of_reference(validation, key):
    comparisons, _ = validation
    c = comparisons[key]
    assert c.tested
    assert abs(c.difference) <= c.tolerance, (
        f"{c.system}: {c.quantity} = {c.value:.5g} {c.unit}, reference {c.reference:.5g} "
        f"({c.reference_source}; {c.reference_status}), difference {c.difference:+.3g} exceeds "
        f"±{c.tolerance:.3g} ({c.tolerance_reason})"
    )


@pytest.mark.slow
def test_corrections_go_the_right_way(validation):
    """Signs fixed by the weighting functions (Berens et al. 1983): quantum Cv < classical,
    quantum A > classical, for every mode; water's correction moves a classical MD Cp of
    flexible models (≥ 104 J/(mol K), Berta et al. 2020 Table 1) toward experiment (75.3)."""
    comparisons, _ = validation
    for name in ("copper_100K", "copper_300K"):
        c = comparisons[(name, "heat capacity Cv")]
        assert c.quantum < c.classical and c.correction < 0
    assert comparisons[("copper_300K", "free-energy correction ΔA")].correction > 0
    assert comparisons[("argon_liquid_86K", "free-energy correction ΔA")].correction > 0
    assert comparisons[("argon_liquid_86K", "heat-capacity correction ΔCv")].correction < 0
    water = comparisons[("water_flexible_298K", "heat-capacity correction ΔCv")]
    assert water.correction < 0
    smallest_classical_md_cp = 104.6  # F3C flexible, 2PT row of Berta et al. (2020) Table 1
    corrected = smallest_classical_md_cp + water.correction
    assert abs(corrected - report.WATER_CP_EXPERIMENT_J_PER_MOL_K) < abs(
        smallest_classical_md_cp - report.WATER_CP_EXPERIMENT_J_PER_MOL_K
    )
    # copper: the 100 K correction is larger than the 300 K one (further below θ_D)
    assert comparisons[("copper_100K", "heat capacity Cv")].correction < comparisons[
        ("copper_300K", "heat capacity Cv")
    ].correction


@pytest.mark.slow
def test_validation_runs_are_at_their_temperatures(validation):
    """Mean kinetic temperature within a statistical tolerance of the thermostat target.

    Canonical relative fluctuation of the kinetic temperature is sqrt(2/dof); with a global
    thermostat of coupling time τ a run of length t holds at least t/(2τ) independent
    samples; 4 standard errors.
    """
    _, settings = validation
    for name, s in settings.items():
        spec = engines.VALIDATION_SYSTEMS[name]
        tau = spec.production_coupling_ps if spec.kind == "crystal" else 1.0 / spec.production_collision_per_ps
        samples = max(1.0, spec.production_ps / (2 * tau))
        tolerance = 4 * math.sqrt(2 / s["state"]["degrees_of_freedom"]) / math.sqrt(samples)
        mean = s["observed"]["kinetic_temperature_K"]["mean"]
        assert abs(mean / spec.temperature_K - 1) < tolerance, name


@pytest.mark.slow
def test_argon_is_liquid(validation):
    """Liquid, not a superheated crystal: the atoms diffuse.

    Self-diffusion of LJ argon near the triple point is about 2e-9 m²/s (common practice for
    liquid argon; Rahman, Phys. Rev. 136, A405 (1964) found 2.43e-5 cm²/s at 94.4 K), so over
    30 ps the mean-square displacement is of order 6Dt ≈ 36 Å²; a crystal stays below 1 Å².
    """
    _, settings = validation
    msd = settings["argon_liquid_86K"]["observed_final_mean_square_displacement_A2"]
    assert msd > 10.0


def test_committed_report_names_every_system():
    text = (ROOT / "docs" / "validation.md").read_text(encoding="utf-8")
    for name in engines.VALIDATION_SYSTEMS:
        assert f"`{name}`" in text
    assert "FAIL" not in text


def test_bad_options_are_refused_with_the_option_named(tmp_path, capsys):
    assert engines.main(["--systems", "copper_5000K", "--output-dir", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert "--systems" in err and "copper_5000K" in err
    assert engines.main(["--jobs", "0", "--output-dir", str(tmp_path)]) == 2
    assert "--jobs" in capsys.readouterr().err
    not_a_directory = tmp_path / "file"
    not_a_directory.write_text("x")
    assert engines.main(["--output-dir", str(not_a_directory)]) == 2
    assert "--output-dir" in capsys.readouterr().err


def test_folding_the_tabulated_lennard_jones_term_keeps_the_potential():
    """The validation water moves OpenMM's tabulated CHARMM Lennard-Jones term into the
    standard nonbonded force for speed; energy and forces must stay those of the force field
    (CHARMM TIP3P: O eps 0.1521 kcal/mol, Rmin/2 1.7682 A; H eps 0.046 kcal/mol, Rmin/2
    0.2245 A; MacKerell et al., J. Phys. Chem. B 102, 3586 (1998), from memory)."""
    import numpy as np
    import openmm as mm
    from openmm import app, unit

    forcefield = app.ForceField("charmm36/water.xml")
    modeller = app.Modeller(app.Topology(), [])
    modeller.addSolvent(forcefield, model="tip3p", boxSize=mm.Vec3(1.5, 1.5, 1.5) * unit.nanometer)

    def energy_and_forces(fold: bool):
        system = forcefield.createSystem(modeller.topology, nonbondedMethod=app.PME,
                                         nonbondedCutoff=0.6 * unit.nanometer,
                                         constraints=None, rigidWater=False)
        if fold:
            engines.fold_tabulated_lennard_jones(system)
            assert not any(isinstance(f, mm.CustomNonbondedForce) for f in system.getForces())
        context = mm.Context(system, mm.VerletIntegrator(0.001),
                             mm.Platform.getPlatformByName("Reference"))
        context.setPositions(modeller.positions)
        state = context.getState(getEnergy=True, getForces=True)
        energy = state.getPotentialEnergy().value_in_unit(unit.kilojoule_per_mole)
        forces = state.getForces(asNumpy=True).value_in_unit(unit.kilojoule_per_mole / unit.nanometer)
        nb = next(f for f in system.getForces() if isinstance(f, mm.NonbondedForce))
        # read the parameters while the System that owns the force is alive
        oxygen, hydrogen = (nb.getParticleParameters(i)[1:] for i in (0, 1))
        return energy, np.asarray(forces), oxygen, hydrogen

    e_table, f_table, _, _ = energy_and_forces(False)
    e_fold, f_fold, (sigma_o, eps_o), (sigma_h, eps_h) = energy_and_forces(True)
    kcal = 4.184  # kJ per thermochemical kcal (NIST SP 811)
    rmin_half = 2 ** (1 / 6) / 2  # Rmin/2 = 2^(1/6) sigma / 2
    assert eps_o.value_in_unit(unit.kilojoule_per_mole) == pytest.approx(0.1521 * kcal, rel=1e-4)
    assert eps_h.value_in_unit(unit.kilojoule_per_mole) == pytest.approx(0.046 * kcal, rel=1e-4)
    assert sigma_o.value_in_unit(unit.angstrom) * rmin_half == pytest.approx(1.7682, rel=1e-4)
    assert sigma_h.value_in_unit(unit.angstrom) * rmin_half == pytest.approx(0.2245, rel=1e-4)
    scale = np.abs(f_table).max()
    assert e_fold == pytest.approx(e_table, abs=1e-6 * abs(e_table) + 1e-3)
    assert np.abs(f_fold - f_table).max() <= 1e-6 * scale
