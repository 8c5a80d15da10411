"""Every bad input gives one clear ``qcorr: error:`` line, a non-zero exit status and no output file.

Inputs are variants of the analytic scenario of ``tests/synthetic.py`` (our own data).
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
import synthetic
from conftest import OSC_MASS_U, OSC_SEGMENT_PS


@pytest.fixture(scope="module")
def bad_files(oscillator_scenario, tmp_path_factory):
    """One directory of broken inputs, written once for the module."""
    scn = oscillator_scenario
    d = tmp_path_factory.mktemp("bad_inputs")
    files = {"top": synthetic.write_gro(scn, d / "dimers.gro"), "good": synthetic.write_trr(scn, d / "good.trr")}
    files["no_velocities"] = synthetic.write_trr(scn, d / "positions_only.trr", with_velocities=False)
    unknown = dataclasses.replace(scn, names=["QA", "QB"] * (scn.n_atoms // 2))
    files["unknown_top"] = synthetic.write_gro(unknown, d / "unknown_elements.gro")
    jitter = scn.times_ps.copy()
    jitter[300] += 0.5 * scn.timestep_ps
    files["jitter"] = synthetic.write_trr(dataclasses.replace(scn, times_ps=jitter), d / "jitter.trr")
    keep = np.delete(np.arange(scn.n_frames), 400)
    gap = dataclasses.replace(scn, times_ps=scn.times_ps[keep], positions=scn.positions[keep], velocities=scn.velocities[keep])
    files["gap"] = synthetic.write_trr(gap, d / "gap.trr")
    nan_v = scn.velocities.copy()
    nan_v[700, 3, 1] = np.nan
    files["nan_velocity"] = synthetic.write_trr(dataclasses.replace(scn, velocities=nan_v), d / "nan_velocity.trr")
    inf_x = scn.positions.copy()
    inf_x[650, 5, 0] = np.inf
    files["inf_position"] = synthetic.write_trr(dataclasses.replace(scn, positions=inf_x), d / "inf_position.trr")
    raw = files["good"].read_bytes()
    (d / "truncated.trr").write_bytes(raw[: len(raw) // 2 + 37])
    files["truncated"] = d / "truncated.trr"
    rng = np.random.default_rng(7)
    (d / "random_bytes.trr").write_bytes(rng.integers(0, 256, 5000, dtype=np.uint8).tobytes())
    files["corrupt"] = d / "random_bytes.trr"
    (d / "broken.gro").write_text("not a topology\n12\n")
    files["bad_top"] = d / "broken.gro"
    files["dump"] = synthetic.write_lammps_dump(scn, d / "dimers.lammpstrj", units="real", md_timestep=1.0, steps_per_frame=2)
    text = files["dump"].read_text()
    (d / "cut.lammpstrj").write_text(text[: len(text) // 2])
    files["cut_dump"] = d / "cut.lammpstrj"
    return files


def _base(f, traj_key="good", top_key="top"):
    return ["--topology", f[top_key], "--trajectory", f[traj_key], "--temperature", "300",
            "--segment-ps", OSC_SEGMENT_PS, "--mass", f"O={OSC_MASS_U}", "--progress", "never"]


CASES = {
    # name: (builder of extra args, regex fragments the one-line message must contain)
    "no_velocities": (lambda f: _base(f, "no_velocities"), ["frame 0", "positions_only.trr", "has no velocities", "--velocities-from positions"]),
    "empty_selection": (lambda f: _base(f) + ["--group", "ions=name NA"], ["--group ions=", "selects no atom"]),
    "zero_masses": (lambda f: ["--topology", f["unknown_top"], "--trajectory", f["good"], "--temperature", "300", "--segment-ps", OSC_SEGMENT_PS],
                    ["unknown_elements.gro", "zero, negative or undefined mass", "--mass TYPE=AMU"]),
    "irregular_time_stamps": (lambda f: _base(f, "jitter"), ["frame 300", "jitter.trr", "0.003 ps instead of the regular 0.002"]),
    "missing_frame": (lambda f: _base(f, "gap"), ["frame 400", "gap.trr", "0.004 ps instead of the regular 0.002"]),
    "nan_velocity": (lambda f: _base(f, "nan_velocity"), ["frame 700", "nan_velocity.trr", "atom index 3", "NaN or Inf"]),
    "inf_position": (lambda f: _base(f, "inf_position") + ["--velocities-from", "positions"], ["frame 650", "atom index 5", "position"]),
    "truncated_file": (lambda f: _base(f, "truncated"), ["truncated.trr", "incomplete frame"]),
    "corrupt_file": (lambda f: _base(f, "corrupt"), ["random_bytes.trr", "cannot read"]),
    "truncated_lammps_dump": (lambda f: ["--topology", f["dump"], "--trajectory", f["cut_dump"], "--temperature", "300", "--lammps-units", "real",
                                         "--reader-option", "dt=1", "--mass", "1=16", "--segment-ps", OSC_SEGMENT_PS], ["cut.lammpstrj", "incomplete frame"]),
    "temperature_zero": (lambda f: _base(f)[:-6] + ["--temperature", "0", "--segment-ps", OSC_SEGMENT_PS], ["--temperature 0", "positive"]),
    "temperature_negative": (lambda f: [*_base(f)[:5], "-5", *_base(f)[6:]], ["--temperature -5", "positive"]),
    "fewer_frames_than_a_segment": (lambda f: _base(f) + ["--segment-ps", "10"], ["fewer frames than one segment", "needs 5000"]),
    "unreadable_topology": (lambda f: _base(f, top_key="bad_top"), ["broken.gro", "cannot read"]),
    "lammps_dump_without_units": (lambda f: ["--topology", f["dump"], "--trajectory", f["dump"], "--temperature", "300"], ["dimers.lammpstrj", "--lammps-units"]),
    "lammps_dump_without_timestep": (lambda f: ["--topology", f["dump"], "--trajectory", f["dump"], "--temperature", "300", "--lammps-units", "metal"],
                                     ["--reader-option dt=", "in ps for units metal"]),
    "unknown_mass_type": (lambda f: _base(f) + ["--mass", "ZZ=12"], ["--mass ZZ", "no atom has type"]),
    "ambiguous_total_constraints": (lambda f: _base(f) + ["--group", "a=resid 1 2", "--group", "b=resid 2 3", "--constraints", "a=1"], ["--constraints total=N"]),
    "bad_block": (lambda f: _base(f) + ["--block", "3-of-2"], ["--block", "between 1 and N"]),
    "negative_frame_spacing": (lambda f: _base(f) + ["--frame-spacing", "-0.002"], ["--frame-spacing -0.002", "positive"]),
    "precision_without_positions": (lambda f: _base(f) + ["--position-precision", "0.01"],
                                    ["--position-precision", "only with --velocities-from positions"]),
    "reader_dt_over_stamps": (lambda f: _base(f) + ["--reader-option", "dt=1.0"],
                              ["--reader-option dt=1", "good.trr", "0.002 ps apart"]),
}


@pytest.mark.parametrize("case", sorted(CASES))
def test_bad_input_one_line_nonzero_no_output(case, bad_files, tmp_path, run_qcorr):
    build, fragments = CASES[case]
    out = tmp_path / "out" / "spectrum.nc"
    argv = [str(a) for a in build(bad_files)]
    code, _, stderr = run_qcorr("spectrum", *argv, "--output", out)
    assert code != 0
    errors = [line for line in stderr.splitlines() if line.startswith("qcorr: error:")]
    assert len(errors) == 1, stderr
    for fragment in fragments:
        assert fragment in errors[0], (fragment, errors[0])
    assert "Traceback" not in stderr
    assert not out.exists()
    # nothing half-written beside it either (atomic write: temp file + rename)
    assert not out.parent.exists() or list(out.parent.iterdir()) == []


def test_output_may_not_overwrite_an_input(bad_files, run_qcorr):
    before = bad_files["good"].read_bytes()
    code, _, stderr = run_qcorr("spectrum", *_base(bad_files), "--output", bad_files["good"])
    assert code != 0 and "is also an input file" in stderr
    assert bad_files["good"].read_bytes() == before


def test_unwritable_output_directory_fails_before_reading(bad_files, tmp_path, run_qcorr, monkeypatch):
    """The output directory is probed (a file made and removed) before any input is read.

    Permission bits do not bind root, so the refusal is simulated here (POSIX open(2):
    EACCES); tests/test_robustness.py makes real read-only and full file systems."""
    import errno

    import MDAnalysis

    import qcorr.safe_write

    locked = tmp_path / "locked"
    locked.mkdir()
    real_mkstemp = qcorr.safe_write.tempfile.mkstemp

    def refuse(*args, dir=None, **kwargs):
        if str(dir) == str(locked):
            raise PermissionError(errno.EACCES, "Permission denied")
        return real_mkstemp(*args, dir=dir, **kwargs)

    def never(*args, **kwargs):
        raise AssertionError("an input was read before the output was checked")

    monkeypatch.setattr(qcorr.safe_write.tempfile, "mkstemp", refuse)
    monkeypatch.setattr(MDAnalysis, "Universe", never)
    code, _, stderr = run_qcorr("spectrum", *_base(bad_files), "--output", locked / "sub" / "s.nc")
    assert code != 0, stderr
    assert f"cannot write --output '{locked}/sub/s.nc': Permission denied (EACCES)" in stderr
    assert list(locked.iterdir()) == []
