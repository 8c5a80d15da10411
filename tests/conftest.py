"""Shared pytest fixtures (keep this file small; add a docstring to each fixture).

* ``run_qcorr`` — run the ``qcorr`` console command in-process; returns (exit code, stdout, stderr).
* ``oscillator_scenario`` / ``oscillator_files`` — the antiphase-diatomic scenario of
  ``tests/synthetic.py`` (analytic spectrum) and its GRO topology + TRR trajectory,
  written once per session.
"""

from __future__ import annotations

import sys
import warnings
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).parent))

import synthetic

#: scenario constants shared by the command, format and bad-input tests
OSC_TIMESTEP_PS = 0.002
OSC_SEGMENT_FRAMES = 200  # --segment-ps 0.4
OSC_SEGMENT_PS = OSC_TIMESTEP_PS * OSC_SEGMENT_FRAMES
OSC_BINS = (10, 20, 35, 50)  # frequencies on the bins m/(L dt) of the segment grid
OSC_TEMPERATURE_K = 300.0
OSC_MASS_U = 15.999  # oxygen, standard atomic weight (IUPAC 2021, conventional value)
OSC_FRAMES = 1000


@pytest.fixture
def run_qcorr(capsys):
    """Run ``qcorr`` with a list of arguments; return (exit code, stdout, stderr)."""
    from qcorr.cli import main

    def _run(*argv):
        capsys.readouterr()
        saved = warnings.showwarning
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("always")
                code = main([str(a) for a in argv])
        finally:
            warnings.showwarning = saved
        out, err = capsys.readouterr()
        return code, out, err

    return _run


@pytest.fixture(scope="session")
def oscillator_scenario():
    """Four antiphase diatomics at bins 10, 20, 35, 50 of a 0.4 ps segment, 1000 frames of 2 fs.

    Kinetic scale (3N − 3)/(3N) makes the kinetic temperature over 3N − 3 degrees of
    freedom exactly 300 K (see ``synthetic.diatomic_oscillators``).
    """
    resolution_Hz = 1.0 / (OSC_SEGMENT_PS * 1e-12)
    n_atoms = 2 * len(OSC_BINS)
    return synthetic.diatomic_oscillators(
        np.array(OSC_BINS) * resolution_Hz,
        n_frames=OSC_FRAMES,
        timestep_ps=OSC_TIMESTEP_PS,
        temperature_K=OSC_TEMPERATURE_K,
        mass_u=OSC_MASS_U,
        kinetic_scale=(3 * n_atoms - 3) / (3 * n_atoms),
    )


@pytest.fixture(scope="session")
def oscillator_files(oscillator_scenario, tmp_path_factory):
    """GRO topology and TRR trajectory (with velocities) of ``oscillator_scenario``."""
    d = tmp_path_factory.mktemp("oscillators")
    return {
        "topology": synthetic.write_gro(oscillator_scenario, d / "dimers.gro"),
        "trr": synthetic.write_trr(oscillator_scenario, d / "dimers.trr"),
        "dir": d,
    }
