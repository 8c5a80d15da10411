"""Tests of the property table (qcorr.outputs.table): CSV + JSON sidecar, atomic writing, merging.

Expected values here are the inputs themselves (round trips) and SHA-256 digests
computed independently with hashlib (FIPS 180-4).
"""

from __future__ import annotations

import hashlib
import json
import math

import pandas as pd
import pytest

from qcorr.errors import ConfigError
from qcorr.outputs import summary, table


def _rows(system: str = "a") -> list[table.TableRow]:
    return [
        table.TableRow(system=system, group="total", method="harmonic", property="heat_capacity",
                       temperature_K=298.15, basis="per_mole_molecules", unit="J mol-1 K-1",
                       classical=24.943, quantum=23.368123456789012, correction=-1.575,
                       classical_se=0.001, quantum_se=0.001, correction_se=1e-4,
                       classical_source="harmonic_model"),
        table.TableRow(system=system, group="total", method="harmonic", property="entropy",
                       temperature_K=298.15, basis="per_mole_molecules", unit="J mol-1 K-1",
                       correction=0.8, correction_se=0.01,
                       note="absolute harmonic entropy refused: diffusing group; use 'qcorr liquid'"),
    ]


def _write(tmp_path, name="a", system="a"):
    path = tmp_path / f"{name}.csv"
    frame = table.rows_to_frame(_rows(system))
    table.write_table(frame, path, {"cautions": ["harmonic approximation"], "options": {"x": 1}})
    return path, frame


def test_columns_follow_the_contract() -> None:
    assert table.TABLE_COLUMNS == (
        "system", "group", "method", "property", "temperature_K", "basis", "unit", "classical",
        "quantum", "correction", "classical_se", "quantum_se", "correction_se",
        "classical_source", "note", "reference", "reference_se", "reference_source", "deviation",
        "deviation_se",
    )
    frame = table.rows_to_frame(_rows())
    assert tuple(frame.columns) == table.TABLE_COLUMNS
    assert math.isnan(frame.loc[1, "quantum"])
    assert "corrected" in table.METHODS


def test_tables_written_before_the_reference_columns_still_read_and_merge(tmp_path) -> None:
    """A table with the 15 columns of earlier versions (issue 13 appended five) is read with
    empty reference columns and merges with a current table."""
    path, frame = _write(tmp_path, "new", "sys_new")
    old = tmp_path / "old.csv"
    legacy = frame[list(table.LEGACY_TABLE_COLUMNS)].assign(system="sys_old")
    old_text = legacy.to_csv(index=False, na_rep="", lineterminator="\n")
    old.write_text(old_text)
    table.sidecar_path(old).write_text(json.dumps({
        "qcorr_file_kind": "property_table", "csv_rows": len(legacy),
        "csv_sha256": hashlib.sha256(old_text.encode()).hexdigest()}))
    back = table.read_table(old)
    assert tuple(back.columns) == table.TABLE_COLUMNS
    assert back["reference"].isna().all() and (back["reference_source"] == "").all()
    merged = table.merge_tables([path, old])
    assert list(merged["system"].unique()) == ["sys_new", "sys_old"]
    in_memory = table.merge_tables([frame, legacy])
    assert tuple(in_memory.columns) == table.TABLE_COLUMNS


def test_write_read_round_trip_exact(tmp_path) -> None:
    """Floats survive the CSV exactly (shortest repr); empty cells come back as NaN."""
    path, frame = _write(tmp_path)
    back = table.read_table(path)
    provenance = back.attrs
    pd.testing.assert_frame_equal(back, frame, check_exact=True)
    assert back.loc[0, "quantum"] == 23.368123456789012
    assert provenance["qcorr_file_kind"] == "property_table"
    assert provenance["columns"]["classical_source"]
    assert "qcorr" in provenance["versions"] and provenance["options"] == {"x": 1}
    text = path.read_text()
    assert ",,," in text.splitlines()[2]  # empty cells, not "nan"
    assert "nan" not in text.lower().replace("nanosecond", "")


def test_file_record_sha256(tmp_path) -> None:
    """SHA-256 as hashlib computes it (FIPS 180-4)."""
    p = tmp_path / "x.bin"
    p.write_bytes(b"qcorr" * 1000)
    rec = table.file_record(p)
    assert rec["sha256"] == hashlib.sha256(b"qcorr" * 1000).hexdigest()
    assert rec["size_bytes"] == 5000


def test_write_is_all_or_nothing(tmp_path) -> None:
    """A failure while writing leaves neither file, and an existing table untouched."""
    path, _ = _write(tmp_path)
    before_csv, before_json = path.read_bytes(), table.sidecar_path(path).read_bytes()
    frame = table.rows_to_frame(_rows())
    with pytest.raises(TypeError):
        table.write_table(frame, path, {"bad": object()})  # not JSON serialisable
    assert path.read_bytes() == before_csv
    assert table.sidecar_path(path).read_bytes() == before_json
    fresh = tmp_path / "fresh.csv"
    with pytest.raises(ValueError):
        table.write_table(frame, fresh, {"bad": float("nan")})  # NaN is not valid JSON
    assert not fresh.exists() and not table.sidecar_path(fresh).exists()
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".part")]


def test_output_must_not_overwrite_input(tmp_path) -> None:
    spectrum = tmp_path / "run.nc"
    spectrum.write_bytes(b"x")
    with pytest.raises(ConfigError, match="--output.*would overwrite the input"):
        table.check_output_path(spectrum, [spectrum])
    json_input = tmp_path / "t.json"
    with pytest.raises(ConfigError, match="would overwrite"):
        table.check_output_path(tmp_path / "t.csv", [json_input])
    with pytest.raises(ConfigError, match=r"must not end in \.json"):
        table.check_output_path(tmp_path / "t.json", [])


def test_merge_concatenates_and_keeps_provenance(tmp_path) -> None:
    a, fa = _write(tmp_path, "a", "sys_a")
    b, fb = _write(tmp_path, "b", "sys_b")
    merged = table.merge_tables([a, b])
    prov = merged.attrs
    assert len(merged) == len(fa) + len(fb)
    assert list(merged["system"].unique()) == ["sys_a", "sys_b"]
    assert [s["table"]["sha256"] for s in prov["merged_from"]] == [
        hashlib.sha256(a.read_bytes()).hexdigest(), hashlib.sha256(b.read_bytes()).hexdigest()
    ]
    assert prov["cautions"] == ["harmonic approximation"]


def test_merge_refuses_mismatched_columns(tmp_path) -> None:
    a, _ = _write(tmp_path, "a", "sys_a")
    other = tmp_path / "other.csv"
    pd.DataFrame({"system": ["x"], "value": [1.0]}).to_csv(other, index=False)
    table.sidecar_path(other).write_text(json.dumps({"qcorr_file_kind": "property_table"}))
    with pytest.raises(ConfigError) as info:
        table.merge_tables([a, other])
    assert "other.csv" in str(info.value) and "columns" in str(info.value)


def test_merge_refuses_missing_sidecar_and_duplicates(tmp_path) -> None:
    a, _ = _write(tmp_path, "a", "same")
    b, _ = _write(tmp_path, "b", "same")
    with pytest.raises(ConfigError, match=r"b\.csv.*repeats the row.*--system"):
        table.merge_tables([a, b])
    table.sidecar_path(b).unlink()
    with pytest.raises(ConfigError, match=r"b\.csv.*no JSON sidecar"):
        table.merge_tables([a, b])


def test_format_table_shows_errors_and_one_basis() -> None:
    frame = table.rows_to_frame(_rows())
    text = summary.format_table(frame, "per_mole_molecules")
    # PDG rounding: an error of 0.001 keeps two digits (0.0010), the value as many places
    assert "23.3681 ± 0.0010" in text
    assert "heat_capacity" in text and "entropy" in text
    assert summary.format_table(frame, "per_system") == "(no rows)"


def test_failure_after_csv_written_leaves_nothing(tmp_path, monkeypatch) -> None:
    """The CSV temp file is complete but the sidecar write fails (ENOSPC, POSIX write(2)):
    one OutputError naming the sidecar, and neither file appears, nor a temporary file."""
    import errno

    import qcorr.safe_write
    from qcorr.errors import OutputError

    target = tmp_path / "t.csv"
    real_write = qcorr.safe_write._write_all

    def broken(path, data):
        if ".t.json." in path.name:
            raise OSError(errno.ENOSPC, "No space left on device")
        real_write(path, data)

    monkeypatch.setattr(qcorr.safe_write, "_write_all", broken)
    with pytest.raises(OutputError, match=r"cannot write '.*t\.json': No space left on device \(ENOSPC\)"):
        table.write_table(table.rows_to_frame(_rows()), target, {})
    monkeypatch.undo()
    assert not target.exists() and not table.sidecar_path(target).exists()
    assert list(tmp_path.iterdir()) == []


def test_format_table_marks_refused_cells() -> None:
    frame = table.rows_to_frame(_rows())
    text = summary.format_table(frame)
    entropy_line = next(line for line in text.splitlines() if "entropy" in line)
    assert "refused (see CSV note)" in entropy_line and "0.800 ± 0.010" in entropy_line


def test_attrs_are_the_sidecar_both_ways(tmp_path) -> None:
    """A table in memory carries its provenance in attrs: write_table writes them to the
    sidecar (after the header it sets itself), read_table gives them back."""
    frame = table.rows_to_frame(_rows())
    frame.attrs = {"options": {"system": "a"}, "cautions": ["harmonic approximation"],
                   "table": "stale.csv"}
    path = table.write_table(frame, tmp_path / "t.csv")
    side = json.loads(table.sidecar_path(path).read_text())
    assert list(side)[:4] == ["qcorr_file_kind", "table", "columns", "versions"]
    assert side["table"] == "t.csv"  # this write's name, not the one in attrs
    assert side["options"] == {"system": "a"} and side["cautions"] == ["harmonic approximation"]
    back = table.read_table(path)
    assert back.attrs == side
    pd.testing.assert_frame_equal(back, frame, check_exact=True)


def test_merge_accepts_tables_in_memory(tmp_path) -> None:
    """Files and DataFrames merge alike; an in-memory table is named by its position."""
    a, fa = _write(tmp_path, "a", "sys_a")
    fb = table.rows_to_frame(_rows("sys_b"))
    fb.attrs = {"cautions": ["harmonic approximation", "two-phase model"]}
    merged = table.merge_tables([a, fb])
    assert list(merged["system"]) == ["sys_a", "sys_a", "sys_b", "sys_b"]
    assert merged.attrs["merged_from"][1]["table"] == {"name": "table 2 (in memory)"}
    assert merged.attrs["merged_from"][0]["table"]["sha256"] == hashlib.sha256(a.read_bytes()).hexdigest()
    assert merged.attrs["cautions"] == ["harmonic approximation", "two-phase model"]
    with pytest.raises(ConfigError, match=r"table 2 \(in memory\) repeats the row"):
        table.merge_tables([fa, fa])
    with pytest.raises(ConfigError, match=r"table 1 \(in memory\) has columns"):
        table.merge_tables([fa.drop(columns=["note"])])
