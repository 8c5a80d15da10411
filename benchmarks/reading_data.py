"""Real-engine trajectories for the reading benchmarks, made once with OpenMM and cached.

:func:`water_trajectory` runs flexible TIP3P water with the recipe of
``scripts/make_validation_data.py`` (216 molecules, 648 atoms, frames 2 fs apart),
with a longer production (default 20 ps: 10,001 frames, 157 MB of TRR), into
``$QCORR_VALIDATION_DIR/bench_water_<ps>ps`` (default ``~/.cache/qcorr-validation``).
The run is reused while its settings digest matches; nothing is written into the
repository.  :func:`positions_only_xtc` writes the same frames' positions as an XTC file
beside it (MDAnalysis' XTC writer, GROMACS' default precision 1000/nm).
"""

from __future__ import annotations

import dataclasses
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent / "scripts"))

import make_validation_data as engines  # noqa: E402  (scripts/ is not a package)


def water_spec(production_ps: float = 20.0):
    """The validation set's flexible-water recipe with *production_ps* of production."""
    base = engines.VALIDATION_SYSTEMS["water_flexible_298K"]
    return dataclasses.replace(base, name=f"bench_water_{production_ps:g}ps", production_ps=production_ps)


def water_trajectory(production_ps: float = 20.0) -> tuple[Path, Path]:
    """(topology.pdb, trajectory.trr) of the cached OpenMM water run, made if missing."""
    spec = water_spec(production_ps)
    directory = engines.default_output_dir() / spec.name
    if not engines.is_current(spec, directory):
        print(f"making {spec.name} with OpenMM in {directory} (a few minutes, once)", file=sys.stderr)
        engines.make_system(spec, directory)
    return directory / engines.TOPOLOGY_NAME, directory / engines.TRAJECTORY_NAME


def positions_only_xtc(topology: Path, trajectory: Path) -> Path:
    """An XTC file of *trajectory*'s positions beside it (written once)."""
    import MDAnalysis as mda

    target = trajectory.with_name("positions.xtc")
    if target.is_file() and target.stat().st_mtime >= trajectory.stat().st_mtime:
        return target
    u = mda.Universe(str(topology), str(trajectory))
    partial = target.with_name(".positions.xtc.partial.xtc")
    with mda.Writer(str(partial), u.atoms.n_atoms) as writer:
        for _ in u.trajectory:
            writer.write(u.atoms)
    partial.replace(target)
    return target


if __name__ == "__main__":
    top, traj = water_trajectory(float(sys.argv[1]) if len(sys.argv) > 1 else 20.0)
    print(top, traj, positions_only_xtc(top, traj))
