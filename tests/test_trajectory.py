"""Library tests of qcorr.reading: options, masses and virtual sites, groups, degrees of freedom, time axis."""

from __future__ import annotations

import dataclasses

import MDAnalysis as mda
import numpy as np
import pytest
import synthetic
from scipy import constants as sc

from qcorr.errors import ConfigError, SamplingError, TrajectoryError
from qcorr.reading import groups as grp
from qcorr.reading import input_files as inp
from qcorr.reading import masses as ms
from qcorr.reading import options as opt
from qcorr.reading import stream as stm
from qcorr.reading import time_axis as ta
from qcorr.reading import universe as uni


def _water_like(masses, names, types=None, resids=None):
    n = len(masses)
    resids = np.asarray(resids if resids is not None else np.arange(n) // 4)
    u = mda.Universe.empty(n, n_residues=int(resids.max()) + 1, atom_resindex=resids, trajectory=True)
    u.add_TopologyAttr("names", names)
    u.add_TopologyAttr("types", types or names)
    u.add_TopologyAttr("masses", masses)
    u.add_TopologyAttr("resids", np.arange(1, int(resids.max()) + 2))
    return u


def test_option_values_and_pairs():
    assert opt.parse_option_value("3") == 3 and isinstance(opt.parse_option_value("3"), int)
    assert opt.parse_option_value("0.5") == 0.5
    assert opt.parse_option_value("True") is True and opt.parse_option_value("no") is False
    assert opt.parse_option_value("full") == "full"
    assert opt.parse_key_values(["a=1", "b = x y"], "--x") == {"a": "1", "b": "x y"}
    with pytest.raises(ConfigError, match="--group expects KEY=VALUE"):
        opt.parse_key_values(["water"], "--group")
    with pytest.raises(ConfigError, match="--mass gives 'O' twice"):
        opt.parse_key_values(["O=16", "O=15.999"], "--mass")


def test_virtual_sites_by_name_are_excluded_with_a_note():
    # TIP4P-style water: the massless site "MW" is dropped; real atoms are kept (common practice)
    u = _water_like([16.0, 1.0, 1.0, 0.0] * 2, ["OW", "HW1", "HW2", "MW"] * 2)
    check = ms.massive_atoms(u)
    np.testing.assert_array_equal(check.indices, [0, 1, 2, 4, 5, 6])
    assert "excluded 2 massless virtual-site atoms" in check.note and "MW" in check.note


def test_zero_mass_that_is_no_virtual_site_is_an_error():
    u = _water_like([16.0, 1.0, 1.0, 0.0], ["OW", "HW1", "HW2", "XQ"])
    with pytest.raises(TrajectoryError, match=r"1 atoms in topology.*atom index 3 name 'XQ'.*--mass TYPE=AMU.*--exclude-massless"):
        ms.massive_atoms(u)
    assert list(ms.massive_atoms(u, exclude_massless=True).indices) == [0, 1, 2]
    u = _water_like([16.0, np.nan, 1.0, 1.0], ["OW", "HW1", "HW2", "HW3"])
    with pytest.raises(TrajectoryError, match="atom index 1"):
        ms.massive_atoms(u, exclude_massless=True)  # NaN is never a virtual site


def test_masses_by_type():
    u = _water_like([0.0, 1.0, 1.0, 0.0], ["OW", "HW1", "HW2", "XQ"], types=["O", "H", "H", "X"])
    ms.apply_masses_by_type(u, {"O": "15.999", "X": 2.5})
    np.testing.assert_allclose(u.atoms.masses, [15.999, 1.0, 1.0, 2.5])
    with pytest.raises(ConfigError, match="no atom has type 'C'"):
        ms.apply_masses_by_type(u, {"C": 12})
    with pytest.raises(ConfigError, match="must be positive"):
        ms.apply_masses_by_type(u, {"O": -1})


def test_groups_and_their_errors():
    u = _water_like([16.0, 1.0, 1.0, 0.0] * 3, ["OW", "HW1", "HW2", "MW"] * 3)
    channels = ms.massive_atoms(u)
    groups = grp.select_groups(u, channels, {"oxygen": "name OW", "water2": "resid 2"})
    assert [g.name for g in groups] == ["total", "oxygen", "water2"]
    assert groups[0].atom_count == 9 and groups[0].molecule_count == 3
    assert groups[1].atom_count == 3 and groups[1].mass == pytest.approx(48.0)
    assert groups[2].atom_count == 3  # the MW of residue 2 is left out
    with pytest.raises(ConfigError, match="'total' is reserved"):
        grp.select_groups(u, channels, {"total": "all"})
    with pytest.raises(ConfigError, match="--group bad=.*cannot parse"):
        grp.select_groups(u, channels, {"bad": "name OW and and"})
    with pytest.raises(ConfigError, match="--group sites='name MW' selects no atom with mass"):
        grp.select_groups(u, channels, {"sites": "name MW"})


def test_constraint_bookkeeping():
    u = _water_like([16.0, 1.0, 1.0] * 4, ["OW", "HW1", "HW2"] * 4, resids=np.arange(12) // 3)
    channels = ms.massive_atoms(u)
    groups = grp.select_groups(u, channels, {"a": "resid 1 2", "b": "resid 3 4"})
    grp.assign_degrees_of_freedom(groups, {}, {"a": "3", "b": 3})
    # rigid water: 3 constraints per molecule (SETTLE, common practice); total = sum of disjoint groups
    assert [g.constraints for g in groups] == [12, 6, 6]
    assert groups[0].degrees_of_freedom == 36 - 12 - 3
    assert groups[1].degrees_of_freedom == pytest.approx(18 - 6 - 1.5)
    overlapping = grp.select_groups(u, channels, {"a": "resid 1 2", "b": "resid 2 3"})
    with pytest.raises(ConfigError, match="--constraints total=N"):
        grp.assign_degrees_of_freedom(overlapping, {"a": 1})
    grp.assign_degrees_of_freedom(overlapping, {"a": 1, "total": 5})
    assert overlapping[0].constraints == 5
    with pytest.raises(ConfigError, match="both --constraints and --constraints-per-molecule"):
        grp.assign_degrees_of_freedom(groups, {"a": 1}, {"a": 1})
    with pytest.raises(ConfigError, match="no group named 'c'"):
        grp.assign_degrees_of_freedom(groups, {"c": 1})
    with pytest.raises(ConfigError, match="leave"):
        grp.assign_degrees_of_freedom(groups, {"a": 30})


def test_centre_of_mass_share_of_a_group_by_monte_carlo():
    # Independent check of 3N_g - 3 M_g/M: sample Maxwell velocities (variance kT/m per
    # component, equipartition), remove the centre-of-mass velocity, average sum_g m (v-V)^2 / kT.
    rng = np.random.default_rng(12345)
    masses = rng.uniform(1.0, 40.0, 12)
    names = [f"A{i}" for i in range(12)]
    u = _water_like(masses, names, resids=np.arange(12) // 3)
    channels = ms.massive_atoms(u)
    groups = grp.select_groups(u, channels, {"light": "resid 1", "rest": "resid 2 3 4"})
    grp.assign_degrees_of_freedom(groups)
    samples = 200_000
    v = rng.normal(size=(samples, 12, 3)) / np.sqrt(masses)[None, :, None]  # kT = 1
    com = np.einsum("i,sik->sk", masses, v) / masses.sum()
    v -= com[:, None, :]
    for g in groups:
        per_sample = np.einsum("i,sik->s", masses * g.members, v**2)
        mean, se = per_sample.mean(), per_sample.std(ddof=1) / np.sqrt(samples)
        assert abs(mean - g.degrees_of_freedom) < 4 * se, (g.name, mean, g.degrees_of_freedom, se)
    assert groups[0].degrees_of_freedom == 33


def test_time_step_from_float32_stamps_far_from_zero(tmp_path):
    # TRR stores time in float32: at 5000 ps the stamps are rounded to ~5e-4 ps, a quarter of
    # the 2 fs spacing; the time step comes from the span and the intervals pass the check
    scn = synthetic.diatomic_oscillators([5e12, 9e12], n_frames=400, timestep_ps=0.002, temperature_K=300,
                                         time_offset_ps=5000.0)
    top = synthetic.write_gro(scn, tmp_path / "d.gro")
    trr = synthetic.write_trr(scn, tmp_path / "d.trr")
    opened = uni.open_trajectory(top, [trr])
    window = ta.frame_window(opened)
    # the span of 399 intervals is known to one float32 spacing at 5000 ps (4.9e-4 ps), so the
    # time step is good to 4.9e-4 / 399 / 0.002 = 6.1e-4 relative (IEEE 754 binary32)
    spacing = float(np.spacing(np.float32(5000.0)))
    assert window.timestep_ps == pytest.approx(0.002, rel=spacing / 399 / 0.002)
    ms.apply_masses_by_type(opened.universe, {"O": 16.0})
    channels = ms.massive_atoms(opened.universe)
    n = sum(1 for _ in stm.stream_velocities(opened, channels, window, 0, window.n_frames))
    assert n == 400
    stepped = ta.frame_window(opened, 10, 210, 4)
    assert stepped.n_frames == 50 and stepped.timestep_ps == pytest.approx(0.008, rel=spacing / 49 / 0.008)
    with pytest.raises(SamplingError, match="holds 1 of its 400 frames"):
        ta.frame_window(opened, 5, 6)


def test_streamed_velocities_are_stored_minus_centre_of_mass(tmp_path):
    scn = synthetic.diatomic_oscillators([5e12], n_frames=20, timestep_ps=0.002, temperature_K=300)
    drift = dataclasses.replace(scn, velocities=scn.velocities + np.array([1.0, -2.0, 0.5]))
    top = synthetic.write_gro(drift, tmp_path / "d.gro")
    trr = synthetic.write_trr(drift, tmp_path / "d.trr")
    opened = uni.open_trajectory(top, [trr])
    ms.apply_masses_by_type(opened.universe, {"O": 16.0})
    channels = ms.massive_atoms(opened.universe)
    window = ta.frame_window(opened)
    stats = stm.FrameStatistics()
    got = np.array(list(stm.stream_velocities(opened, channels, window, 0, 20, statistics=stats)))
    np.testing.assert_allclose(got, scn.velocities, atol=1e-5)  # drift removed exactly (equal masses)
    assert stats.frames == 20
    assert stats.box_volume_sum_A3 / stats.frames == pytest.approx(scn.box_A**3, rel=1e-6)
    assert stats.com_kinetic_sum / stats.frames == pytest.approx(32.0 * (1 + 4 + 0.25), rel=1e-5)  # M |V|^2
    assert type(opened.universe.trajectory).__name__ == "TRRReader"  # streamed, never a MemoryReader


def test_input_file_records(tmp_path):
    import hashlib

    p = tmp_path / "x.bin"
    p.write_bytes(b"qcorr" * 1000)
    (rec,) = inp.describe_files([p])
    assert rec == {"name": "x.bin", "size_bytes": 5000, "sha256": hashlib.sha256(b"qcorr" * 1000).hexdigest()}


def test_lammps_unit_factors_follow_the_lammps_manual():
    # LAMMPS manual, "units" command: real -> time fs, velocity A/fs; metal -> ps, A/ps
    assert uni.LAMMPS_UNIT_STYLES["real"] / sc.pico == pytest.approx(1e-3)
    assert uni.LAMMPS_UNIT_STYLES["metal"] / sc.pico == pytest.approx(1.0)


def test_time_stamps_that_do_not_increase(tmp_path):
    scn = synthetic.diatomic_oscillators([5e12], n_frames=10, timestep_ps=0.002, temperature_K=300)
    flat = dataclasses.replace(scn, times_ps=np.zeros(10))
    opened = uni.open_trajectory(synthetic.write_gro(flat, tmp_path / "d.gro"), [synthetic.write_trr(flat, tmp_path / "d.trr")])
    with pytest.raises(SamplingError, match=r"'.*d\.trr' do not increase.*--reader-option dt=PS"):
        ta.frame_window(opened)


def test_single_precision_stream_equals_double_to_float32_rounding(tmp_path):
    # float32 route: the reader's values minus a float64 centre-of-mass velocity, rounded once
    # to float32 (unit roundoff 2^-24, IEEE 754); oracle: the float64 route on the same file
    scn = synthetic.diatomic_oscillators([5e12], n_frames=20, timestep_ps=0.002, temperature_K=300)
    drift = dataclasses.replace(scn, velocities=scn.velocities + np.array([1.0, -2.0, 0.5]))
    top = synthetic.write_gro(drift, tmp_path / "d.gro")
    trr = synthetic.write_trr(drift, tmp_path / "d.trr")
    opened = uni.open_trajectory(top, [trr])
    ms.apply_masses_by_type(opened.universe, {"O": 16.0})
    channels = ms.massive_atoms(opened.universe)
    window = ta.frame_window(opened)
    runs = {}
    for dtype in (np.float64, np.float32):
        stats = stm.FrameStatistics()
        frames = list(stm.stream_velocities(opened, channels, window, 0, 20, statistics=stats, dtype=dtype))
        assert all(f.dtype == dtype for f in frames)
        assert len({id(f) for f in frames}) == 20  # a new array per sample, never the reader's buffer
        runs[dtype] = (np.array(frames), stats)
    (v64, s64), (v32, s32) = runs[np.float64], runs[np.float32]
    scale = np.abs(v64).max() + 2.5  # largest value before the drift was removed
    np.testing.assert_allclose(v32, v64, rtol=0, atol=2 * 2.0**-24 * scale)
    assert (s32.frames, s32.box_volume_sum_A3) == (s64.frames, s64.box_volume_sum_A3)
    assert s32.com_kinetic_sum == pytest.approx(s64.com_kinetic_sum, rel=1e-12)  # both float64 sums
    with pytest.raises(ConfigError, match="precision"):
        next(stm.stream_velocities(opened, channels, window, 0, 20, dtype=np.int32))


def test_single_precision_stream_names_a_non_finite_atom(tmp_path):
    scn = synthetic.diatomic_oscillators([5e12], n_frames=12, timestep_ps=0.002, temperature_K=300)
    bad = scn.velocities.copy()
    bad[7, 1, 2] = np.nan
    scn = dataclasses.replace(scn, velocities=bad)
    top = synthetic.write_gro(scn, tmp_path / "n.gro")
    trr = synthetic.write_trr(scn, tmp_path / "n.trr")
    opened = uni.open_trajectory(top, [trr])
    ms.apply_masses_by_type(opened.universe, {"O": 16.0})
    channels = ms.massive_atoms(opened.universe)
    window = ta.frame_window(opened)
    with pytest.raises(TrajectoryError, match=r"frame 7.*non-finite velocity.*atom index 1"):
        for _ in stm.stream_velocities(opened, channels, window, 0, 12, dtype=np.float32):
            pass


def test_background_hashing_equals_sha256_and_reports_unreadable_files(tmp_path):
    import hashlib

    # FIPS 180-4 SHA-256 via hashlib over the whole content (several 1 MiB blocks)
    content = np.random.default_rng(3).bytes(3 * (1 << 20) + 12345)
    p = tmp_path / "big.bin"
    p.write_bytes(content)
    (rec,) = inp.start_describing_files([p]).result()
    assert rec == {"name": "big.bin", "size_bytes": len(content), "sha256": hashlib.sha256(content).hexdigest()}
    with pytest.raises(TrajectoryError, match="missing.trr"):
        inp.start_describing_files([p, tmp_path / "missing.trr"]).result()
    running = inp.start_describing_files([p])
    running.cancel()
    with pytest.raises(RuntimeError, match="cancelled"):
        running.result()


@pytest.mark.parametrize("parts", [2, 3, 7])
def test_hashing_in_parts_covers_the_file_once(tmp_path, parts):
    import hashlib

    # frame-block jobs hash equal byte ranges; together they cover the file once, and each
    # part's digest is the FIPS 180-4 SHA-256 (hashlib) of exactly those bytes
    content = np.random.default_rng(parts).bytes(2 * (1 << 20) + 4321)
    p = tmp_path / "big.bin"
    p.write_bytes(content)
    position = 0
    for part in range(parts):
        (rec,) = inp.start_describing_files([p], part, parts).result()
        assert rec["size_bytes"] == len(content) and "sha256" not in rec
        (piece,) = rec["sha256_parts"]
        assert piece["first_byte"] == position
        position = piece["stop_byte"]
        assert piece["sha256"] == hashlib.sha256(content[piece["first_byte"]:position]).hexdigest()
    assert position == len(content)
    with pytest.raises(ConfigError, match="part 4 of 3"):
        inp.byte_range_of_part(10, 3, 3)


@pytest.mark.parametrize("n_atoms", [1, 63, 64, 65, 2001])
def test_blockwise_vector_subtraction_equals_broadcasting(n_atoms):
    # the blocked subtraction used on float32 frames must give numpy's broadcast result exactly
    rng = np.random.default_rng(n_atoms)
    values = rng.standard_normal((n_atoms, 3)).astype(np.float32)
    vector = rng.standard_normal(3).astype(np.float32)
    got = stm._minus_vector(values, vector)
    assert got.dtype == np.float32 and not np.shares_memory(got, values)
    np.testing.assert_array_equal(got, values - vector)


def test_consecutive_frames_read_on_and_report_an_early_end():
    class Reader:  # minimal stand-in for an MDAnalysis reader: seek by index, then next()
        def __init__(self, n):
            self.n, self.at = n, None

        def __getitem__(self, i):
            self.at = i
            return i

        def next(self):
            if self.at + 1 >= self.n:
                raise StopIteration
            self.at += 1
            return self.at

    assert list(stm.consecutive_frames(Reader(10), 3, 7)) == [3, 4, 5, 6]
    assert list(stm.consecutive_frames(Reader(10), 5, 5)) == []
    with pytest.raises(EOFError, match="ends before"):
        list(stm.consecutive_frames(Reader(6), 3, 9))
