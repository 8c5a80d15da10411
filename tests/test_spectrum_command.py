"""``qcorr spectrum`` and ``qcorr combine`` end to end on the analytic scenario of ``tests/synthetic.py``.

Checks: frame blocks joined by ``qcorr combine`` reproduce the single job; the file is
byte-reproducible and follows the contract (CF ``units``/``long_name``); finite
differences corrected by sinc²(πνΔt) reproduce the stored-velocity spectrum (exact for
sampled sinusoids, A. V. Oppenheim, R. W. Schafer, *Discrete-Time Signal Processing*,
3rd ed. 2010, first-difference frequency response); a centre-of-mass drift is removed
and reported; diagnostics fire where they should; ``--help`` gives units.
"""

from __future__ import annotations

import dataclasses
import json

import numpy as np
import pytest
import synthetic
import xarray as xr
from conftest import OSC_BINS, OSC_MASS_U, OSC_SEGMENT_PS, OSC_TEMPERATURE_K
from scipy import constants as sc

from qcorr.spectra.spectrum_file import read_spectrum


def _args(files, trajectory=None, *extra):
    return [
        "spectrum", "--topology", files["topology"], "--trajectory", trajectory or files["trr"],
        "--temperature", OSC_TEMPERATURE_K, "--segment-ps", OSC_SEGMENT_PS,
        "--mass", f"O={OSC_MASS_U}", "--progress", "never",
        "--group", "first=resid 1", "--group", "rest=resid 2 3 4", *extra,
    ]


@pytest.fixture(scope="module")
def single_job(oscillator_files, tmp_path_factory):
    """Spectrum of the whole window in one job (computed once for the module)."""
    from qcorr.cli import main

    out = tmp_path_factory.mktemp("single") / "single.nc"
    assert main([str(a) for a in _args(oscillator_files, None, "--output", out)]) == 0
    return out


def test_file_follows_contract_and_is_byte_reproducible(single_job, oscillator_files, tmp_path, run_qcorr):
    ds = read_spectrum(single_job)
    for name, var in ds.variables.items():
        assert "long_name" in var.attrs, name
        if var.dtype.kind in "fiu":
            assert "units" in var.attrs, name
    assert list(ds["group"].values) == ["total", "first", "rest"]
    # 1 cm-1 = 100 c Hz (CODATA via scipy)
    np.testing.assert_allclose(ds["frequency"].values, ds["wavenumber"].values * sc.c * 100 / 1e12, rtol=1e-12)
    inputs = json.loads(ds.attrs["input_files"])
    assert [f["name"] for f in inputs] == ["dimers.gro", "dimers.trr"]
    assert all(len(f["sha256"]) == 64 for f in inputs)
    checks = json.loads(ds.attrs["diagnostics"])
    assert {c["check"] for c in checks} == {"aliasing", "resolution", "temperature", "centre_of_mass_drift", "sum_rule",
                                          "time_axis", "position_noise", "kinetic_energy_series"}
    # same command again -> byte-identical file (no time stamps stored)
    again = tmp_path / "single.nc"
    code, _, err = run_qcorr(*_args(oscillator_files, None, "--output", again))
    assert code == 0, err
    ds2 = xr.open_dataset(again)
    for attr in ("command_line", "history"):  # history quotes the command line
        ds2.attrs[attr] = ds.attrs[attr]
    xr.testing.assert_identical(ds2.load(), ds)
    # the command lines differ only in the output path; with the same path the bytes are equal
    second = tmp_path / "second"
    second.mkdir()
    run_qcorr(*_args(oscillator_files, None, "--output", second / "single.nc"))
    first_bytes = again.read_bytes()
    ds3 = xr.open_dataset(second / "single.nc")
    assert ds3.attrs["command_line"] != ds2.attrs["command_line"]
    again.unlink()
    run_qcorr(*_args(oscillator_files, None, "--output", again))
    assert again.read_bytes() == first_bytes


def test_blocks_combine_to_the_single_job(single_job, oscillator_files, tmp_path, run_qcorr):
    blocks = []
    for i in (3, 1, 2):  # any order
        out = tmp_path / f"block{i}.nc"
        code, _, err = run_qcorr(*_args(oscillator_files, None, "--block", f"{i}-of-3", "--output", out))
        assert code == 0, err
        blocks.append(out)
    part = read_spectrum(blocks[1])
    assert part.attrs["block_index"] == 1 and part.sizes["segment"] == 3  # 9 segments / 3 blocks
    combined = tmp_path / "combined.nc"
    code, _, err = run_qcorr("combine", *blocks, "--output", combined)
    assert code == 0, err
    a, b = read_spectrum(single_job), read_spectrum(combined)
    for name in a.data_vars:
        if a[name].dtype.kind == "f":
            xr.testing.assert_allclose(a[name], b[name], rtol=1e-12, atol=0)
        else:
            xr.testing.assert_equal(a[name], b[name])
    for attr in ("frames_used", "statistics_frames", "segment_count_window", "timestep_ps"):
        assert a.attrs[attr] == b.attrs[attr], attr
    assert b.attrs["mean_box_volume_A3"] == pytest.approx(a.attrs["mean_box_volume_A3"], rel=1e-12)
    assert b.attrs["diagnostics"] == a.attrs["diagnostics"]
    # each block hashed a third of every input; the combined record lists the three parts,
    # each the SHA-256 (FIPS 180-4, hashlib) of its byte range of the file
    import hashlib

    for single_rec, joined in zip(json.loads(a.attrs["input_files"]), json.loads(b.attrs["input_files"])):
        assert joined["name"] == single_rec["name"] and joined["size_bytes"] == single_rec["size_bytes"]
        content = oscillator_files["trr" if joined["name"].endswith(".trr") else "topology"].read_bytes()
        assert [(p["first_byte"], p["stop_byte"]) for p in joined["sha256_parts"]] == [
            (k * len(content) // 3, (k + 1) * len(content) // 3) for k in range(3)]
        for p in joined["sha256_parts"]:
            assert p["sha256"] == hashlib.sha256(content[p["first_byte"]:p["stop_byte"]]).hexdigest()
        assert hashlib.sha256(content).hexdigest() == single_rec["sha256"]
        assert joined["sha256_sample"] == single_rec["sha256"]  # a small file is sampled whole

    # missing block
    code, _, err = run_qcorr("combine", *blocks[:2], "--output", tmp_path / "x.nc")
    assert code != 0 and "missing [2]" in err and not (tmp_path / "x.nc").exists()
    # repeated block
    code, _, err = run_qcorr("combine", blocks[0], blocks[0], blocks[1], "--output", tmp_path / "x.nc")
    assert code != 0 and "repeated [3]" in err
    # a block of another run (different temperature) is refused
    other = tmp_path / "other2.nc"
    args = _args(oscillator_files, None, "--block", "2-of-3", "--output", other)
    args[args.index("--temperature") + 1] = 310
    assert run_qcorr(*args)[0] == 0
    code, _, err = run_qcorr("combine", blocks[0], blocks[1], other, "--output", tmp_path / "x.nc")
    assert code != 0 and "temperature_K" in err and not (tmp_path / "x.nc").exists()


def test_finite_differences_reproduce_stored_velocities(single_job, oscillator_files, tmp_path, run_qcorr):
    # forward differences of a sampled sinusoid have exactly the amplitude factor sinc(pi nu dt);
    # after division by sinc^2 the spectrum equals the stored-velocity one up to the float32
    # rounding of TRR positions (1e-6 A on ~0.01 A steps -> ~1e-4 relative)
    out = tmp_path / "fd.nc"
    code, _, err = run_qcorr(*_args(oscillator_files, None, "--velocities-from", "positions", "--output", out))
    assert code == 0, err
    fd, st = read_spectrum(out), read_spectrum(single_job)
    assert fd.attrs["velocity_source"] == "finite_difference"
    assert fd.sizes["segment"] == st.sizes["segment"] - 1  # n frames give n-1 differences
    np.testing.assert_allclose(fd["raw_integral"], st["raw_integral"], rtol=1e-3)
    # at each oscillator's own bin the untapered DFT has no leakage, so the corrected value is
    # exact there; the Hann side bins m±1 carry the line at frequency nu_m but are divided by
    # sinc^2 at nu_(m±1), an expected (first-order cancelling) leakage error of the method
    for k, m in enumerate(OSC_BINS):
        group = "first" if k == 0 else "rest"
        np.testing.assert_allclose(fd["vdos"].sel(group=group)[m], st["vdos"].sel(group=group)[m], rtol=1e-3)


def test_periodic_boundaries_do_not_break_finite_differences(oscillator_scenario, tmp_path, run_qcorr):
    # the same motion with positions wrapped into the box (atoms cross the faces) must give
    # the same finite-difference spectrum: the minimum image of each step is used
    scn = oscillator_scenario
    shifted = scn.positions + np.array([scn.box_A - 3.0, 0.0, 0.0]) - scn.positions[0, 0]  # atom 0 near a face
    wrapped = dataclasses.replace(scn, positions=np.mod(shifted, scn.box_A))
    unwrapped = dataclasses.replace(scn, positions=shifted)
    assert np.any(np.abs(np.diff(wrapped.positions, axis=0)) > scn.box_A / 2)  # crossings exist
    results = []
    for name, s in (("wrapped", wrapped), ("unwrapped", unwrapped)):
        top = synthetic.write_gro(s, tmp_path / f"{name}.gro")
        trr = synthetic.write_trr(s, tmp_path / f"{name}.trr")
        out = tmp_path / f"{name}.nc"
        code, _, err = run_qcorr("spectrum", "--topology", top, "--trajectory", trr, "--temperature", 300,
                                 "--segment-ps", OSC_SEGMENT_PS, "--mass", f"O={OSC_MASS_U}",
                                 "--velocities-from", "positions", "--output", out)
        assert code == 0, err
        results.append(read_spectrum(out))
    np.testing.assert_allclose(results[0]["vdos"], results[1]["vdos"], rtol=1e-3, atol=1e-6)


def test_centre_of_mass_drift_removed_and_reported(oscillator_scenario, single_job, tmp_path, run_qcorr):
    # a uniform drift of 20 A/ps added to every atom (M V^2 = 51200 u A2 ps-2, 68 times 3kT at 300 K): the spectrum must not change (the
    # centre-of-mass velocity is removed per frame) and the drift diagnostic must fire
    scn = oscillator_scenario
    drift = dataclasses.replace(scn, velocities=scn.velocities + np.array([20.0, 0.0, 0.0]))
    top = synthetic.write_gro(drift, tmp_path / "dimers.gro")
    trr = synthetic.write_trr(drift, tmp_path / "dimers.trr")
    out = tmp_path / "drift.nc"
    code, _, err = run_qcorr(*_args({"topology": top, "trr": trr}, None, "--output", out))
    assert code == 0, err
    assert "qcorr: warning: centre_of_mass_drift" in err
    a, b = read_spectrum(single_job), read_spectrum(out)
    np.testing.assert_allclose(b["vdos"], a["vdos"], atol=1e-5 * float(a["vdos"].max()))
    status = {c["check"]: c["status"] for c in json.loads(b.attrs["diagnostics"])}
    assert status["centre_of_mass_drift"] == "warning" and status["temperature"] == "ok"


def test_aliasing_warning_near_nyquist(tmp_path, run_qcorr):
    # an oscillator at bin 98 of 100 (98 % of Nyquist) puts its whole weight in the top 5 % band
    scn = synthetic.diatomic_oscillators(np.array([30, 98]) * 2.5e12, n_frames=600, timestep_ps=0.002, temperature_K=300)
    top = synthetic.write_gro(scn, tmp_path / "d.gro")
    trr = synthetic.write_trr(scn, tmp_path / "d.trr")
    code, _, err = run_qcorr("spectrum", "--topology", top, "--trajectory", trr, "--temperature", 300,
                             "--segment-ps", OSC_SEGMENT_PS, "--mass", f"O={OSC_MASS_U}", "--output", tmp_path / "a.nc")
    assert code == 0, err
    assert "qcorr: warning: aliasing" in err


def test_constraints_enter_the_degrees_of_freedom(oscillator_files, tmp_path, run_qcorr):
    # one constrained bond per molecule: first has 1, rest 3, total the sum 4 (disjoint groups)
    out = tmp_path / "c.nc"
    code, _, err = run_qcorr(*_args(oscillator_files, None, "--constraints-per-molecule", "first=1",
                                    "--constraints-per-molecule", "rest=1", "--output", out))
    assert code == 0, err
    ds = read_spectrum(out)
    np.testing.assert_array_equal(ds["constraint_count"].values, [4, 1, 3])
    n, m = 8, len(OSC_BINS)
    np.testing.assert_allclose(ds["degrees_of_freedom"].values, [3 * n - 4 - 3, 6 - 1 - 3 / m, 18 - 3 - 9 / m])
    np.testing.assert_allclose(ds["vdos"].integrate("wavenumber"), ds["degrees_of_freedom"], rtol=1e-9)


def test_help_gives_every_option_with_its_unit(capsys):
    from qcorr.cli import build_parser

    parser = build_parser()
    with pytest.raises(SystemExit):
        parser.parse_args(["spectrum", "--help"])
    text = " ".join(capsys.readouterr().out.split())
    for fragment in ("--temperature K", "kelvin", "--segment-ps PS", "segment length in ps", "--mass TYPE=AMU",
                     "u (g/mol)", "--overlap FRACTION", "--lammps-units", "A/fs", "--block I-of-N",
                     "--threads N", "--progress", "--velocities-from", "--reader-option KEY=VALUE", "--step N"):
        assert fragment in text, fragment


def test_progress_bar_only_when_asked_or_on_a_terminal(oscillator_files, tmp_path, run_qcorr):
    args = _args(oscillator_files, None, "--output", tmp_path / "p.nc")
    args.remove("--progress")
    args.remove("never")
    code, _, err = run_qcorr(*args, "--progress", "always")
    assert code == 0 and "frames:" in err and "frame/s" in err
    (tmp_path / "p.nc").unlink()
    code, _, err = run_qcorr(*args)  # auto: stderr is captured here, not a terminal
    assert code == 0 and "frame/s" not in err  # "frames:" also begins a kinetic-energy check's line


def test_several_trajectory_files_read_as_one(single_job, oscillator_scenario, oscillator_files, tmp_path, run_qcorr):
    # the same 1000 frames split over two TRR files must give the single-file spectrum exactly
    scn = oscillator_scenario
    cut = 437
    parts = []
    for name, sl in (("part1", slice(0, cut)), ("part2", slice(cut, None))):
        piece = dataclasses.replace(scn, positions=scn.positions[sl], velocities=scn.velocities[sl], times_ps=scn.times_ps[sl])
        parts.append(synthetic.write_trr(piece, tmp_path / f"{name}.trr"))
    out = tmp_path / "chain.nc"
    args = _args(oscillator_files, None, "--output", out)
    i = args.index("--trajectory")
    args[i + 1 : i + 2] = parts
    code, _, err = run_qcorr(*args)
    assert code == 0, err
    a, b = read_spectrum(single_job), read_spectrum(out)
    xr.testing.assert_allclose(a["vdos"], b["vdos"], rtol=1e-12)
    assert [f["name"] for f in json.loads(b.attrs["input_files"])] == ["dimers.gro", "part1.trr", "part2.trr"]
    # a gap at the junction is named with the frame inside its own file
    gap = dataclasses.replace(scn, positions=scn.positions[cut + 1:], velocities=scn.velocities[cut + 1:], times_ps=scn.times_ps[cut + 1:])
    args[i + 2] = synthetic.write_trr(gap, tmp_path / "part2_gap.trr")
    args[args.index("--output") + 1] = tmp_path / "gap.nc"
    code, _, err = run_qcorr(*args)
    assert code != 0 and f"frame {cut} (frame 0 of '{tmp_path / 'part2_gap.trr'}')" in err
    assert not (tmp_path / "gap.nc").exists()


def test_blocks_with_finite_differences(oscillator_files, tmp_path, run_qcorr):
    # positions mode reads one frame more than it has velocity samples; blocks must still join up
    single = tmp_path / "fd.nc"
    assert run_qcorr(*_args(oscillator_files, None, "--velocities-from", "positions", "--output", single))[0] == 0
    blocks = []
    for i in (1, 2):
        blocks.append(tmp_path / f"fd{i}.nc")
        code, _, err = run_qcorr(*_args(oscillator_files, None, "--velocities-from", "positions",
                                        "--block", f"{i}-of-2", "--output", blocks[-1]))
        assert code == 0, err
    joined = tmp_path / "joined.nc"
    assert run_qcorr("combine", *blocks, "--output", joined)[0] == 0
    a, b = read_spectrum(single), read_spectrum(joined)
    xr.testing.assert_allclose(a["vdos_segments"], b["vdos_segments"], rtol=1e-12)
    assert a.attrs["frames_used"] == b.attrs["frames_used"] and a.attrs["statistics_frames"] == b.attrs["statistics_frames"]


def test_help_imports_only_the_command_asked_for():
    # `qcorr --help` and `qcorr spectrum --help` must not import the numerical stack (xarray,
    # pandas, MDAnalysis, scipy.optimize); checked in a fresh interpreter through sys.modules
    import subprocess
    import sys

    probe = (
        "import sys\n"
        "from qcorr.cli import main\n"
        "for argv in (['--help'], ['spectrum', '--help']):\n"
        "    try:\n"
        "        main(argv)\n"
        "    except SystemExit:\n"
        "        pass\n"
        "heavy = [m for m in ('xarray', 'pandas', 'MDAnalysis', 'scipy.optimize', 'qcorr.thermo.twophase',\n"
        "                     'qcorr.thermo.harmonic') if m in sys.modules]\n"
        "print('HEAVY', heavy)\n"
    )
    done = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True)
    assert "HEAVY []" in done.stdout, done.stdout
    # every command is listed with its own help line, and spectrum with its options
    for name in ("spectrum", "combine", "properties", "liquid", "merge", "plot"):
        assert name in done.stdout
    assert "--segment-ps PS" in done.stdout


def test_command_summaries_equal_the_modules():
    # the help lines read from the sources without importing them equal the modules' own
    import importlib

    from qcorr.cli import COMMAND_MODULES, build_parser
    from qcorr.cli.parsing import CommandSummary

    for name in COMMAND_MODULES:
        module = importlib.import_module(f"qcorr.cli.{name}_command")
        summary = CommandSummary(name)
        assert (summary.NAME, summary.HELP) == (module.NAME, module.HELP)
        assert summary.DESCRIPTION == getattr(module, "DESCRIPTION", module.HELP)
    # a parser built for one command parses that command's options like the full parser
    argv = ["spectrum", "--topology", "t.gro", "--trajectory", "a.trr", "--temperature", "300",
            "--output", "o.nc", "--segment-ps", "2"]
    lazy, full = build_parser(argv).parse_args(argv), build_parser().parse_args(argv)
    assert vars(lazy) == vars(full)


def test_threads_split_the_window_over_processes(single_job, oscillator_files, tmp_path, run_qcorr,
                                                 monkeypatch):
    # --threads T on a long window: T spawned worker processes compute sub-blocks that are
    # joined like 'qcorr combine' joins blocks; the oracle is the one-process run.  The
    # size threshold is lowered so that the small analytic scenario takes this path.
    from qcorr.cli import spectrum_command

    monkeypatch.setattr(spectrum_command, "PROCESS_MIN_ATOM_FRAMES", 0)
    out = tmp_path / "threads.nc"
    code, _, err = run_qcorr(*_args(oscillator_files, None, "--threads", "2", "--output", out))
    assert code == 0, err
    a, b = read_spectrum(single_job), read_spectrum(out)
    assert b.attrs["worker_processes"] == 2 and a.attrs["worker_processes"] == 1
    for name in a.data_vars:
        if a[name].dtype.kind == "f":
            xr.testing.assert_allclose(a[name], b[name], rtol=1e-12, atol=0)
        else:
            xr.testing.assert_equal(a[name], b[name])
    for attr in ("frames_used", "statistics_frames", "block_index", "block_count", "input_files",
                 "diagnostics"):
        assert a.attrs[attr] == b.attrs[attr], attr
    # block 2 of 3 by 2 processes (sub-blocks 3 and 4 of 6) equals block 2 of 3 by one process
    one, two = tmp_path / "b2_one.nc", tmp_path / "b2_two.nc"
    for path, threads in ((one, "1"), (two, "2")):
        code, _, err = run_qcorr(*_args(oscillator_files, None, "--block", "2-of-3", "--threads", threads,
                                        "--output", path))
        assert code == 0, err
    c, d = read_spectrum(one), read_spectrum(two)
    assert d.attrs["worker_processes"] == 2 and d.attrs["block_index"] == 2 and d.attrs["block_count"] == 3
    np.testing.assert_array_equal(c["segment"].values, d["segment"].values)
    xr.testing.assert_allclose(c["vdos"], d["vdos"], rtol=1e-12, atol=0)
    assert c.attrs["input_files"] == d.attrs["input_files"]  # the parent hashed part 2 of 3
    # a bad input fails in the parent, before any worker starts: one line, no file
    bad = tmp_path / "bad.nc"
    code, _, err = run_qcorr(*_args(oscillator_files, None, "--threads", "2", "--group", "none=resname XYZ",
                                    "--output", bad))
    assert code != 0 and "XYZ" in err and not bad.exists()


def test_threads_report_a_bad_frame_found_by_any_process(oscillator_scenario, oscillator_files, tmp_path,
                                                         run_qcorr, monkeypatch):
    # a NaN velocity at frame 900 lies in the last sub-block: whichever process meets it,
    # the command prints the one line naming the frame and atom and writes nothing
    from qcorr.cli import spectrum_command

    monkeypatch.setattr(spectrum_command, "PROCESS_MIN_ATOM_FRAMES", 0)
    velocities = oscillator_scenario.velocities.copy()
    velocities[900, 5, 0] = np.nan
    trr = synthetic.write_trr(dataclasses.replace(oscillator_scenario, velocities=velocities),
                              tmp_path / "late_nan.trr")
    out = tmp_path / "late_nan.nc"
    code, _, err = run_qcorr(*_args(oscillator_files, trr, "--threads", "2", "--output", out))
    errors = [line for line in err.splitlines() if line.startswith("qcorr: error:")]
    assert code != 0 and len(errors) == 1, err
    assert "frame 900" in errors[0] and "late_nan.trr" in errors[0] and "atom index 5" in errors[0]
    assert not out.exists()
