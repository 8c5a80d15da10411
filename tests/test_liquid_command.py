"""Tests of ``qcorr liquid`` (2PT) against outside sources named beside each check."""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path

import lennard_jones_eos as eos
import numpy as np
import pandas as pd
import pytest
from scipy import constants as sc

sys.path.insert(0, str(Path(__file__).parent))

import spectra

R = sc.R
T298 = 298.15
C2 = sc.h * sc.c / sc.k * 100  # second radiation constant, cm K (CODATA via scipy)


def _lorentzian(x, s0, dof):
    """Exponential-VACF (Ornstein-Uhlenbeck) DoS per cm^-1 with S(0) = s0 and integral dof."""
    return s0 / (1 + (math.pi * s0 * x / (2 * dof)) ** 2)


def _s0_for(diffusion_m2_s, n, mass_u, t):
    """S~(0) (cm) = c * 12 m N D / kT (Green-Kubo; Lin, Blanco, Goddard 2003)."""
    return 12 * mass_u * sc.atomic_mass * n * diffusion_m2_s / (sc.k * t) * sc.c * 100


def _row(frame, group, prop):
    sel = frame[(frame["group"] == group) & (frame["property"] == prop)]
    assert len(sel) == 1, (group, prop, frame[["group", "property"]])
    return sel.iloc[0]


# ------------------------------------------------------------ monatomic ideal gas
@pytest.fixture
def argon_gas_file(tmp_path):
    """Dilute argon at 298.15 K, 1 bar: one-atom molecules, Lorentzian spectrum."""
    n, m = 1000, 39.948
    vol = n * sc.k * T298 / sc.bar / 1e-30
    s0 = _s0_for(1.8e-5, n, m, T298)  # kinetic-theory order of magnitude for Ar at 1 bar
    width = 2 * 3 * n / (math.pi * s0)
    x = np.linspace(0, 3000 * width, 150001)
    s = _lorentzian(x, s0, 3 * n)  # not renormalised: the tail beyond the grid is simply absent
    g = spectra.GroupSpec(s, float(np.trapezoid(s, x)), n, n, m * n, selection="name Ar")
    ds = spectra.spectrum_dataset(x, {"total": g}, temperature_K=T298, n_segments=3,
                                  attrs_override={"mean_box_volume_A3": vol})
    return spectra.write_spectrum_file(ds, tmp_path / "argon_gas.nc")


def test_ideal_gas_argon_gives_sackur_tetrode(argon_gas_file, tmp_path, run_qcorr):
    # CODATA key value S(Ar, g, 298.15 K, 1 bar) = 154.846 +- 0.003 J/(mol K)
    # (Cox, Wagman, Medvedev 1989; NIST-JANAF): the f -> 1 limit of 2PT, 0.1 %.
    out = tmp_path / "argon.csv"
    code, _, err = run_qcorr("liquid", argon_gas_file, "--output", out, "--quiet")
    assert code == 0, err
    frame = pd.read_csv(out)
    s = _row(frame, "total", "entropy")
    assert s["quantum"] == pytest.approx(154.846, rel=1e-3)
    assert s["classical"] == pytest.approx(154.846, rel=1e-3)
    cv = _row(frame, "total", "heat_capacity")
    assert cv["quantum"] == pytest.approx(1.5 * R, rel=1e-2)  # monatomic ideal gas Cv = 3R/2
    assert set(frame["method"]) == {"2pt"}
    assert set(frame["basis"]) == {"per_mole_molecules"}
    e = _row(frame, "total", "energy")
    assert math.isnan(e["quantum"]) and "--md-energy" in e["note"]
    side = json.loads(out.with_suffix(".json").read_text())
    comp = side["groups"]["total"]["components"]["translation"]
    assert comp["fluidicity"] > 0.99
    assert side["options"]["hard_sphere_entropy"] == "published"
    assert "near 1" in err  # warning: fluidicity near 1


def test_md_energy_makes_energy_and_free_energy_absolute(argon_gas_file, tmp_path, run_qcorr):
    # Thermodynamic identity A = E - T S (per mole), with E = E_MD + quantum correction.
    out = tmp_path / "argon.csv"
    code, _, err = run_qcorr("liquid", argon_gas_file, "--output", out, "--quiet",
                             "--md-energy", "total=3.7185")
    assert code == 0, err
    frame = pd.read_csv(out)
    e, a, s = (_row(frame, "total", p) for p in ("energy", "helmholtz_free_energy", "entropy"))
    assert e["classical"] == 3.7185
    assert a["quantum"] == pytest.approx(e["quantum"] - T298 * s["quantum"] / 1000, rel=1e-12)
    assert a["classical"] == pytest.approx(e["classical"] - T298 * s["classical"] / 1000, rel=1e-12)


# ------------------------------------------------------------ harmonic solid
def test_debye_solid_gives_zero_fluidicity_and_harmonic_result(tmp_path, run_qcorr):
    # Debye solid at T = theta_D: f = 0 and 2PT = harmonic solid, S/3Nk = 1.357896,
    # Cv/3Nk = 0.951732 (Debye model closed forms; methods notes §4.1 [C]).
    ds = spectra.debye_solid_dataset(debye_temperature_K=343.0, temperature_K=343.0, atoms=500,
                                     n_segments=4)
    ds.attrs["mean_box_volume_A3"] = 500 * 11.8
    path = spectra.write_spectrum_file(ds, tmp_path / "debye.nc")
    out = tmp_path / "debye.csv"
    code, _, err = run_qcorr("liquid", path, "--output", out, "--quiet")
    assert code == 0, err
    frame = pd.read_csv(out)
    assert _row(frame, "total", "entropy")["quantum"] / (3 * R) == pytest.approx(1.357896, rel=2e-4)
    assert _row(frame, "total", "heat_capacity")["quantum"] / (3 * R) == pytest.approx(0.951732, rel=2e-4)
    assert "near 0" in err


# ------------------------------------------------------------ rigid molecules, gas limit
def _molecular_water_gas(tmp_path, n_segments=2):
    """Rigid water as an ideal gas: 1000 molecules at 298.15 K and 1 bar, with the
    variables 'qcorr spectrum --molecular' writes (DEVELOPERS.md contract)."""
    n, m = 1000, 18.01528
    vol = n * sc.k * T298 / sc.bar / 1e-30
    # D = 1e-3 m^2/s puts Delta far into the gas limit (f = 1 - 3e-6), so the 2PT
    # result must approach the ideal-gas value (at real 1-bar diffusivities 2PT keeps
    # a ~0.1 % solid-like remainder; that is the model, not the limit under test)
    s0 = _s0_for(1.0e-3, n, m, T298)
    width = 2 * 3 * n / (math.pi * s0)
    x = np.linspace(0, 4000 * width, 160001)  # 4000 Lorentzian widths, 1/40 width spacing
    trn = _lorentzian(x, s0, 3 * n)  # not renormalised: the tail beyond the grid is absent
    rot = trn.copy()  # same S(0): rotational Delta as large as the translational one
    atoms = trn + rot
    g = spectra.GroupSpec(atoms, float(np.trapezoid(atoms, x)), 3 * n, n, m * n,
                          selection="resname SOL")
    ds = spectra.spectrum_dataset(x, {"total": g}, temperature_K=T298, n_segments=n_segments,
                                  attrs_override={"mean_box_volume_A3": vol})
    ds["constraint_count"].values[:] = 3 * n
    moments = [sc.h / (8 * math.pi**2 * sc.c * 100 * b) / sc.atomic_mass / 1e-20
               for b in (27.877, 14.512, 9.285)]  # NIST CCCBDB H2O rotational constants
    seg = ("group", "segment", "wavenumber")
    ns = ds.sizes["segment"]
    ds["vdos_translation"] = (("group", "wavenumber"), trn[None], {"units": "cm"})
    ds["vdos_rotation"] = (("group", "wavenumber"), rot[None], {"units": "cm"})
    ds["vdos_vibration"] = (("group", "wavenumber"), np.zeros((1, x.size)), {"units": "cm"})
    ds["vdos_translation_segments"] = (seg, np.tile(trn, (1, ns, 1)), {"units": "cm"})
    ds["vdos_rotation_segments"] = (seg, np.tile(rot, (1, ns, 1)), {"units": "cm"})
    ds["vdos_vibration_segments"] = (seg, np.zeros((1, ns, x.size)), {"units": "cm"})
    ds["whole_molecule_count"] = (("group",), [n])
    ds["molecule_kind_count"] = (("group",), [1])
    ds["molecule_mass"] = (("group",), [m])
    ds["principal_moments"] = (("group", "principal_axis"), [sorted(moments)])
    ds["rotational_dof_per_molecule"] = (("group",), [3.0])
    ds["vibrational_dof_per_molecule"] = (("group",), [0.0])
    ds["self_diffusion_msd"] = (("group",), [1.0e-3])
    return spectra.write_spectrum_file(ds, tmp_path / "water_gas.nc")


def test_rigid_water_gas_limit_translation_plus_rigid_rotor(tmp_path, run_qcorr):
    # Ideal-gas rigid water: Sackur-Tetrode (M = 18.01528) + rigid rotor with the
    # NIST CCCBDB constants (A 27.877, B 14.512, C 9.285 cm^-1, sigma = 2) =
    # 144.914 + 43.770 J/(mol K) (methods notes §4.3 [C]); recomputed here from
    # the textbook formulas (McQuarrie, Statistical Mechanics, Ch. 5 and 8).
    path = _molecular_water_gas(tmp_path)
    out = tmp_path / "water.csv"
    code, _, err = run_qcorr("liquid", path, "--output", out, "--quiet", "--symmetry-number", "2")
    assert code == 0, err
    frame = pd.read_csv(out)
    lam = sc.h / math.sqrt(2 * math.pi * 18.01528 * sc.atomic_mass * sc.k * T298)
    s_tr = R * (2.5 + math.log(sc.k * T298 / sc.bar / lam**3))
    theta = [C2 * b for b in (27.877, 14.512, 9.285)]
    s_rot = R * (1.5 + math.log(math.sqrt(math.pi) / 2 * math.sqrt(T298**3 / np.prod(theta))))
    assert s_tr == pytest.approx(144.914, abs=0.002) and s_rot == pytest.approx(43.770, abs=0.002)
    assert _row(frame, "total", "entropy_translation")["quantum"] == pytest.approx(s_tr, rel=1e-3)
    assert _row(frame, "total", "entropy_rotation")["quantum"] == pytest.approx(s_rot, rel=1e-3)
    assert _row(frame, "total", "entropy")["quantum"] == pytest.approx(s_tr + s_rot, rel=1e-3)
    # rigid molecule: no vibrational row; Cv -> 3R (3/2 R translation + 3/2 R rotation)
    assert frame[frame["property"] == "entropy_vibration"].empty
    assert _row(frame, "total", "heat_capacity")["quantum"] == pytest.approx(3 * R, rel=1e-2)


def test_symmetry_number_default_warns_and_changes_entropy_by_ln_sigma(tmp_path, run_qcorr):
    # Rigid rotor: S depends on sigma through -R ln sigma (McQuarrie Ch. 8).
    path = _molecular_water_gas(tmp_path)
    a, b = tmp_path / "a.csv", tmp_path / "b.csv"
    code, _, err = run_qcorr("liquid", path, "--output", a, "--quiet")
    assert code == 0 and "symmetry-number" in err
    code, _, _ = run_qcorr("liquid", path, "--output", b, "--quiet", "--symmetry-number", "total=2")
    assert code == 0
    sa = _row(pd.read_csv(a), "total", "entropy_rotation")["quantum"]
    sb = _row(pd.read_csv(b), "total", "entropy_rotation")["quantum"]
    f = json.loads(b.with_suffix(".json").read_text())["groups"]["total"]["components"]["rotation"]["fluidicity"]
    assert sa - sb == pytest.approx(f * R * math.log(2), rel=1e-9)


def test_split_output_and_options_recorded(tmp_path, run_qcorr):
    import xarray as xr

    path = _molecular_water_gas(tmp_path)
    out, split = tmp_path / "w.csv", tmp_path / "split.nc"
    code, _, err = run_qcorr("liquid", path, "--output", out, "--quiet", "--symmetry-number", "2",
                             "--split-output", split, "--hard-sphere-entropy", "constant-volume",
                             "--rotational-fluidicity", "same-as-translation",
                             "--diffusion-from", "msd")
    assert code == 0, err
    with xr.open_dataset(split, engine="h5netcdf") as sp:
        gas = sp["vdos_gas"].sel(group="total", component="translation").values
        solid = sp["vdos_solid"].sel(group="total", component="translation").values
        assert sp["wavenumber"].attrs["units"] == "cm-1"
    with xr.open_dataset(path, engine="h5netcdf") as src:
        trn = src["vdos_translation"].values[0]
    np.testing.assert_allclose(gas + solid, trn, rtol=1e-12)  # split is exact by construction
    side = json.loads(out.with_suffix(".json").read_text())
    assert side["options"]["hard_sphere_entropy"] == "constant-volume"
    assert side["options"]["diffusion_from"] == "msd"
    comps = side["groups"]["total"]["components"]
    assert comps["rotation"]["fluidicity"] == comps["translation"]["fluidicity"]
    assert side["groups"]["total"]["self_diffusion_from_msd_m2_per_s"] == 1.0e-3


# ------------------------------------------------------------ bad input
def test_bad_input_messages_and_no_output(argon_gas_file, tmp_path, run_qcorr):
    out = tmp_path / "x.csv"
    cases = [
        (["--symmetry-number", "nope=2"], "no group 'nope'"),
        (["--symmetry-number", "0"], "symmetry number must be >= 1"),
        (["--md-energy", "total=abc"], "--md-energy"),
        (["--volume", "-1"], "--volume"),
        (["--groups", "ghost"], "--groups: no group 'ghost'"),
    ]
    for extra, text in cases:
        code, _, err = run_qcorr("liquid", argon_gas_file, "--output", out, *extra)
        assert code != 0 and text in err and err.startswith("qcorr: error:"), (extra, err)
        assert not out.exists()
    code, _, err = run_qcorr("liquid", argon_gas_file, "--output", argon_gas_file)
    assert code != 0 and "overwrite" in err
    code, _, err = run_qcorr("liquid", tmp_path / "missing.nc", "--output", out)
    assert code != 0 and "missing.nc" in err


def test_no_volume_and_polyatomic_without_decomposition(tmp_path, run_qcorr):
    ds = spectra.debye_solid_dataset(debye_temperature_K=300.0, temperature_K=300.0, atoms=6)
    p1 = spectra.write_spectrum_file(ds, tmp_path / "nobox.nc")
    code, _, err = run_qcorr("liquid", p1, "--output", tmp_path / "a.csv")
    assert code != 0 and "--volume" in err and "nobox.nc" in err
    ds.attrs["mean_box_volume_A3"] = 100.0
    ds["molecule_count"].values[:] = 2  # three atoms per molecule, no molecular spectra
    p2 = spectra.write_spectrum_file(ds, tmp_path / "poly.nc")
    code, _, err = run_qcorr("liquid", p2, "--output", tmp_path / "b.csv")
    assert code != 0 and "--molecular" in err
    assert not (tmp_path / "b.csv").exists()


# ------------------------------------------------------------ real MD: Lennard-Jones argon
# The Johnson, Zollweg, Gubbins equation of state (Mol. Phys. 78, 591 (1993)) is implemented
# once, in tests/lennard_jones_eos.py.


def jzg_residual_helmholtz(t, rho):
    """A_res/(N eps) of the full LJ fluid at reduced T*, rho* (JZG 1993)."""
    return float(eos.jzg_residual_helmholtz(t, rho))


def jzg_residual_energy_entropy(t, rho):
    """(U_res/(N eps), S_res/(N k)) of JZG: U = d(A/T)/d(1/T), S = (U - A)/T."""
    return (eos.residual_energy(eos.jzg_residual_helmholtz, t, rho),
            eos.residual_entropy(eos.jzg_residual_helmholtz, t, rho))


def test_jzg_implementation_reproduces_second_virial_coefficient():
    # Low-density limit: A_res/(N eps) -> a_1(T) rho with a_1/T = B2*(T), the LJ
    # second virial coefficient computed here by quadrature (JZG fitted a_1 to it).
    from scipy.integrate import quad

    for t in (1.0, 2.0, 5.0):
        b2 = quad(lambda r, t=t: -2 * math.pi * r * r * (math.exp(-4 * (r**-12 - r**-6) / t) - 1),
                  0, 50, limit=500)[0]
        rho = 1e-7
        assert jzg_residual_helmholtz(t, rho) / (rho * t) == pytest.approx(b2, rel=2e-3)


def _run_lj_argon(n_side=6, rho_star=0.8, t_star=1.0, frames=3000, steps_per_frame=4, dt_fs=10.0,
                  seed=20261202):
    """216 LJ argon atoms (sigma 3.405 A, eps/k 119.8 K; the classic argon parameters of
    Rahman, Phys. Rev. 136, A405 (1964)) in OpenMM: Langevin equilibration, then NVE.
    Cut-off 3 sigma with the long-range dispersion correction (full-LJ energy as in JZG)."""
    import openmm as mm
    from openmm import unit as U

    sigma_nm, eps_K, mass = 0.3405, 119.8, 39.948
    eps = sc.k * eps_K * sc.N_A / 1000  # kJ/mol
    n = n_side**3
    box = (n / rho_star) ** (1 / 3) * sigma_nm
    system = mm.System()
    system.setDefaultPeriodicBoxVectors(mm.Vec3(box, 0, 0), mm.Vec3(0, box, 0), mm.Vec3(0, 0, box))
    nb = mm.NonbondedForce()
    nb.setNonbondedMethod(mm.NonbondedForce.CutoffPeriodic)
    nb.setCutoffDistance(3.0 * sigma_nm)
    nb.setUseDispersionCorrection(True)
    for _ in range(n):
        system.addParticle(mass)
        nb.addParticle(0.0, sigma_nm, eps)
    system.addForce(nb)
    grid = (np.arange(n_side) + 0.5) * box / n_side
    start = np.array(np.meshgrid(grid, grid, grid, indexing="ij")).reshape(3, -1).T
    platform = mm.Platform.getPlatformByName("CPU")
    lang = mm.LangevinMiddleIntegrator(t_star * eps_K * U.kelvin, 5 / U.picosecond, dt_fs * U.femtosecond)
    lang.setRandomNumberSeed(seed)
    ctx = mm.Context(system, lang, platform, {"Threads": "1"})
    ctx.setPositions(start * U.nanometer)
    ctx.setVelocitiesToTemperature(t_star * eps_K * U.kelvin, seed)
    lang.step(3000)
    state = ctx.getState(getPositions=True, getVelocities=True)
    verlet = mm.VerletIntegrator(dt_fs * U.femtosecond)
    nve = mm.Context(system, verlet, platform, {"Threads": "1"})
    nve.setState(state)
    pos = np.empty((frames, n, 3))
    vel = np.empty((frames, n, 3))
    pot = np.empty(frames)
    kin = np.empty(frames)
    for f in range(frames):
        s = nve.getState(getPositions=True, getVelocities=True, getEnergy=True, enforcePeriodicBox=True)
        pos[f] = s.getPositions(asNumpy=True).value_in_unit(U.angstrom)
        vel[f] = s.getVelocities(asNumpy=True).value_in_unit(U.angstrom / U.picosecond)
        pot[f] = s.getPotentialEnergy().value_in_unit(U.kilojoule_per_mole)
        kin[f] = s.getKineticEnergy().value_in_unit(U.kilojoule_per_mole)
        verlet.step(steps_per_frame)
    return {"positions": pos, "velocities": vel, "potential": pot, "kinetic": kin, "n": n, "eps": eps,
                "eps_K": eps_K, "sigma_A": sigma_nm * 10, "box_A": box * 10, "mass": mass,
                "timestep_ps": steps_per_frame * dt_fs / 1000}


@pytest.mark.slow
@pytest.mark.filterwarnings("ignore::PendingDeprecationWarning")  # MDAnalysis mass guess for "Ar" in GRO
def test_lennard_jones_argon_liquid_entropy_against_jzg_equation_of_state(tmp_path, run_qcorr):
    """OpenMM LJ argon at T* ~ 1, rho* = 0.8 -> qcorr spectrum --molecular -> qcorr liquid.

    Reference: absolute classical entropy S/Nk = S_ideal (Sackur-Tetrode at the same
    density) + S_res from the JZG equation of state (Mol. Phys. 78, 591 (1993)) at the
    run's kinetic temperature.  Tolerance 5 %: 2PT is a model; Lin, Blanco, Goddard
    (2003) validated it against LJ equation-of-state entropies to a few percent [from
    memory, not re-read], and the hard-sphere entropy convention alone moves the result
    by f ln z (about 7 % here; Sun et al., J. Chem. Phys. 147, 194505 (2017) list it among
    the choices that change 2PT entropies).  With the gas volume V/(fN) the two conventions
    must bracket the EOS; the default (V/N) must lie within the same 5 %.
    """
    import MDAnalysis as mda
    import synthetic

    md = _run_lj_argon()
    n, eps_K = md["n"], md["eps_K"]
    kB_kJ = sc.k * sc.N_A / 1000
    t_kin = 2 * md["kinetic"].mean() / ((3 * n - 3) * kB_kJ)
    t_star = t_kin / eps_K
    rho_star = n / md["box_A"] ** 3 * md["sigma_A"] ** 3
    u_res, s_res = jzg_residual_energy_entropy(t_star, rho_star)
    # the EOS implementation against the engine: mean potential energy per atom (reduced)
    assert md["potential"].mean() / (n * md["eps"]) == pytest.approx(u_res, rel=0.015)

    scn = synthetic.Scenario(md["positions"], md["velocities"],
                             np.arange(md["positions"].shape[0]) * md["timestep_ps"],
                             np.full(n, md["mass"]), ["Ar"] * n, ["Ar"] * n, np.arange(1, n + 1),
                             md["box_A"], np.array([]))
    top = synthetic.write_gro(scn, tmp_path / "argon.gro")
    trr = synthetic.write_trr(scn, tmp_path / "argon.trr")
    atom_type = str(mda.Universe(str(top)).atoms.types[0])
    spectrum = tmp_path / "argon.nc"
    code, _, err = run_qcorr("spectrum", "--topology", top, "--trajectory", trr, "--temperature",
                             f"{t_kin:.6f}", "--mass", f"{atom_type}={md['mass']}", "--segment-ps", "5",
                             "--molecular", "--progress", "never", "--output", spectrum)
    assert code == 0, err
    results = {}
    for form in ("published", "constant-volume"):
        out = tmp_path / f"{form}.csv"
        code, _, err = run_qcorr("liquid", spectrum, "--output", out, "--quiet",
                                 "--hard-sphere-entropy", form, "--gas-volume", "gas-particles")
        assert code == 0, err
        results[form] = _row(pd.read_csv(out), "total", "entropy")
        side = json.loads(out.with_suffix(".json").read_text())["groups"]["total"]
    lam = sc.h / math.sqrt(2 * math.pi * md["mass"] * sc.atomic_mass * sc.k * t_kin)
    s_ideal = 2.5 - math.log(n / (md["box_A"] ** 3 * 1e-30) * lam**3)
    s_eos = (s_ideal + s_res) * R  # J/(mol K), classical
    s_pub = results["published"]["classical"]
    s_cv = results["constant-volume"]["classical"]
    print(f"LJ argon T*={t_star:.4f} rho*={rho_star:.4f}: S/R EOS {s_eos / R:.4f}, 2PT published "
          f"{s_pub / R:.4f} ({s_pub / s_eos - 1:+.2%}), constant-volume {s_cv / R:.4f} "
          f"({s_cv / s_eos - 1:+.2%}); U_res MD {md['potential'].mean() / (n * md['eps']):.4f} EOS {u_res:.4f}")
    assert s_pub == pytest.approx(s_eos, rel=0.05)
    assert s_cv == pytest.approx(s_eos, rel=0.05)
    assert s_cv < s_eos < s_pub
    # the default (published form, gas volume V/N) within the same 5 %
    out = tmp_path / "default.csv"
    code, _, err = run_qcorr("liquid", spectrum, "--output", out, "--quiet")
    assert code == 0, err
    s_default = _row(pd.read_csv(out), "total", "entropy")["classical"]
    print(f"default {s_default / R:.4f} ({s_default / s_eos - 1:+.2%})")
    assert s_default == pytest.approx(s_eos, rel=0.05)
    # both diffusion routes (Green-Kubo S(0) and Einstein MSD) agree within 10 %
    d_s0, d_msd = side["self_diffusion_from_spectrum_m2_per_s"], side["self_diffusion_from_msd_m2_per_s"]
    assert d_s0 == pytest.approx(d_msd, rel=0.10)
    # liquid: fluidicity well inside (0, 1)
    assert 0.2 < side["components"]["translation"]["fluidicity"] < 0.6


def test_warns_when_solid_like_part_is_negative_at_low_frequency(tmp_path, run_qcorr):
    # A narrow zero-frequency peak (20 % of the dof, half width 0.5 cm^-1) on a Debye
    # band: the hard-sphere gas fixed by S(0) through the fluidicity equation of Lin et
    # al. (2003) carries f = 0.88 of the dof, far more than the peak, so S - S_gas < 0
    # just above zero frequency, far beyond the 2 % segment scatter.  qcorr must say so.
    n, m, t = 1000, 39.948, 100.0
    x = np.linspace(0, 300, 3001)
    g = 3 * n * 0.2
    s0 = 2 * g / (math.pi * 0.5)
    s = _lorentzian(x, s0, g) + np.where(x <= 200.0, 9 * n * 0.8 * x**2 / 200.0**3, 0.0)
    spec = spectra.GroupSpec(s, float(np.trapezoid(s, x)), n, n, m * n, segment_scatter=0.02)
    ds = spectra.spectrum_dataset(x, {"total": spec}, temperature_K=t, n_segments=6,
                                  attrs_override={"mean_box_volume_A3": n * 3.405**3 / 0.8})
    path = spectra.write_spectrum_file(ds, tmp_path / "spike.nc")
    code, _, err = run_qcorr("liquid", path, "--output", tmp_path / "spike.csv", "--quiet")
    assert code == 0, err
    assert "negative beyond 3 standard errors at low frequency" in err
    side = json.loads((tmp_path / "spike.json").read_text())
    assert side["groups"]["total"]["components"]["translation"]["solid_dos_minimum_cm_per_molecule"] < 0
    assert any("negative" in c for c in side["cautions"])


def test_help_gives_every_option_with_its_unit(capsys):
    from qcorr.cli import build_parser

    with pytest.raises(SystemExit):
        build_parser().parse_args(["liquid", "--help"])
    text = " ".join(capsys.readouterr().out.split())
    for fragment in ("--volume A3", "cubic angstrom", "--md-energy GROUP=KJ_PER_MOL", "kJ/mol",
                     "--symmetry-number [GROUP=]N", "--hard-sphere-entropy", "published",
                     "constant-volume", "--gas-volume", "--rotational-fluidicity", "same-as-translation",
                     "--diffusion-from", "msd", "--split-output", "cm per cm-1"):
        assert fragment in text, fragment


def test_incomplete_molecular_file_is_refused(tmp_path, run_qcorr):
    import xarray as xr

    path = _molecular_water_gas(tmp_path)
    with xr.open_dataset(path, engine="h5netcdf") as ds:
        broken = ds.load().drop_vars("principal_moments")
    p2 = spectra.write_spectrum_file(broken, tmp_path / "broken.nc")
    code, _, err = run_qcorr("liquid", p2, "--output", tmp_path / "x.csv")
    assert code != 0 and "lacks 'principal_moments'" in err and "broken.nc" in err
    assert not (tmp_path / "x.csv").exists()


def test_viscosity_adds_the_yeh_hummer_correction(tmp_path, run_qcorr):
    # Yeh & Hummer, J. Phys. Chem. B 108, 15873 (2004), Eq. for a cubic box:
    # D_inf = D_PBC + xi kT/(6 pi eta L), xi = 2.837297.  Water-like viscosity.
    path = _molecular_water_gas(tmp_path)
    out = tmp_path / "v.csv"
    eta = 8.9e-4
    code, _, err = run_qcorr("liquid", path, "--output", out, "--quiet", "--symmetry-number", "2",
                             "--viscosity", eta, "--diffusion-from", "msd")
    assert code == 0, err
    side = json.loads(out.with_suffix(".json").read_text())["groups"]["total"]
    edge_m = side["volume_A3"] ** (1 / 3) * 1e-10
    expected = 2.837297 * sc.k * T298 / (6 * math.pi * eta * edge_m)
    assert side["finite_size_correction_m2_per_s"] == pytest.approx(expected, rel=1e-12)
    assert side["self_diffusion_used_m2_per_s"] == pytest.approx(1.0e-3 + expected, rel=1e-12)
    code, _, err = run_qcorr("liquid", path, "--output", out, "--viscosity", "-1")
    assert code != 0 and "--viscosity" in err


def test_vibration_spectrum_choice(tmp_path, run_qcorr):
    # Flexible molecules: the residual-velocity spectrum (default) or the difference
    # spectrum (which dips below zero near zero frequency, qcorr.spectra.molecular) feeds the
    # vibrational part; each row must equal the harmonic entropy of the chosen spectrum
    # (quantum oscillator weights, Berens et al. 1983), computed here independently by
    # quadrature of W_S(u) = u/(e^u - 1) - ln(1 - e^-u).
    import xarray as xr

    path = _molecular_water_gas(tmp_path)
    with xr.open_dataset(path, engine="h5netcdf") as src:
        ds = src.load()
    n = int(ds["whole_molecule_count"].values[0])
    x = ds["wavenumber"].values
    t = T298
    x0 = 0.5 * x[-1]  # a band in the middle of the grid, u = c2 x0 / T
    residual = np.exp(-0.5 * ((x - x0) / (0.02 * x0)) ** 2)
    residual *= n / np.trapezoid(residual, x)  # one vibrational dof per molecule
    difference = residual - 0.2 * n / x[-1] * np.exp(-x / (0.05 * x[-1]))
    ns = ds.sizes["segment"]
    for name, arr in (("vdos_vibration", difference), ("vdos_vibration_residual", residual)):
        ds[name] = (("group", "wavenumber"), arr[None], {"units": "cm"})
        ds[name + "_segments"] = (("group", "segment", "wavenumber"), np.tile(arr, (1, ns, 1)),
                                  {"units": "cm"})
    ds["vibrational_dof_per_molecule"] = (("group",), [1.0])
    p2 = spectra.write_spectrum_file(ds, tmp_path / "flex.nc")

    def w_s(u):
        return u / np.expm1(u) - np.log(-np.expm1(-u))

    results = {}
    for choice, arr in (("residual", residual), ("difference", difference)):
        out = tmp_path / f"{choice}.csv"
        code, _, err = run_qcorr("liquid", p2, "--output", out, "--quiet", "--symmetry-number", "2",
                                 "--vibration-spectrum", choice)
        assert code == 0, err
        got = _row(pd.read_csv(out), "total", "entropy_vibration")["quantum"]
        from scipy.integrate import quad

        u = C2 * x[1:] / t
        # trapezoid from x1 on; the first interval (log-singular weight at 0) by adaptive
        # quadrature of the linear interpolant
        first = quad(lambda z, a=arr: (a[0] + (a[1] - a[0]) * z / x[1]) * w_s(C2 * z / t), 0, x[1],
                     limit=200)[0]
        expected = R * (np.trapezoid(arr[1:] * w_s(u), x[1:]) + first) / n
        results[choice] = got
        assert got == pytest.approx(expected, rel=1e-7)
        side = json.loads(out.with_suffix(".json").read_text())
        assert side["options"]["vibration_spectrum"] == choice
    assert results["difference"] < results["residual"]


def test_pure_normalisation_scatter_gives_no_standard_error(tmp_path, run_qcorr):
    """Segments that differ from the mean spectrum only by an overall factor carry no
    information beyond the normalisation, which the averaged spectrum removes (its integral
    is set to the degrees of freedom); the 2PT standard errors must then vanish.  Same
    ratio-estimator treatment as the harmonic table (delta method; e.g. Kendall & Stuart,
    The Advanced Theory of Statistics, Vol. 1, 'variance of a ratio')."""
    n, m, t = 500, 39.948, 120.0
    volume_A3 = n * 39.948 / sc.N_A / 1.3e6 * 1e30  # liquid-like density 1.3 g/cm^3
    s0 = _s0_for(2.0e-9, n, m, t)
    x = np.linspace(0, 400.0, 4001)
    s = _lorentzian(x, s0, 3 * n) + 3 * n * np.exp(-((x - 60.0) / 20.0) ** 2) / (20.0 * math.sqrt(math.pi))
    s *= 3 * n / np.trapezoid(s, x)
    scales = np.array([0.9, 1.0, 1.1])  # mean exactly 1: the file's vdos is their mean
    g = spectra.GroupSpec(s, 3.0 * n, n, n, m * n, selection="name Ar",
                          segment_spectra=s[None, :] * scales[:, None])
    ds = spectra.spectrum_dataset(x, {"total": g}, temperature_K=t, n_segments=3,
                                  attrs_override={"mean_box_volume_A3": volume_A3})
    path = spectra.write_spectrum_file(ds, tmp_path / "scaled.nc")
    out = tmp_path / "scaled.csv"
    code, _, err = run_qcorr("liquid", path, "--output", out, "--quiet")
    assert code == 0, err
    frame = pd.read_csv(out)
    for prop in ("entropy", "heat_capacity"):
        row = _row(frame, "total", prop)
        assert row["quantum"] > 0
        assert abs(row["quantum_se"]) <= 1e-9 * abs(row["quantum"]), (prop, row["quantum_se"])
