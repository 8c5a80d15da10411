"""Validation of qcorr's corrected values on trajectories from real MD engines (issues 5, 17).

The validation set is made by ``scripts/make_validation_data.py`` (ASE/EMT copper at 100 K
and 300 K, flexible TIP3P water and Lennard-Jones argon with OpenMM) into
``$QCORR_VALIDATION_DIR`` or ``~/.cache/qcorr-validation`` – reused when up to date,
otherwise made first (a few CPU minutes).  ``scripts/write_validation_report.py`` runs
``qcorr spectrum`` and ``qcorr properties`` on it and builds the comparisons.  Validation
rows hold a reference independent of qcorr's code and a tolerance that is the sum of named
parts (reference uncertainty, known limits of the method), written in that script; these
tests fail when such a row leaves its tolerance.  Informational rows (no derivable
tolerance) are never asserted; consistency rows (the same quantity two ways) are checked
separately.  The real-substance references of ``tests/reference_data.py`` are checked here
against published values.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
import reference_data as real
from repository_scripts import load_script

from qcorr.constants import (
    avogadro_per_mol,
    boltzmann_J_per_K,
    gas_constant_J_per_mol_K,
    hbar_J_s,
    second_radiation_constant_cm_K,
    speed_of_light_cm_per_s,
)

ROOT = Path(__file__).resolve().parent.parent
SCRIPTS = ROOT / "scripts"


report = load_script("write_validation_report")
engines = report.engines

#: every validation row (system, quantity as named in the report script)
TESTED = [
    ("copper_100K", "heat capacity Cv against lattice dynamics"),
    ("copper_100K", "zero-point energy against lattice dynamics"),
    ("copper_300K", "heat capacity Cv against lattice dynamics"),
    ("copper_300K", "zero-point energy against lattice dynamics"),
    ("copper_300K", "free-energy correction ΔA"),
    ("argon_liquid_86K", "free-energy correction ΔA"),
]
#: the same quantity computed two ways (not validation)
CONSISTENCY = [
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


def test_velocity_verlet_harmonic_relations():
    """The two integrator terms of the report's tolerances, on a velocity-Verlet harmonic
    oscillator: the trajectory oscillates at ω̃ = (2/Δt) arcsin(ωΔt/2), and the velocities'
    second moment ω̃²⟨v²⟩ is (1 − (ωΔt)²/6) times ⟨F²/m²⟩ = ω⁴⟨x²⟩ up to O((ωΔt)⁴).
    The discrete solution is exact, so the frequency agrees to the resolution of the run."""
    omega, dt, steps = 1.0, 0.2, 200_000
    x, v = 1.0, 0.3
    xs, vs = np.empty(steps), np.empty(steps)
    for n in range(steps):
        v -= 0.5 * dt * omega**2 * x
        x += dt * v
        v -= 0.5 * dt * omega**2 * x
        xs[n], vs[n] = x, v
    crossings = np.flatnonzero(np.diff(np.signbit(xs)))
    measured = math.pi * (len(crossings) - 1) / ((crossings[-1] - crossings[0]) * dt)
    expected = omega * float(report.verlet_frequency_ratio(np.array([omega]), dt)[0])
    assert measured == pytest.approx(expected, rel=2 * math.pi / (steps * dt))
    ratio = expected**2 * np.mean(vs**2) / (omega**4 * np.mean(xs**2))
    assert ratio == pytest.approx(1 - (omega * dt) ** 2 / 6, abs=(omega * dt) ** 4)


def test_einstein_heat_capacity_limits():
    """R u² eᵘ/(eᵘ−1)² per mode (Einstein 1907): R at u → 0; R·0.920674 at T = θ_E (methods
    notes §4.1 Einstein table, computed there with mpmath)."""
    assert report.einstein_heat_capacity(np.array([1e-3]), 300.0) == pytest.approx(gas_constant_J_per_mol_K, rel=1e-9)
    theta = 300.0
    wavenumber = theta / second_radiation_constant_cm_K
    assert report.einstein_heat_capacity(np.array([wavenumber]), theta) == pytest.approx(
        0.920674 * gas_constant_J_per_mol_K, rel=1e-5)


def test_lattice_dynamics_of_emt_copper():
    """The reference normal modes of the report (harmonic lattice dynamics, Born & Huang 1954,
    common practice), on a 2×2×2-cell EMT crystal: 3N − 3 positive modes (the translations
    removed); their classical limit is (3N − 3) R / N per mole of atoms (u → 0); and
    m Σω² = Tr Φ (the mass-weighted matrix's trace) must equal N Σ_d ∂²E/∂u_d² of one atom,
    taken here independently from second differences of the engine's *energy* (the report
    differentiates forces).  Tolerance 1e-3: both finite differences err by O(h²) relative
    (h = 0.01 Å against anharmonic lengths of ~1 Å), energy rounding ~1e-9 of the curvature."""
    from ase import units
    from ase.build import bulk
    from ase.calculators.emt import EMT

    a = engines.equilibrium_lattice_constant_A("Cu")
    ld = report.copper_lattice_dynamics({"model": {"lattice_constant_A": a}, "settings": {"cells_per_side": 2}})
    n = ld["atoms"]
    assert n == 32 and len(ld["wavenumbers_cm"]) == 3 * n - 3 and np.all(ld["omega2_per_s2"] > 0)
    hot = report.einstein_heat_capacity(ld["wavenumbers_cm"], 1e7) / n
    assert hot == pytest.approx((3 * n - 3) * gas_constant_J_per_mol_K / n, rel=1e-6)

    atoms = bulk("Cu", "fcc", a=a, cubic=True).repeat(2)
    atoms.calc = EMT()
    rest = atoms.get_positions().copy()
    e0 = atoms.get_potential_energy()
    h = 0.01  # Å
    curvature = 0.0  # eV/Å², sum over the three directions of atom 0
    for d in range(3):
        for sign in (1.0, -1.0):
            moved = rest.copy()
            moved[0, d] += sign * h
            atoms.set_positions(moved)
            curvature += (atoms.get_potential_energy() - e0) / h**2
    trace_SI = n * curvature * units._e / 1e-20  # J/m² (eV/Å² -> J/m²)
    mass = float(atoms.get_masses()[0]) * units._amu
    assert mass * float(np.sum(ld["omega2_per_s2"])) == pytest.approx(trace_SI, rel=1e-3)


def test_iapws95_verification_values():
    """IAPWS R6-95(2018), table of computer-program verification values, single phase:
    T = 300 K, ρ = 996.5560 kg/m³ gives p = 0.0992418352 MPa, cv = 4.13018112 kJ/(kg K),
    w = 1501.51914 m/s, s = 0.393062643 kJ/(kg K) (table values from memory of the release;
    the iapws package documents the same digits).  The release gives 9 significant figures."""
    from iapws import IAPWS95

    w = IAPWS95(T=300.0, rho=996.5560)
    assert w.P == pytest.approx(0.0992418352, rel=1e-8)
    assert w.cv == pytest.approx(4.13018112, rel=1e-8)
    assert w.w == pytest.approx(1501.51914, rel=1e-8)
    assert w.s == pytest.approx(0.393062643, rel=1e-8)


def test_water_helper_against_an_independent_iapws95_implementation():
    """tests/reference_data.py (iapws package) against CoolProp's IAPWS-95 (Wagner & Pruß 2002)
    at 298.15 K, 0.1 MPa and along Cp(T) at 0.1 MPa: two codes of one formulation agree to the
    tolerance of their (T, p) → ρ iterations (relative 1e-6)."""
    from CoolProp.CoolProp import PropsSI

    w = real.water_iapws95(298.15, 0.1)
    assert w.cp_J_per_mol_K == pytest.approx(PropsSI("CPMOLAR", "T", 298.15, "P", 1e5, "Water"), rel=1e-6)
    assert w.entropy_J_per_mol_K == pytest.approx(PropsSI("SMOLAR", "T", 298.15, "P", 1e5, "Water"), rel=1e-6)
    assert w.enthalpy_J_per_mol == pytest.approx(PropsSI("HMOLAR", "T", 298.15, "P", 1e5, "Water"), rel=1e-6)
    temperatures = np.array([280.0, 300.0, 320.0, 340.0, 360.0])
    coolprop = [PropsSI("CPMOLAR", "T", t, "P", 1e5, "Water") for t in temperatures]
    np.testing.assert_allclose(real.water_cp_iapws95(temperatures), coolprop, rtol=1e-6)
    # Cp − Cv of liquid water at 25 °C: Berta et al., J. Chem. Theory Comput. 16, 3316 (2020),
    # Table 1 footnote, convert with cp = cV + 0.8 J/(mol K) (one decimal: ±0.05)
    assert w.cp_J_per_mol_K - w.cv_J_per_mol_K == pytest.approx(0.8, abs=0.05)
    # the formulation's reference state: u = 0, s = 0 for the saturated liquid at the triple point
    from iapws import IAPWS95

    triple = IAPWS95(T=273.16, x=0)
    assert abs(triple.s) < 1e-9 and abs(triple.u) < 1e-9


def test_argon_entropy_is_absolute():
    """CoolProp's argon (Tegeler, Span, Wagner 1999) ideal-gas limit at 298.15 K and 1 bar
    equals the CODATA key value S°(Ar, g) = 154.846 ± 0.003 J/(mol K) (J. D. Cox, D. D.
    Wagman, V. A. Medvedev, CODATA Key Values for Thermodynamics (1989), table read at
    codata.info), so its liquid entropies are third-law values comparable with 2PT's."""
    assert real.argon_ideal_gas_entropy(298.15, 1e5) == pytest.approx(154.846, abs=0.003)


def test_copper_nist_fit_against_sourced_values():
    """The transcribed NIST OFHC-copper fit against two independent sources, each within the
    fit error the NIST page states: 0.385 J/(g K) at 25 °C (CRC Handbook, 97th ed.; 5 %), and
    the low-temperature law Cp = (12π⁴/5) R (T/θ₀)³ + γT with θ₀ = 344.3 K and
    γ = 0.691 mJ/(mol K²) (D. L. Martin, Phys. Rev. B 8, 5357 (1973); Debye T³ law, common
    practice) at 6, 8 and 10 K (10 % below 15 K).  A wrong coefficient moves the fit by
    orders of magnitude."""
    crc = real.COPPER_CP_298_J_PER_G_K * real.COPPER_MOLAR_MASS_G_PER_MOL
    assert real.copper_cp_nist(298.15) == pytest.approx(crc, rel=real.copper_nist_fit_error(298.15))
    for t in (6.0, 8.0, 10.0):
        law = (12 * math.pi**4 / 5 * gas_constant_J_per_mol_K * (t / real.COPPER_DEBYE_TEMPERATURE_0K_K) ** 3
               + real.COPPER_ELECTRONIC_GAMMA_J_PER_MOL_K2 * t)
        assert real.copper_cp_nist(t) == pytest.approx(law, rel=real.copper_nist_fit_error(t))
    with pytest.raises(ValueError, match="4 to 300 K"):
        real.copper_cp_nist(310.0)


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
    assert c.kind == "validation" and c.tested
    assert abs(c.difference) <= c.tolerance, (
        f"{c.system}: {c.quantity} = {c.value:.5g} {c.unit}, reference {c.reference:.5g} "
        f"({c.reference_source}; {c.reference_status}), difference {c.difference:+.3g} exceeds "
        f"±{c.tolerance:.3g} ({c.tolerance_reason})"
    )


@pytest.mark.slow
def test_row_kinds_and_tolerance_parts(validation):
    """Every validation row is listed above and carries a tolerance made of named parts, the
    statistical one among them; informational rows carry no tolerance and say why; circular
    rows (the same quantity two ways) are consistency rows, never validation."""
    comparisons, _ = validation
    assert sorted(k for k, c in comparisons.items() if c.kind == "validation") == sorted(TESTED)
    assert sorted(k for k, c in comparisons.items() if c.kind == "consistency") == sorted(CONSISTENCY)
    for c in comparisons.values():
        if c.kind == "informational":
            assert c.tolerance is None and c.not_tested_because and not c.passed
        else:
            assert all(reason.strip() for _, reason in c.tolerance_parts)
            assert c.tolerance == pytest.approx(sum(abs(size) for size, _ in c.tolerance_parts))
        if c.kind == "validation":
            assert any("standard errors" in reason for _, reason in c.tolerance_parts)
            assert "independent of qcorr" in c.reference_status


@pytest.mark.slow
@pytest.mark.parametrize("key", CONSISTENCY, ids=[f"{s}: {q}" for s, q in CONSISTENCY])
def test_consistency_rows_agree(validation, key):
    c = validation[0][key]
    assert abs(c.difference) <= c.tolerance, f"{c.quantity}: {c.value} vs {c.reference}"


@pytest.mark.slow
def test_corrections_go_the_right_way(validation):
    """Signs fixed by the weighting functions (Berens et al. 1983): quantum Cv < classical,
    quantum A > classical, for every mode; water's correction moves a classical MD Cp of
    flexible models (≥ 104 J/(mol K), Berta et al. 2020 Table 1) toward real water's Cp at
    298.15 K and 0.1 MPa (IAPWS-95, IAPWS R6-95(2018), via tests/reference_data.py)."""
    comparisons, _ = validation
    for name in ("copper_100K", "copper_300K"):
        c = comparisons[(name, "heat capacity Cv against lattice dynamics")]
        assert c.quantum < c.classical and c.correction < 0
    assert comparisons[("copper_300K", "free-energy correction ΔA")].correction > 0
    assert comparisons[("argon_liquid_86K", "free-energy correction ΔA")].correction > 0
    assert comparisons[("argon_liquid_86K", "heat-capacity correction ΔCv")].correction < 0
    water = comparisons[("water_flexible_298K", "heat-capacity correction ΔCv")]
    assert water.correction < 0
    real_cp = real.water_iapws95(298.15, 0.1).cp_J_per_mol_K
    smallest_classical_md_cp = 104.6  # F3C flexible, 2PT row of Berta et al. (2020) Table 1
    corrected = smallest_classical_md_cp + water.correction
    assert abs(corrected - real_cp) < abs(smallest_classical_md_cp - real_cp)
    # copper: the 100 K correction is larger than the 300 K one (further below θ_D)
    assert comparisons[("copper_100K", "heat capacity Cv against lattice dynamics")].correction < comparisons[
        ("copper_300K", "heat capacity Cv against lattice dynamics")
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
    assert "FAIL" not in text and "INCONSISTENT" not in text
    # circular rows only in their own section, and no informational row counted as a pass
    results, consistency = text.split("## Consistency checks (not validation)")
    for _, quantity in CONSISTENCY:
        assert quantity not in results and quantity in consistency
    for line in results.splitlines():
        if line.endswith("| informational |"):
            assert "| pass |" not in line
    assert f"{len(TESTED)} validation checks, {len(TESTED)} pass" in text


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
