"""Cost of the molecular decomposition (qcorr.spectra.molecular) per frame, relative to the atomic
spectrum estimator on the same frames.  Prints ratios; not a test (no timed assertions).

Scenario of our own making: N rigid three-site molecules (water-like masses and geometry)
with random orientations and Maxwell-Boltzmann velocities in a cubic box.

    python benchmarks/molecular_decomposition.py [N_MOLECULES] [N_FRAMES]
"""

from __future__ import annotations

import sys
import time

import numpy as np
from scipy.spatial.transform import Rotation

from qcorr.spectra.estimator import SegmentAccumulator
from qcorr.spectra.molecular import MolecularDecomposer, build_layout
from qcorr.spectra.segments import SpectrumSettings


def main(n_mol: int = 5000, n_frames: int = 200) -> None:
    rng = np.random.default_rng(1)
    body = np.array([[0.0, 0.0, 0.0], [0.9572, 0.0, 0.0], [-0.2400, 0.9266, 0.0]])
    masses = np.tile([15.999, 1.008, 1.008], n_mol)
    box_edge = (n_mol * 30.0) ** (1 / 3)
    box = np.array([box_edge] * 3 + [90.0] * 3)
    rots = Rotation.random(n_mol, random_state=rng)
    rel = np.concatenate([rots[i].apply(body) for i in range(n_mol)])
    centres = np.repeat(rng.uniform(0, box_edge, (n_mol, 3)), 3, axis=0)
    pos = np.mod(centres + rel, box_edge)
    ids = np.repeat(np.arange(n_mol), 3)
    groups = np.ones((1, masses.size), bool)
    layout = build_layout(masses, ids, groups, pos, box)
    dec = MolecularDecomposer(layout)
    settings = SpectrumSettings(0.004, 100, 0.5, "hann")
    atoms = SegmentAccumulator(settings, masses, groups)
    mols = SegmentAccumulator(settings, dec.channel_weights(True), dec.channel_groups(True))
    vel = rng.normal(size=(n_frames, masses.size, 3)) * np.sqrt(2.494 * 100 / masses)[None, :, None]
    t0 = time.perf_counter()
    for f in range(n_frames):
        atoms.add_frame(vel[f])
    t_atoms = time.perf_counter() - t0
    t0 = time.perf_counter()
    for f in range(n_frames):
        values = dec.frame(pos, vel[f], box, include_vibration=True)
    t_decompose = time.perf_counter() - t0
    t0 = time.perf_counter()
    for f in range(n_frames):
        mols.add_frame(values)
    t_mol_spectrum = time.perf_counter() - t0
    print(f"{n_mol} molecules, {n_frames} frames")
    print(f"atomic estimator        {1e3 * t_atoms / n_frames:8.2f} ms/frame (1.00)")
    print(f"decomposition           {1e3 * t_decompose / n_frames:8.2f} ms/frame "
          f"({t_decompose / t_atoms:.2f} x atomic)")
    print(f"molecular estimator     {1e3 * t_mol_spectrum / n_frames:8.2f} ms/frame "
          f"({t_mol_spectrum / t_atoms:.2f} x atomic)")


if __name__ == "__main__":
    main(*(int(a) for a in sys.argv[1:3]))
