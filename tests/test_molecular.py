"""Tests of qcorr.spectra.molecular: rigid-body kinematics (Goldstein, Classical
Mechanics, 3rd ed., Ch. 4-5) on synthetic molecules whose answer is exact."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from qcorr.errors import ConfigError, TrajectoryError
from qcorr.spectra import molecular as mo
from qcorr.spectra.estimator import SegmentAccumulator
from qcorr.spectra.molecular_pass import CentreOfMassDisplacement
from qcorr.spectra.segments import SpectrumSettings

RNG_SEED = 20261202

# bent triatomic (water-like masses/geometry, u and Å), linear triatomic, one atom
BENT = (np.array([15.999, 1.008, 1.008]),
        np.array([[0.0, 0.0, 0.0], [0.9572, 0.0, 0.0], [-0.2400, 0.9266, 0.0]]))
LINEAR = (np.array([15.999, 12.011, 15.999]),
          np.array([[-1.16, 0.0, 0.0], [0.0, 0.0, 0.0], [1.16, 0.0, 0.0]]))
ATOM = (np.array([39.948]), np.array([[0.0, 0.0, 0.0]]))
BOX = np.array([12.0, 12.0, 12.0, 90.0, 90.0, 90.0])


def _system(kinds, rng, box=BOX):
    """Place molecules with random orientation and centre, some straddling the box edge."""
    masses, ids, body, centres, rots = [], [], [], [], []
    for i, (m, x) in enumerate(kinds):
        com = (m @ x) / m.sum()
        masses.append(m)
        ids.append(np.full(m.size, i))
        body.append(x - com)
        centres.append(rng.uniform(0, box[:3]) if i % 2 else np.array([0.2, 11.9, 6.0]))
        rots.append(Rotation.random(random_state=rng))
    return np.concatenate(masses), np.concatenate(ids), body, centres, rots


def _frame(body, centres, rots, V, W, t, box=BOX):
    """Positions (wrapped into the box) and velocities v = V + w x r of rigid bodies."""
    pos, vel = [], []
    for b, c, r0, v, w in zip(body, centres, rots, V, W):
        r = Rotation.from_rotvec(w * t) * r0  # constant lab-frame angular velocity w
        rel = r.apply(b)
        pos.append(c + v * t + rel)
        vel.append(v + np.cross(w, rel))
    pos = np.concatenate(pos)
    return np.mod(pos, box[:3]), np.concatenate(vel)


def test_rigid_kinetic_energy_splits_exactly():
    # Koenig's theorem + rigid rotation: sum m v^2 = M V^2 + w.I.w, for bent,
    # linear and one-atom molecules, including molecules cut by the box edge.
    rng = np.random.default_rng(RNG_SEED)
    kinds = [BENT, LINEAR, ATOM, BENT, LINEAR, BENT]
    masses, ids, body, centres, rots = _system(kinds, rng)
    V = rng.normal(size=(len(kinds), 3))
    W = rng.normal(size=(len(kinds), 3))
    for k, (m, x) in enumerate(kinds):  # spin about a linear axis is not a rotation dof
        if k in (1, 4):
            axis = rots[k].apply([1.0, 0.0, 0.0])
            W[k] -= (W[k] @ axis) * axis
    pos, vel = _frame(body, centres, rots, V, W, 0.0)
    groups = np.ones((1, masses.size), dtype=bool)
    layout = mo.build_layout(masses, ids, groups, pos, BOX)
    assert layout.rotational_dof.tolist() == [3, 2, 0, 3, 2, 3]
    dec = mo.MolecularDecomposer(layout)
    out = dec.frame(pos, vel, BOX)
    n = len(kinds)
    np.testing.assert_allclose(out[:n], V, atol=1e-12)
    total = np.einsum("i,ij,ij->", masses, vel, vel)
    trn = np.einsum("i,ij,ij->", layout.molecule_mass, out[:n], out[:n])
    rot = np.sum(out[n:] ** 2)
    assert trn + rot == pytest.approx(total, rel=1e-12)
    assert np.all(out[n + 2] == 0.0)  # the atom does not rotate


def test_vibration_is_orthogonal_to_translation_and_rotation():
    # Eckart-like internal velocities (no net momentum, no angular momentum)
    # leave V and w unchanged; their energy is what remains for vibration.
    rng = np.random.default_rng(RNG_SEED + 1)
    masses, ids, body, centres, rots = _system([BENT], rng)
    V, W = rng.normal(size=(1, 3)), rng.normal(size=(1, 3))
    pos, vel = _frame(body, centres, rots, V, W, 0.0)
    rel = rots[0].apply(body[0])
    # symmetric stretch: radial velocities of the two H, balanced by O
    vib = np.zeros((3, 3))
    vib[1] = 0.3 * (rel[1] - rel[0])
    vib[2] = 0.3 * (rel[2] - rel[0])
    vib[0] = -(masses[1] * vib[1] + masses[2] * vib[2]) / masses[0]
    lv = np.sum(masses[:, None] * np.cross(rel, vib), axis=0)
    # remove any angular momentum the stretch carries (project it out as a rotation)
    inertia = sum(m * (r @ r * np.eye(3) - np.outer(r, r)) for m, r in zip(masses, rel))
    vib -= np.cross(np.linalg.solve(inertia, lv), rel)
    layout = mo.build_layout(masses, ids, np.ones((1, 3), bool), pos, BOX)
    dec = mo.MolecularDecomposer(layout)
    rigid = dec.frame(pos, vel, BOX)
    dec2 = mo.MolecularDecomposer(layout)
    flexible = dec2.frame(pos, vel + vib, BOX)
    np.testing.assert_allclose(flexible, rigid, atol=1e-10)
    # the residual velocities are exactly the internal ones (zero for the rigid motion)
    dec3 = mo.MolecularDecomposer(layout)
    np.testing.assert_allclose(dec3.frame(pos, vel, BOX, include_vibration=True)[2:], 0.0, atol=1e-10)
    dec4 = mo.MolecularDecomposer(layout)
    np.testing.assert_allclose(dec4.frame(pos, vel + vib, BOX, include_vibration=True)[2:], vib,
                               atol=1e-10)


def test_spin_about_principal_axis_gives_constant_channels():
    # Rotation about a principal axis at constant rate: body-frame angular
    # velocity is constant (Euler's equations), so the followed-axis channels
    # must not change sign or label from frame to frame.
    rng = np.random.default_rng(RNG_SEED + 2)
    masses, ids, body, centres, rots = _system([BENT], rng)
    rel0 = rots[0].apply(body[0])
    inertia = sum(m * (r @ r * np.eye(3) - np.outer(r, r)) for m, r in zip(masses, rel0))
    _, axes = np.linalg.eigh(inertia)
    W = np.array([3.0 * axes[:, 1]])
    V = np.zeros((1, 3))
    pos, vel = _frame(body, centres, rots, V, W, 0.0)
    layout = mo.build_layout(masses, ids, np.ones((1, 3), bool), pos, BOX)
    dec = mo.MolecularDecomposer(layout)
    first = dec.frame(pos, vel, BOX)
    for t in np.linspace(0.01, 5.0, 60):  # several full turns
        pos, vel = _frame(body, centres, rots, V, W, t)
        np.testing.assert_allclose(dec.frame(pos, vel, BOX), first, atol=1e-9)


def test_dof_split_from_spectra_maxwell_boltzmann():
    # Parseval: with velocities drawn from Maxwell-Boltzmann at equipartition,
    # the spectra integrate to 3 (translation) and 3 or 2 (rotation) per
    # molecule, and for rigid molecules atoms - translation - rotation = 0.
    rng = np.random.default_rng(RNG_SEED + 3)
    kinds = [BENT] * 40 + [LINEAR] * 40
    masses, ids, body, centres, rots = _system(kinds, rng)
    n = len(kinds)
    kT = 2.494  # kJ/mol at 300 K; u A^2 ps^-2 = 0.01 kJ/mol
    kT_u = kT * 100.0
    pos, _ = _frame(body, centres, rots, np.zeros((n, 3)), np.zeros((n, 3)), 0.0)
    groups = np.zeros((2, masses.size), bool)
    groups[0, ids < 40] = True
    groups[1, ids >= 40] = True
    layout = mo.build_layout(masses, ids, groups, pos, BOX)
    dec = mo.MolecularDecomposer(layout)
    settings = SpectrumSettings(timestep_ps=0.01, segment_frames=16, overlap=0.0, taper="none")
    atoms = SegmentAccumulator(settings, masses, groups)
    mols = SegmentAccumulator(settings, dec.channel_weights(), dec.channel_groups())
    principal = []
    for k, (m, x) in enumerate(kinds):
        rel = rots[k].apply(body[k])
        inertia = sum(mm * (r @ r * np.eye(3) - np.outer(r, r)) for mm, r in zip(m, rel))
        vals, vecs = np.linalg.eigh(inertia)
        keep = vals > 1e-6 * vals[-1]
        principal.append((vecs, np.where(keep, np.sqrt(kT_u / np.where(keep, vals, 1)), 0.0)))
    mol_mass = np.array([m.sum() for m, _ in kinds])
    rel_all = np.concatenate([rots[k].apply(body[k]) for k in range(n)])
    for step in range(16 * 20):
        # fresh thermal velocities every frame (white spectrum); rigid geometry
        V = rng.normal(size=(n, 3)) * np.sqrt(kT_u / mol_mass)[:, None]
        W = np.array([vecs @ (rng.normal(size=3) * scale) for vecs, scale in principal])
        vel = V[ids] + np.cross(W[ids], rel_all)
        atoms.add_frame(vel)
        mols.add_frame(dec.frame(pos, vel, BOX))
    a = atoms.result().mean_square.mean(axis=1) / kT_u
    m = mols.result().mean_square.mean(axis=1) / kT_u
    trn, rot = m[:2], m[2:]
    np.testing.assert_allclose(a - trn - rot, 0.0, atol=1e-9 * a.max())
    # 40 molecules x 320 frames: relative standard error ~ sqrt(2/(3*40*320)) = 0.7 %
    assert trn / 40 == pytest.approx([3.0, 3.0], rel=0.03)
    assert rot / 40 == pytest.approx([3.0, 2.0], rel=0.03)


def test_groups_of_whole_molecules_and_bad_input():
    rng = np.random.default_rng(RNG_SEED + 4)
    masses, ids, body, centres, rots = _system([BENT, BENT], rng)
    pos, _ = _frame(body, centres, rots, np.zeros((2, 3)), np.zeros((2, 3)), 0.0)
    groups = np.array([[True] * 6, [True] * 3 + [False] * 3, [True, False, False] * 2])
    layout = mo.build_layout(masses, ids, groups, pos, BOX)
    assert layout.group_whole.tolist() == [True, True, False]
    assert layout.group_molecules.tolist() == [[True, True], [True, False], [False, False]]
    with pytest.raises(ConfigError, match="positive masses"):
        mo.build_layout(np.r_[masses[:-1], 0.0], ids, groups, pos, BOX)
    with pytest.raises(ConfigError, match="same 6 atoms"):
        mo.build_layout(masses, ids[:-1], groups, pos, BOX)
    dec = mo.MolecularDecomposer(layout)
    with pytest.raises(TrajectoryError, match="frame 0"):
        dec.frame(pos[:-1], pos[:-1], BOX)


def test_msd_recovers_random_walk_diffusion():
    # Einstein relation MSD = 6 D t for a Gaussian random walk of the centres
    # (each step N(0, 2 D dt) per axis); positions wrapped into the box must be
    # unwrapped.  600 walkers, lags up to 40 steps: statistical error ~ 2 %.
    rng = np.random.default_rng(RNG_SEED + 5)
    n, dt, D = 600, 0.1, 0.05  # ps, A^2/ps
    masses = np.full(n, 39.948)
    x = rng.uniform(0, 12.0, size=(n, 3))
    layout = mo.build_layout(masses, np.arange(n), np.ones((1, n), bool), x, BOX)
    dec = mo.MolecularDecomposer(layout)
    msd = CentreOfMassDisplacement(layout.group_molecules, dt, max_lag_frames=40, n_lags=20)
    for _ in range(400):
        dec.frame(np.mod(x, 12.0), np.zeros((n, 3)), BOX)
        msd.add_frame(dec.unwrapped_com)
        x = x + rng.normal(scale=np.sqrt(2 * D * dt), size=(n, 3))
    d = msd.self_diffusion_m2_per_s()[0]
    assert d == pytest.approx(D * 1e-8, rel=0.05)  # 1 A^2/ps = 1e-8 m^2/s


def test_molecule_ids_from_universe_residues_and_fragments():
    import MDAnalysis as mda

    u = mda.Universe.empty(6, n_residues=2, atom_resindex=[0, 0, 0, 1, 1, 1], trajectory=True)
    u.add_TopologyAttr("masses", [16.0, 1.0, 1.0] * 2)
    np.testing.assert_array_equal(mo.molecule_ids_from_universe(u, np.arange(6)), [0, 0, 0, 1, 1, 1])
    with pytest.raises(ConfigError, match="needs bonds"):
        mo.molecule_ids_from_universe(u, np.arange(6), "fragment")
    u.add_TopologyAttr("bonds", [(0, 1), (0, 2), (3, 4)])
    np.testing.assert_array_equal(
        mo.molecule_ids_from_universe(u, np.arange(6), "fragment"), [0, 0, 0, 1, 1, 2])
    with pytest.raises(ConfigError, match="--molecules"):
        mo.molecule_ids_from_universe(u, np.arange(6), "chain")


@pytest.mark.slow
def test_rigid_tip3p_water_from_openmm_through_spectrum_command(tmp_path, run_qcorr):
    # Real engine: 129 rigid TIP3P waters (OpenMM, SETTLE-type constraints, NVE after
    # Langevin equilibration).  Rigid-body kinematics make the kinetic energy split
    # exactly into centre-of-mass and rotational parts, so the difference (vibration)
    # spectrum integrates to ~0 and is set to 0; equipartition (e.g. McQuarrie,
    # Statistical Mechanics, Ch. 7) makes translation ~3 and rotation ~3 per molecule.
    import MDAnalysis as mda
    import openmm as mm
    import pandas as pd
    import synthetic
    from openmm import app
    from openmm import unit as U

    ff = app.ForceField("tip3p.xml")
    mod = app.Modeller(app.Topology(), [])
    mod.addSolvent(ff, model="tip3p", boxSize=mm.Vec3(1.6, 1.6, 1.6) * U.nanometer)
    system = ff.createSystem(mod.topology, nonbondedMethod=app.PME, nonbondedCutoff=0.7 * U.nanometer,
                             constraints=app.HBonds, rigidWater=True)
    platform = mm.Platform.getPlatformByName("CPU")
    lang = mm.LangevinMiddleIntegrator(300 * U.kelvin, 5 / U.picosecond, 2 * U.femtosecond)
    lang.setRandomNumberSeed(RNG_SEED)
    ctx = mm.Context(system, lang, platform, {"Threads": "1"})
    ctx.setPositions(mod.positions)
    mm.LocalEnergyMinimizer.minimize(ctx, 10, 200)
    ctx.setVelocitiesToTemperature(300 * U.kelvin, RNG_SEED)
    lang.step(2000)
    verlet = mm.VerletIntegrator(2 * U.femtosecond)
    verlet.setConstraintTolerance(1e-8)
    nve = mm.Context(system, verlet, platform, {"Threads": "1"})
    nve.setState(ctx.getState(getPositions=True, getVelocities=True))
    frames, n_atoms = 1500, mod.topology.getNumAtoms()
    pos, vel = np.empty((frames, n_atoms, 3)), np.empty((frames, n_atoms, 3))
    for f in range(frames):
        s = nve.getState(getPositions=True, getVelocities=True)
        pos[f] = s.getPositions(asNumpy=True).value_in_unit(U.angstrom)
        vel[f] = s.getVelocities(asNumpy=True).value_in_unit(U.angstrom / U.picosecond)
        verlet.step(2)
    top = tmp_path / "water.pdb"
    with open(top, "w") as handle:
        app.PDBFile.writeFile(mod.topology, mod.positions, handle)
    u = mda.Universe(str(top))
    box = 16.0
    scn = synthetic.Scenario(pos, vel, np.arange(frames) * 0.004, u.atoms.masses, list(u.atoms.names),
                             list(u.atoms.types), u.atoms.resindices + 1, box, np.array([]))
    trr = synthetic.write_trr(scn, tmp_path / "water.trr")
    n = u.atoms.n_residues
    out = tmp_path / "water.nc"
    code, _, err = run_qcorr("spectrum", "--topology", top, "--trajectory", trr, "--temperature", 300,
                             "--constraints-per-molecule", "total=3", "--segment-ps", "2", "--molecular",
                             "--progress", "never", "--output", out)
    assert code == 0, err
    import xarray as xr

    with xr.open_dataset(out, engine="h5netcdf") as ds:
        x = ds["wavenumber"].values
        trn = np.trapezoid(ds["vdos_translation"].values[0], x) / n
        rot = np.trapezoid(ds["vdos_rotation"].values[0], x) / n
        assert int(ds["whole_molecule_count"].values[0]) == n
        assert float(ds["rotational_dof_per_molecule"].values[0]) == 3.0
        assert float(ds["vibrational_dof_per_molecule"].values[0]) == 0.0
        assert np.all(ds["vdos_vibration"].values[0] == 0.0)
        assert np.all(ds["vdos_vibration_residual"].values[0] == 0.0)
        # exact kinetic-energy split of rigid bodies: difference integral ~ 0 (SETTLE tolerance)
        assert abs(float(ds["vibration_difference_integral"].values[0])) < 1e-3 * 6 * n
        # equipartition over a 6 ps NVE run of 129 molecules: a few per cent
        assert trn + rot == pytest.approx((6 * n - 3) / n, rel=1e-3)  # normalisation to the dof
        assert trn == pytest.approx(3.0, rel=0.06)
        assert rot == pytest.approx(3.0, rel=0.06)
        moments = ds["principal_moments"].values[0]
    # TIP3P geometry (O-H 0.9572 A, H-O-H 104.52 deg; Jorgensen et al., J. Chem. Phys.
    # 79, 926 (1983)): principal moments computed here from the geometry
    m_o, m_h = u.atoms.masses[0], u.atoms.masses[1]
    half = math.radians(104.52 / 2)
    h = np.array([[0.9572 * math.sin(half), 0.9572 * math.cos(half), 0.0],
                  [-0.9572 * math.sin(half), 0.9572 * math.cos(half), 0.0], [0.0, 0.0, 0.0]])
    mass = np.array([m_h, m_h, m_o])
    com = mass @ h / mass.sum()
    r = h - com
    inertia = sum(mm_ * (v @ v * np.eye(3) - np.outer(v, v)) for mm_, v in zip(mass, r))
    np.testing.assert_allclose(moments, np.linalg.eigvalsh(inertia), rtol=1e-4)
    table = tmp_path / "water.csv"
    code, _, err = run_qcorr("liquid", out, "--output", table, "--quiet", "--symmetry-number", "2")
    assert code == 0, err
    frame = pd.read_csv(table)
    s = frame.set_index("property")["quantum"]
    assert s["entropy"] == pytest.approx(s["entropy_translation"] + s["entropy_rotation"], rel=1e-12)


def test_spectrum_command_molecular_on_antiphase_diatomics(oscillator_files, tmp_path, run_qcorr):
    # Antiphase diatomics (tests/synthetic.py): the two atoms of each molecule move with
    # opposite velocities, so the centre of mass is at rest (translation spectrum = 0,
    # Koenig's theorem) and every bit of kinetic energy is rotation + vibration of a
    # linear (two-atom) molecule: 2 rotational dof, 1 vibrational dof per molecule.
    import xarray as xr
    from conftest import OSC_MASS_U, OSC_SEGMENT_PS, OSC_TEMPERATURE_K

    base = ["spectrum", "--topology", oscillator_files["topology"], "--trajectory",
            oscillator_files["trr"], "--temperature", OSC_TEMPERATURE_K, "--segment-ps", OSC_SEGMENT_PS,
            "--mass", f"O={OSC_MASS_U}", "--progress", "never", "--group", "first=resid 1",
            "--group", "half=name OA"]
    out = tmp_path / "mol.nc"
    code, _, err = run_qcorr(*base, "--molecular", "--output", out)
    assert code == 0, err
    with xr.open_dataset(out, engine="h5netcdf") as ds:
        x = ds["wavenumber"].values
        total = np.trapezoid(ds["vdos"].values, x, axis=-1)
        trn = np.trapezoid(ds["vdos_translation"].values, x, axis=-1)
        rot = np.trapezoid(ds["vdos_rotation"].values, x, axis=-1)
        vib = np.trapezoid(ds["vdos_vibration"].values, x, axis=-1)
        residual = ds["vdos_vibration_residual_segments"].values[:2]
        res = np.trapezoid(ds["vdos_vibration_residual"].values, x, axis=-1)
        groups = [str(g) for g in ds["group"].values]
        assert ds["rotational_dof_per_molecule"].values[groups.index("total")] == 2.0
        assert ds["vibrational_dof_per_molecule"].values[groups.index("total")] == 1.0
        assert ds["whole_molecule_count"].values.tolist() == [4, 1, 0]  # 'half' splits molecules
        assert np.all(np.isnan(ds["vdos_translation"].values[groups.index("half")]))
    for g in (groups.index("total"), groups.index("first")):
        assert abs(trn[g]) < 1e-9 * total[g]
        assert rot[g] + vib[g] == pytest.approx(total[g], rel=1e-9)
        assert rot[g] > 0 and vib[g] > 0
        # residual-velocity spectrum: same integral as the difference (exact kinetic-energy
        # split, see qcorr.spectra.molecular), and a power spectrum, so never negative
        assert res[g] == pytest.approx(vib[g], rel=1e-9)
    assert np.all(residual >= 0)
    # velocities from positions (forward differences; molecule positions at the interval
    # midpoints): the same split holds
    out_fd = tmp_path / "mol_fd.nc"
    code, _, err = run_qcorr(*base, "--molecular", "--velocities-from", "positions", "--output", out_fd)
    assert code == 0, err
    with xr.open_dataset(out_fd, engine="h5netcdf") as ds:
        g = [str(v) for v in ds["group"].values].index("total")
        x = ds["wavenumber"].values
        parts = [np.trapezoid(ds[v].values[g], x) for v in
                 ("vdos", "vdos_translation", "vdos_rotation", "vdos_vibration_residual")]
    assert abs(parts[1]) < 1e-6 * parts[0]
    # exact per frame before the transfer-function division; dividing the separate
    # spectra by sinc^2 (which differs across frequency) leaves the cross-spectra's
    # share uncorrected: here 8e-6 relative, bounded well below 1e-4 at these bins
    assert parts[2] + parts[3] == pytest.approx(parts[0], rel=1e-4)
    # bad combinations are refused before the frame loop, and no file is written
    code, _, err = run_qcorr(*base, "--molecular", "--molecules", "fragment", "--output", tmp_path / "f.nc")
    assert code != 0 and "--molecules fragment needs bonds" in err
    assert not (tmp_path / "f.nc").exists()


def test_kinetic_energy_split_holds_frame_after_frame():
    # Same identity as above, over 200 frames of tumbling rigid bodies, so that the
    # followed principal axes (Jacobi updates from the previous frame) are exercised:
    # sum m v^2 = M V^2 + sum_k I_k w_k^2 in every frame, and the followed moments
    # stay equal to the eigenvalues of the inertia tensor (a rigid body's moments).
    rng = np.random.default_rng(RNG_SEED + 6)
    kinds = [BENT] * 5 + [LINEAR] * 2
    masses, ids, body, centres, rots = _system(kinds, rng)
    n = len(kinds)
    V, W = rng.normal(size=(n, 3)), 5.0 * rng.normal(size=(n, 3))
    pos, vel = _frame(body, centres, rots, V, W, 0.0)
    layout = mo.build_layout(masses, ids, np.ones((1, masses.size), bool), pos, BOX)
    dec = mo.MolecularDecomposer(layout)
    expected = [np.linalg.eigvalsh(sum(mm * (r @ r * np.eye(3) - np.outer(r, r))
                                       for mm, r in zip(m, x - (m @ x) / m.sum())))
                for m, x in kinds[:5]]
    for t in np.linspace(0.0, 3.0, 200):
        pos, vel = _frame(body, centres, rots, V, W, t)
        out = dec.frame(pos, vel, BOX)
        total = np.einsum("i,ij,ij->", masses, vel, vel)
        split = np.einsum("i,ij,ij->", layout.molecule_mass, out[:n], out[:n]) + np.sum(out[n:] ** 2)
        assert split == pytest.approx(total, rel=1e-10)
    moments = dec.mean_moments()[:5]
    np.testing.assert_allclose(np.sort(moments, axis=1), expected, rtol=1e-10)


@pytest.mark.parametrize("source", ["stored", "positions"])
def test_molecular_frame_blocks_combine_to_the_single_job(tmp_path, run_qcorr, source, monkeypatch):
    # Real engine: the bundled OpenMM flexible-water demo (64 molecules, 1001 frames,
    # diffusing).  Frame blocks joined by 'qcorr combine' must give the single job's
    # molecular spectra, moments, mean-square displacement and self-diffusion up to
    # rounding, and so the same 2PT table.  The segments (0.6 ps = 200 frames, 9 of them)
    # are split 3/3/3 (stored) or 5/4 (positions), so blocks 2 and 3 each need the
    # 192-frame look-back of the MSD's longest lag.
    import pathlib

    import pandas as pd

    from qcorr.spectra.spectrum_file import read_spectrum

    demo = pathlib.Path(__file__).resolve().parents[1] / "resources" / "demo" / "water_flexible_298K"
    base = ["spectrum", "--topology", demo / "topology.pdb", "--trajectory", demo / "trajectory.trr",
            "--temperature", 298.15, "--segment-ps", 0.6, "--molecular", "--progress", "never",
            "--group", "water=resname TIP3", "--group", "oxygen=name OH2",
            "--velocities-from", source]
    single = tmp_path / "single.nc"
    code, _, err = run_qcorr(*base, "--output", single)
    assert code == 0, err
    count = 3 if source == "stored" else 2
    blocks = []
    for i in range(1, count + 1):
        blocks.append(tmp_path / f"block{i}.nc")
        code, _, err = run_qcorr(*base, "--block", f"{i}-of-{count}", "--output", blocks[-1])
        assert code == 0, err
    joined = tmp_path / "joined.nc"
    code, _, err = run_qcorr("combine", *reversed(blocks), "--output", joined)
    assert code == 0, err
    candidates = [joined]
    if source == "stored":
        # the same split done by 'qcorr spectrum --threads 3' (worker processes; the size
        # threshold is lowered for this small system)
        from qcorr.cli import spectrum_command

        monkeypatch.setattr(spectrum_command, "PROCESS_MIN_ATOM_FRAMES", 0)
        candidates.append(tmp_path / "threads.nc")
        code, _, err = run_qcorr(*base, "--threads", 3, "--output", candidates[-1])
        assert code == 0, err
        assert read_spectrum(candidates[-1]).attrs["worker_processes"] == 3
    a = read_spectrum(single)
    assert "mean_square_displacement" in a.data_vars
    assert "vacf_translation_segments_raw" in a.data_vars  # centre-of-mass VACF, joined per segment too
    for candidate in candidates:
        b = read_spectrum(candidate)
        assert set(a.data_vars) == set(b.data_vars)
        for name in a.data_vars:
            if a[name].dtype.kind == "f":
                # relative 1e-10, and 1e-13 of the variable's largest value for elements that
                # are differences of larger numbers (vibration = atoms - translation - rotation)
                finite = np.isfinite(a[name].values)
                scale = float(np.nanmax(np.abs(a[name].values))) if finite.any() else 0.0
                np.testing.assert_allclose(b[name].values, a[name].values, rtol=1e-10,
                                           atol=1e-13 * scale, equal_nan=True, err_msg=name)
            else:
                np.testing.assert_array_equal(b[name].values, a[name].values, err_msg=name)
        for attr in ("principal_moment_frames", "molecule_definition", "statistics_frames",
                     "frames_used", "block_count"):
            assert a.attrs[attr] == b.attrs[attr], attr
    water = [str(g) for g in a["group"].values].index("water")
    assert int(a["whole_molecule_count"].values[water]) == 64
    assert np.isnan(a["self_diffusion_msd"].values[[str(g) for g in a["group"].values].index("oxygen")])
    assert a["self_diffusion_msd"].values[water] > 0
    tables = []
    for name in (single, joined):
        out = tmp_path / f"{name.stem}.csv"
        code, _, err = run_qcorr("liquid", name, "--groups", "water", "--symmetry-number", "2",
                                 "--quiet", "--output", out)
        assert code == 0, err
        tables.append(pd.read_csv(out))
    numeric = tables[0].select_dtypes("number").columns
    np.testing.assert_allclose(tables[1][numeric].to_numpy(float), tables[0][numeric].to_numpy(float),
                               rtol=1e-9, atol=1e-12, equal_nan=True)
    if source == "stored":
        # a block made without --molecular does not join the others
        plain = tmp_path / "plain.nc"
        args = [str(x) for x in base if str(x) != "--molecular"]
        assert run_qcorr(*args, "--block", f"2-of-{count}", "--output", plain)[0] == 0
        code, _, err = run_qcorr("combine", blocks[0], plain, blocks[2], "--output", tmp_path / "x.nc")
        assert code != 0 and "has no molecular spectra" in err and not (tmp_path / "x.nc").exists()
