"""Small synthetic trajectories with analytic spectra, and writers for real trajectory formats.

Scenario (our own): ``n`` "diatomic" molecules of two equal atoms that vibrate in
antiphase, v_B = −v_A, every Cartesian component a sinusoid
``v(t) = a cos(2π ν t + φ)`` at the molecule's frequency ν.  The centre-of-mass
velocity is therefore exactly zero, and with amplitude ``a = sqrt(2 k T / m)`` each
component carries m⟨v²⟩ = kT on average (equipartition; a time average of cos² is
exactly 1/2 over an integer number of periods).  Positions are the exact integral
``x = x0 + (a / 2πν) sin(2π ν t + φ)`` so that finite differences can be tested on
the same data.

Writers (all through MDAnalysis except the LAMMPS dump, which MDAnalysis cannot write;
format from the LAMMPS manual, "dump" command):

* :func:`write_gro` topology (names, residues, box; no masses: pass ``--mass``),
* :func:`write_trr` GROMACS TRR, :func:`write_ncdf` AMBER NetCDF, :func:`write_h5md` H5MD,
* :func:`write_lammps_dump` LAMMPS text dump in ``real`` or ``metal`` units.

Everything is seeded; nothing here imports qcorr.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
from scipy import constants as sc

#: k_B/u in (Å/ps)² per K: kT/m = _KT_OVER_M_A2_PS2 · T / m[u] (CODATA via scipy.constants)
_KT_OVER_M_A2_PS2 = sc.k / sc.atomic_mass * (sc.pico / sc.angstrom) ** 2


@dataclass
class Scenario:
    """Frames of a synthetic system.

    Attributes
    ----------
    positions, velocities : ndarray (n_frames, n_atoms, 3)
        Å and Å/ps, float64.
    times_ps : ndarray (n_frames,)
    masses : ndarray (n_atoms,), u
    names, types : list of str
    resids : ndarray (n_atoms,) 1-based residue of each atom
    box_A : float
        Cubic box edge, Å.
    frequencies_Hz : ndarray (n_molecules,)
    """

    positions: np.ndarray
    velocities: np.ndarray
    times_ps: np.ndarray
    masses: np.ndarray
    names: list[str]
    types: list[str]
    resids: np.ndarray
    box_A: float
    frequencies_Hz: np.ndarray

    @property
    def n_atoms(self) -> int:
        return self.positions.shape[1]

    @property
    def n_frames(self) -> int:
        return self.positions.shape[0]

    @property
    def timestep_ps(self) -> float:
        return float(self.times_ps[1] - self.times_ps[0])


def diatomic_oscillators(
    frequencies_Hz,
    *,
    n_frames: int,
    timestep_ps: float,
    temperature_K: float,
    mass_u: float = 15.999,
    box_A: float = 20.0,
    seed: int = 20261202,
    time_offset_ps: float = 0.0,
    kinetic_scale: float = 1.0,
) -> Scenario:
    """Build the antiphase-diatomic scenario (see the module docstring).

    *kinetic_scale* multiplies every m⟨v²⟩ (amplitude × sqrt(kinetic_scale)); with
    ``(3N − 3)/(3N)`` the kinetic temperature over the 3N − 3 degrees of freedom left
    after centre-of-mass removal equals *temperature_K* exactly.
    """
    rng = np.random.default_rng(seed)
    freqs = np.asarray(frequencies_Hz, dtype=float)
    n_mol = len(freqs)
    t = time_offset_ps + np.arange(n_frames) * timestep_ps
    amplitude = np.sqrt(2.0 * kinetic_scale * _KT_OVER_M_A2_PS2 * temperature_K / mass_u)  # Å/ps
    omega = 2.0 * np.pi * freqs * sc.pico  # rad/ps
    phases = rng.uniform(0, 2 * np.pi, size=(n_mol, 3))
    centres = rng.uniform(2.0, box_A - 2.0, size=(n_mol, 3))
    arg = omega[None, :, None] * t[:, None, None] + phases[None]
    v = amplitude * np.cos(arg)  # (frames, mol, 3)
    dx = amplitude / omega[None, :, None] * np.sin(arg)
    velocities = np.empty((n_frames, 2 * n_mol, 3))
    positions = np.empty((n_frames, 2 * n_mol, 3))
    velocities[:, 0::2] = v
    velocities[:, 1::2] = -v
    positions[:, 0::2] = centres[None] + 0.6 + dx
    positions[:, 1::2] = centres[None] - 0.6 - dx
    n_atoms = 2 * n_mol
    return Scenario(
        positions=positions,
        velocities=velocities,
        times_ps=t,
        masses=np.full(n_atoms, mass_u),
        names=["OA", "OB"] * n_mol,
        types=["OX"] * n_atoms,
        resids=np.repeat(np.arange(1, n_mol + 1), 2),
        box_A=box_A,
        frequencies_Hz=freqs,
    )


def universe_of(scn: Scenario, *, with_velocities: bool = True, with_masses: bool = True):
    """An in-memory MDAnalysis Universe holding the scenario (for the writers)."""
    import MDAnalysis as mda
    from MDAnalysis.coordinates.memory import MemoryReader

    u = mda.Universe.empty(
        scn.n_atoms, n_residues=int(scn.resids.max()), atom_resindex=scn.resids - 1, trajectory=False
    )
    u.add_TopologyAttr("names", scn.names)
    u.add_TopologyAttr("types", scn.types)
    u.add_TopologyAttr("resnames", ["DIA"] * int(scn.resids.max()))
    u.add_TopologyAttr("resids", np.arange(1, int(scn.resids.max()) + 1))
    if with_masses:
        u.add_TopologyAttr("masses", scn.masses)
    dims = np.tile([scn.box_A] * 3 + [90.0] * 3, (scn.n_frames, 1)).astype(np.float32)
    u.load_new(
        scn.positions.astype(np.float32),
        format=MemoryReader,
        velocities=scn.velocities.astype(np.float32) if with_velocities else None,
        dt=scn.timestep_ps,
        dimensions=dims,
    )
    return u


def _write_frames(u, writer, times):
    for ts, time in zip(u.trajectory, times):
        ts.time = float(time)
        writer.write(u.atoms)


def write_gro(scn: Scenario, path: Path) -> Path:
    """GRO topology of the first frame (names, residues, box; masses come from ``--mass``)."""
    u = universe_of(scn, with_velocities=False)
    u.trajectory[0]
    u.atoms.write(str(path))
    return path


def write_trr(scn: Scenario, path: Path, *, with_velocities: bool = True) -> Path:
    """GROMACS TRR (float32; nm and nm/ps in the file, converted by MDAnalysis)."""
    import MDAnalysis as mda

    u = universe_of(scn, with_velocities=with_velocities)
    with mda.Writer(str(path), n_atoms=scn.n_atoms) as w:
        _write_frames(u, w, scn.times_ps)
    return path


def write_ncdf(scn: Scenario, path: Path) -> Path:
    """AMBER NetCDF trajectory with velocities."""
    import MDAnalysis as mda

    u = universe_of(scn)
    with mda.Writer(str(path), n_atoms=scn.n_atoms, velocities=True) as w:
        _write_frames(u, w, scn.times_ps)
    return path


def write_h5md(scn: Scenario, path: Path) -> Path:
    """H5MD trajectory with velocities (units must be given explicitly for a MemoryReader source)."""
    import MDAnalysis as mda

    u = universe_of(scn)
    with mda.Writer(
        str(path), n_atoms=scn.n_atoms, velocities=True, lengthunit="Angstrom",
        velocityunit="Angstrom/ps", timeunit="ps",
    ) as w:
        _write_frames(u, w, scn.times_ps)
    return path


def write_lammps_dump(scn: Scenario, path: Path, *, units: str, md_timestep: float, steps_per_frame: int) -> Path:
    """LAMMPS text dump ``id type x y z vx vy vz`` in ``real`` (Å/fs) or ``metal`` (Å/ps) units.

    Frame k carries ``ITEM: TIMESTEP`` = k·steps_per_frame; *md_timestep* (fs for real,
    ps for metal) × steps_per_frame must equal the scenario's frame spacing.  Atom types
    are written as 1 (read back as the string ``'1'``).
    """
    per_ps = {"real": 1e3, "metal": 1.0}[units]  # time units per ps (LAMMPS manual, "units")
    expected = scn.timestep_ps * per_ps
    if not np.isclose(md_timestep * steps_per_frame, expected, rtol=1e-12):
        raise ValueError("md_timestep * steps_per_frame must equal the frame spacing")
    first_step = round(scn.times_ps[0] * per_ps / md_timestep)
    lines = []
    for k in range(scn.n_frames):
        lines += [
            "ITEM: TIMESTEP", str(first_step + k * steps_per_frame),
            "ITEM: NUMBER OF ATOMS", str(scn.n_atoms),
            "ITEM: BOX BOUNDS pp pp pp",
            *[f"0.0 {scn.box_A:.6f}"] * 3,
            "ITEM: ATOMS id type x y z vx vy vz",
        ]
        x = scn.positions[k]
        v = scn.velocities[k] / per_ps  # Å per LAMMPS time unit
        for i in range(scn.n_atoms):
            lines.append(
                f"{i + 1} 1 {x[i, 0]:.8f} {x[i, 1]:.8f} {x[i, 2]:.8f} "
                f"{v[i, 0]:.10e} {v[i, 1]:.10e} {v[i, 2]:.10e}"
            )
    Path(path).write_text("\n".join(lines) + "\n")
    return path


def write_lammps_data(scn: Scenario, path: Path) -> Path:
    """LAMMPS data file (``atom_style full``: id molecule type charge x y z) with a Masses section.

    Layout from the LAMMPS manual, "read_data" command; one atom type (1) of the scenario's mass.
    """
    x = scn.positions[0]
    lines = [
        "LAMMPS data file written by tests/synthetic.py", "",
        f"{scn.n_atoms} atoms", "1 atom types", "",
        *[f"0.0 {scn.box_A:.6f} {a}lo {a}hi" for a in "xyz"], "",
        "Masses", "", f"1 {scn.masses[0]:.6f}", "",
        "Atoms # full", "",
        *[f"{i + 1} {scn.resids[i]} 1 0.0 {x[i, 0]:.8f} {x[i, 1]:.8f} {x[i, 2]:.8f}" for i in range(scn.n_atoms)],
    ]
    Path(path).write_text("\n".join(lines) + "\n")
    return path
