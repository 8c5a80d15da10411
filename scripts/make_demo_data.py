#!/usr/bin/env python
"""Make (or check) the bundled demo trajectories in ``resources/demo/``.

The demo is a small scenario of our own: a copper crystal (ASE, EMT) well below and near
its Debye temperature, and a small box of flexible water (OpenMM).  It uses the engines and
recipes of ``scripts/make_validation_data.py`` with smaller systems, coarser frame spacing
and shorter runs, so that everything committed stays under about 7 MB.

=========================  ======  =======  ===========  ==========  =============
system                     atoms   frames   frame (fs)   length(ps)  segment (ps)
=========================  ======  =======  ===========  ==========  =============
``copper_100K``            108     401      20           8           2
``copper_300K``            108     401      20           8           2
``water_flexible_298K``    192     1001     3            3           1
=========================  ======  =======  ===========  ==========  =============

Usage::

    python scripts/make_demo_data.py            # regenerate resources/demo/ in place
    python scripts/make_demo_data.py --check    # regenerate into a temporary directory and
                                                # compare with the committed files

What reproducible means here
----------------------------
Every run is deterministic: all random numbers come from fixed seeds, OpenMM runs on its
CPU platform with one thread and ``DeterministicForces``, ASE's EMT is plain NumPy.  With the same versions of the
engines and NumPy on the same kind of processor (the same SIMD code paths of NumPy and
its BLAS, recorded as ``cpu_features``: two x86_64 machines with and without AVX-512
sum in different orders), regeneration is therefore *bitwise* identical, and
``--check`` demands that (``identical``).  Any other build changes the last
bits of some force, and molecular dynamics is chaotic (Lyapunov instability): such
differences grow until the trajectories are unrelated after a few ps, while their
statistics stay the same.  When the recorded versions differ from the installed ones,
(or a record names no CPU code paths), ``--check`` therefore demands only statistical agreement: same atoms, masses, frames, time
stamps and box, and mean kinetic temperatures that agree within four standard errors of
their difference, estimated from the canonical fluctuation sqrt(2/dof) and the thermostat's
coupling time (``statistically consistent``).  Exit status 0 when the check passes, 1
when it fails.
"""

from __future__ import annotations

import argparse
import json
import math
import shutil
import sys
import tempfile
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

import make_validation_data as engines  # noqa: E402

from qcorr.errors import ConfigError, QcorrError  # noqa: E402

DEMO_DIR = Path(__file__).resolve().parent.parent / "resources" / "demo"

DEMO_SYSTEMS: dict[str, engines.Spec] = {
    s.name: s
    for s in (
        engines.CrystalSpec(
            "copper_100K", temperature_K=100.0, cells_per_side=3, seed=2001,
            steps_per_frame=4, equilibration_ps=2.0, production_ps=8.0, segment_ps=2.0,
        ),
        engines.CrystalSpec(
            "copper_300K", temperature_K=300.0, cells_per_side=3, seed=2002,
            steps_per_frame=4, equilibration_ps=2.0, production_ps=8.0, segment_ps=2.0,
        ),
        engines.WaterSpec(
            "water_flexible_298K", temperature_K=298.15, molecules_per_side=4, cutoff_nm=0.6,
            seed=2003, steps_per_frame=6, equilibration_ps=5.0, production_ps=3.0, segment_ps=1.0,
            energy_file=True,
        ),
    )
}

#: Versions that must match for a bitwise-identical regeneration to be expected.
VERSION_KEYS = ("engine_version", "numpy", "machine", "cpu_features")


def _versions(settings: dict) -> dict[str, str | None]:
    """The build a trajectory was made with; ``cpu_features`` is None in records made
    before it was recorded (then a bitwise match cannot be expected)."""
    return {
        "engine_version": settings["engine"]["version"],
        "numpy": settings["software"]["numpy"],
        "machine": settings["software"]["machine"],
        "cpu_features": settings["software"].get("cpu_features"),
    }


def _read_frames(directory: Path):
    """Times (ps), boxes (Å), positions (Å) and velocities (Å/ps) of a system's trajectory."""
    import MDAnalysis as mda

    # Read copies: MDAnalysis leaves a frame-offset cache beside a TRR it opens, and the
    # committed demo directory is not to be touched.
    with tempfile.TemporaryDirectory(prefix="qcorr-demo-read-") as tmp:
        for file_name in (engines.TOPOLOGY_NAME, engines.TRAJECTORY_NAME):
            shutil.copyfile(directory / file_name, Path(tmp) / file_name)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            u = mda.Universe(str(Path(tmp) / engines.TOPOLOGY_NAME), str(Path(tmp) / engines.TRAJECTORY_NAME))
        times, boxes, positions, velocities = [], [], [], []
        for ts in u.trajectory:
            times.append(ts.time)
            boxes.append(ts.dimensions.copy())
            positions.append(ts.positions.copy())
            velocities.append(ts.velocities.copy())
        names = list(u.atoms.names)
        masses = u.atoms.masses.copy()
        u.trajectory.close()
    return names, masses, np.array(times), np.array(boxes), np.array(positions), np.array(velocities)


def compare_system(name: str, committed: Path, regenerated: Path) -> tuple[bool, str]:
    """Compare a committed demo system with a fresh regeneration; return (passed, message)."""
    old_settings = json.loads((committed / engines.SETTINGS_NAME).read_text())
    new_settings = json.loads((regenerated / engines.SETTINGS_NAME).read_text())
    old = _read_frames(committed)
    new = _read_frames(regenerated)
    if old[0] != new[0] or not np.array_equal(old[1], new[1]):
        return False, f"{name}: atom names or masses differ"
    if old[2].shape != new[2].shape or not np.allclose(old[2], new[2], rtol=0, atol=1e-6):
        return False, f"{name}: frame count or time stamps differ ({len(old[2])} vs {len(new[2])} frames)"
    if not np.allclose(old[3], new[3], rtol=1e-6):
        return False, f"{name}: box dimensions differ"
    same_versions = _versions(old_settings) == _versions(new_settings) and None not in _versions(old_settings).values()
    identical = np.array_equal(old[4], new[4]) and np.array_equal(old[5], new[5])
    if identical:
        return True, f"{name}: identical ({len(old[2])} frames)"
    deviation = np.max(np.abs(old[5] - new[5]), axis=(1, 2))
    first = int(np.argmax(deviation > 1e-3)) if np.any(deviation > 1e-3) else None
    where = f"velocities first differ by > 1e-3 Å/ps at frame {first}" if first is not None else "differences below 1e-3 Å/ps"
    if same_versions:
        return False, f"{name}: not identical although engine, NumPy, machine and CPU code paths match the recorded ones ({where})"
    # Different build: statistics only.  The canonical relative fluctuation of the kinetic
    # temperature is sqrt(2/dof); a run of length t with a global thermostat of coupling
    # time tau holds at least t/(2 tau) independent samples; two runs, four standard errors.
    spec = DEMO_SYSTEMS[name]
    tau = spec.production_coupling_ps if spec.kind == "crystal" else 1.0 / spec.production_collision_per_ps
    samples = max(1.0, spec.production_ps / (2 * tau))
    dof = old_settings["state"]["degrees_of_freedom"]
    tolerance = 4 * math.sqrt(2) * math.sqrt(2 / dof) / math.sqrt(samples)
    a = old_settings["observed"]["kinetic_temperature_K"]["mean"]
    b = new_settings["observed"]["kinetic_temperature_K"]["mean"]
    if abs(a / b - 1) > tolerance:
        return False, (
            f"{name}: statistically different: mean kinetic temperature {a:.2f} K vs {b:.2f} K "
            f"(tolerance {100 * tolerance:.1f} %)"
        )
    return True, (
        f"{name}: statistically consistent (different build: {_versions(old_settings)} vs "
        f"{_versions(new_settings)}; {where})"
    )


def check(specs: list[engines.Spec], demo_dir: Path) -> bool:
    """Regenerate *specs* into a temporary directory and compare them with *demo_dir*."""
    ok = True
    with tempfile.TemporaryDirectory(prefix="qcorr-demo-check-") as tmp:
        engines.make_systems(specs, Path(tmp), force=True)
        for spec in specs:
            committed = demo_dir / spec.name
            if not (committed / engines.SETTINGS_NAME).is_file():
                print(f"{spec.name}: missing from {demo_dir}; run scripts/make_demo_data.py", file=sys.stderr)
                ok = False
                continue
            passed, message = compare_system(spec.name, committed, Path(tmp) / spec.name)
            print(message)
            ok = ok and passed
    return ok


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Make or check the bundled demo trajectories.")
    parser.add_argument("--output-dir", type=Path, default=DEMO_DIR, help=f"where the demo lives (default {DEMO_DIR})")
    parser.add_argument("--systems", nargs="+", default=None, metavar="NAME",
                        help=f"systems (default: all of {', '.join(DEMO_SYSTEMS)})")
    parser.add_argument("--check", action="store_true",
                        help="regenerate into a temporary directory and compare with --output-dir; change nothing")
    args = parser.parse_args(argv)
    try:
        specs = engines.select_specs(args.systems, DEMO_SYSTEMS)
        if args.check:
            return 0 if check(specs, args.output_dir) else 1
        if args.output_dir.exists() and not args.output_dir.is_dir():
            raise ConfigError(f"--output-dir {args.output_dir} exists and is not a directory; choose another path")
        engines.make_systems(specs, args.output_dir, force=True)
        for spec in specs:
            # Offsets files MDAnalysis may have left beside the trajectory are not part of the demo.
            for stray in (args.output_dir / spec.name).glob(".*_offsets.*"):
                stray.unlink()
    except QcorrError as err:
        print(f"make_demo_data: error: {err}", file=sys.stderr)
        return 2
    return 0


if __name__ == "__main__":
    sys.exit(main())
