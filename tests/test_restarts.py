"""Restarted runs in several files (issue 11, item 3).

An engine that continues from a checkpoint writes the checkpoint's frame again at the
start of its new file (GROMACS ``mdrun -noappend``, for example).  Here the 1000 frames of
the analytic diatomics (``tests/synthetic.py``) are written as two TRR files that share
their boundary frame(s), by MDAnalysis' writer.  Reference: the single file of the same
frames.  The repeated frames must be left out and listed, and the spectrum must equal the
single file's — exactly in the serial run (the same frames in the same order), and to
1e-12 of each variable's largest value when frame blocks (``--block`` + ``qcorr combine``)
or parts of one run are joined.  Overlapping frames that differ, and files given out of
order, are errors.
"""

from __future__ import annotations

import dataclasses
import json
import warnings

import MDAnalysis as mda
import numpy as np
import pytest
import synthetic
import xarray as xr
from conftest import OSC_MASS_U, OSC_SEGMENT_PS

from qcorr.errors import TrajectoryError
from qcorr.spectra.analysis import VibrationalSpectrum
from qcorr.spectra.spectrum_file import read_spectrum

CUT = 437


def _piece(scn, sl):
    return dataclasses.replace(scn, positions=scn.positions[sl], velocities=scn.velocities[sl], times_ps=scn.times_ps[sl])


@pytest.fixture(scope="module")
def restarted(oscillator_scenario, tmp_path_factory):
    """Files: a restart pair sharing frame CUT, one sharing 3 frames, one whose shared frame differs."""
    scn = oscillator_scenario
    d = tmp_path_factory.mktemp("restarts")
    first = synthetic.write_trr(_piece(scn, slice(0, CUT + 1)), d / "part1.trr")
    files = {
        "first": first,
        "second": synthetic.write_trr(_piece(scn, slice(CUT, None)), d / "part2.trr"),
        "second_3": synthetic.write_trr(_piece(scn, slice(CUT - 2, None)), d / "part2_overlap3.trr"),
    }
    moved = _piece(scn, slice(CUT, None))
    positions = moved.positions.copy()
    positions[0, 5, 1] += 0.01  # 0.01 A on one atom of the shared frame: a rerun, not a restart
    files["differs"] = synthetic.write_trr(dataclasses.replace(moved, positions=positions), d / "part2_rerun.trr")
    return files


def _args(files, trajectories, out, *extra):
    return ["spectrum", "--topology", files["topology"], "--trajectory", *trajectories, "--temperature", 300,
            "--segment-ps", OSC_SEGMENT_PS, "--mass", f"O={OSC_MASS_U}", "--progress", "never",
            "--group", "first=resid 1", "--output", out, *extra]


def _same(a: xr.Dataset, b: xr.Dataset, rtol: float) -> None:
    for name in a.data_vars:
        x, y = a[name].values, b[name].values
        if x.dtype.kind == "f":
            np.testing.assert_allclose(y, x, rtol=rtol, atol=rtol * float(np.max(np.abs(x))), err_msg=name)
        else:
            np.testing.assert_array_equal(y, x, err_msg=name)
    for attr in ("frame_start", "frame_stop", "frames_used", "statistics_frames", "timestep_ps"):
        assert a.attrs[attr] == b.attrs[attr], attr


@pytest.mark.parametrize("source", ["stored", "positions"])
@pytest.mark.parametrize("second, dropped", [("second", [CUT]), ("second_3", [CUT - 2, CUT - 1, CUT])])
def test_repeated_boundary_frames_are_left_out_and_listed(source, second, dropped, oscillator_files, restarted,
                                                          tmp_path, run_qcorr):
    single, joined = tmp_path / "single.nc", tmp_path / "joined.nc"
    extra = ("--velocities-from", source)
    assert run_qcorr(*_args(oscillator_files, [oscillator_files["trr"]], single, *extra))[0] == 0
    code, _, err = run_qcorr(*_args(oscillator_files, [restarted["first"], restarted[second]], joined, *extra))
    assert code == 0, err
    a, b = read_spectrum(single), read_spectrum(joined)
    _same(a, b, rtol=0.0)  # the same frames in the same order: identical
    records = json.loads(b.attrs["repeated_frames_dropped"])
    assert [r["frame_in_file"] for r in records] == list(range(len(dropped)))
    assert all(r["file"] == restarted[second].name for r in records)
    assert [r["time_ps"] for r in records] == pytest.approx([0.002 * f for f in dropped], abs=1e-6)
    assert json.loads(a.attrs["repeated_frames_dropped"]) == []
    checks = {c["check"]: c["message"] for c in json.loads(b.attrs["diagnostics"])}
    assert "repeated restart frames left out: frame 0 of 'part2" in checks["time_axis"]


def test_blocks_and_parts_of_a_restarted_run_equal_the_single_file(oscillator_files, restarted, tmp_path, run_qcorr):
    single = tmp_path / "single.nc"
    assert run_qcorr(*_args(oscillator_files, [oscillator_files["trr"]], single))[0] == 0
    pair = [restarted["first"], restarted["second"]]
    blocks = []
    for i in (1, 2, 3):
        blocks.append(tmp_path / f"block{i}.nc")
        code, _, err = run_qcorr(*_args(oscillator_files, pair, blocks[-1], "--block", f"{i}-of-3"))
        assert code == 0, err
    combined = tmp_path / "combined.nc"
    code, _, err = run_qcorr("combine", *blocks, "--output", combined)
    assert code == 0, err
    _same(read_spectrum(single), read_spectrum(combined), rtol=1e-12)
    # parts of one run through the API (segments straddle the parts; the dropped frame inside part 2)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        u = mda.Universe(str(oscillator_files["topology"]), [str(p) for p in pair])
        u.add_TopologyAttr("masses", np.full(u.atoms.n_atoms, OSC_MASS_U))
        parts = VibrationalSpectrum(u, 300.0, groups={"first": "resid 1"}, segment_ps=OSC_SEGMENT_PS)
        result = parts.run(n_parts=4).results.spectrum
    _same(read_spectrum(single), result, rtol=1e-12)
    assert parts.times == pytest.approx(np.arange(1000) * 0.002, abs=1e-6)


def test_overlapping_frames_that_differ_or_files_out_of_order_are_errors(oscillator_files, restarted, tmp_path,
                                                                         run_qcorr):
    out = tmp_path / "s.nc"
    code, _, err = run_qcorr(*_args(oscillator_files, [restarted["first"], restarted["differs"]], out))
    errors = [line for line in err.splitlines() if line.startswith("qcorr: error:")]
    assert code != 0 and len(errors) == 1 and not out.exists()
    for fragment in ("frame 0 of", "part2_rerun.trr", f"frame {CUT} of", "part1.trr", "different positions",
                     "atom index 5", "t = 0.874 ps"):
        assert fragment in errors[0], (fragment, errors[0])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        u = mda.Universe(str(oscillator_files["topology"]), [str(restarted["second"]), str(restarted["first"])])
    with pytest.raises(TrajectoryError, match="comes before the first frame of .*in the order of their times"):
        VibrationalSpectrum(u, 300.0, masses_by_type={"OX": OSC_MASS_U})
