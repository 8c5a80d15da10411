"""Tables with machine-readable units, rounding noise shown as zero, and summaries for
people rounded to their standard errors (issue 15); tables cut short are refused (issue 11).

Outside references: the rounding rule of the Particle Data Group (R. L. Workman et al.,
Prog. Theor. Exp. Phys. 2022, 083C01, Introduction §5.3, with its own examples); the
Frictionless Table Schema specification, checked with the ``frictionless`` validator;
UDUNITS-2 unit strings, parsed with the CF unit registry of ``cf_xarray``.
"""

from __future__ import annotations

import json
import re

import numpy as np
import pytest

from qcorr import units
from qcorr.cli import main as qcorr_main
from qcorr.errors import ConfigError
from qcorr.outputs import summary, table


def _row(**changes) -> table.TableRow:
    base = {"system": "crystal", "group": "total", "method": "harmonic",
            "property": "heat_capacity", "temperature_K": 100.0, "basis": "per_mole_atoms",
            "unit": units.MOLAR_HEAT_CAPACITY, "classical": 24.94338, "quantum": 16.24961,
            "correction": -8.69377, "classical_se": 2.3e-15, "quantum_se": 0.0312,
            "correction_se": 0.0312, "classical_source": "harmonic_model"}
    base.update(changes)
    return table.TableRow(**base)


# ---------------------------------------------------------------- rounding to the error
@pytest.mark.parametrize(("value", "error", "expected"), [
    # PDG §5.3: leading digits 100-354 keep two significant digits of the error
    (0.827, 0.119, "0.83 ± 0.12"),
    (24.3712, 0.0234, "24.371 ± 0.023"),
    # 355-949: one digit
    (0.827, 0.367, "0.8 ± 0.4"),
    (1.2345, 0.56, "1.2 ± 0.6"),
    # 950-999: rounded up to 1000, two digits
    (0.827, 0.0997, "0.83 ± 0.10"),
    # large and small magnitudes go to a common power of ten
    (3.14159e-21, 2.5e-23, "(3.142 ± 0.025)e-21"),
    (123456789.0, 1234.0, "(1.234568 ± 0.000012)e8"),
    # no standard error: six significant digits; an exact value (error 0): no ± part
    (16.2496123, float("nan"), "16.2496"),
    (24.94338, 0.0, "24.9434"),
])
def test_round_to_error_follows_the_particle_data_group_rule(value, error, expected):
    assert summary.round_to_error(value, error) == expected


# ---------------------------------------------------------------- the CSV
def test_rounding_noise_is_written_as_zero_and_real_values_are_kept(tmp_path):
    rows = [_row(),
            # a whole-system row: values of ~1e-21 J/K are real, not noise
            _row(basis="per_system", unit=units.SYSTEM_HEAT_CAPACITY, classical=4.47e-21,
                 quantum=2.91e-21, correction=-1.56e-21, classical_se=4.1e-37,
                 quantum_se=9.2e-24, correction_se=9.2e-24)]
    frame = table.rows_to_frame(rows)
    assert frame.loc[0, "classical_se"] == 0.0 and frame.loc[1, "classical_se"] == 0.0
    assert frame.loc[0, "quantum_se"] == 0.0312
    assert frame.loc[1, "quantum"] == 2.91e-21 and frame.loc[1, "quantum_se"] == 9.2e-24
    path = tmp_path / "t.csv"
    table.write_table(frame, path, {})
    text = path.read_text()
    assert "2.3e-15" not in text and "4.1e-37" not in text and "2.91e-21" in text


def test_units_are_udunits_strings_that_cf_tools_parse():
    """Every unit qcorr writes parses in the CF unit registry (pint via cf_xarray), with the
    dimensions its name says."""
    from cf_xarray.units import units as registry

    def dims(unit):
        return registry.Quantity(1, "" if unit == "1" else unit).dimensionality

    assert dims(units.MOLAR_HEAT_CAPACITY) == dims("J/(mol K)")
    assert dims(units.MOLAR_ENERGY) == dims("kJ/mol")
    assert dims(units.SYSTEM_HEAT_CAPACITY) == dims("J/K")
    assert dims(units.AREA) == dims("m^2")
    assert dims(units.WAVENUMBER) == dims("1/m")
    assert dims(units.MASS_VELOCITY_SQUARED) == dims("J/mol")
    for unit in units.ALL_UNITS:
        dims(unit)
    assert registry.Quantity(1, units.AREA).to("m^2").magnitude == pytest.approx(1e-20)


def test_schema_beside_the_table_validates_it(tmp_path):
    """The Table Schema written beside the CSV is valid and the CSV passes it (the
    frictionless validator); a row with an unknown unit fails it."""
    from frictionless import Resource, Schema

    path = tmp_path / "t.csv"
    table.write_table(table.rows_to_frame([_row(), _row(property="entropy")]), path, {})
    schema_file = table.schema_path(path)
    assert schema_file.name == "t.schema.json"
    descriptor = json.loads(schema_file.read_text())
    fields = {f["name"]: f for f in descriptor["fields"]}
    assert fields["temperature_K"]["unit"] == "K"
    assert set(fields["unit"]["constraints"]["enum"]) == set(table.TABLE_UNITS)
    schema = Schema.from_descriptor(descriptor)  # raises if it is not a Table Schema
    report = Resource(path=path.name, basepath=str(tmp_path), schema=schema).validate()
    assert report.valid, report.flatten(["type", "note"])
    bad = tmp_path / "bad.csv"
    bad.write_text(path.read_text().replace("J mol-1 K-1", "calories"))
    report = Resource(path=bad.name, basepath=str(tmp_path), schema=schema).validate()
    assert not report.valid


def test_a_table_cut_short_or_edited_is_refused(tmp_path):
    path = tmp_path / "t.csv"
    table.write_table(table.rows_to_frame([_row(temperature_K=t) for t in range(100, 300, 10)]),
                      path, {})
    assert len(table.read_table(path)) == 20
    text = path.read_text()
    path.write_text(text[: len(text) // 2])  # cut mid-row, as a full disk or a copy leaves it
    with pytest.raises(ConfigError, match=r"t\.csv.*cut short or edited"):
        table.read_table(path)
    with pytest.raises(ConfigError, match=r"cut short or edited"):
        table.merge_tables([path])


# ---------------------------------------------------------------- the summaries
def test_summaries_show_rounded_rows_units_and_cautions(tmp_path):
    frame = table.rows_to_frame([_row(basis="per_mole_molecules"),
                                 _row(basis="per_mole_molecules", property="entropy",
                                      classical=None, quantum=None, correction=0.8123,
                                      correction_se=0.0213, note="refused: diffusing group")])
    frame.attrs = {"cautions": ["The corrections rest on the harmonic approximation."]}
    md = summary.summary_markdown(frame)
    assert "| crystal | total | harmonic | 100 | heat_capacity | J/(mol K) |" in md
    assert "16.250 ± 0.031" in md and "-8.694 ± 0.031" in md and "0.812 ± 0.021" in md
    assert "refused (see CSV note)" in md and "harmonic approximation" in md
    page = summary.summary_html(frame)
    assert page.startswith("<!DOCTYPE html>") and 'class="sortable"' in page
    assert page.count("<tr>") == 3  # head + two rows
    assert "<td class=\"number\">16.250 ± 0.031</td>" in page
    assert "addEventListener" in page  # sorting needs no file beside the page


def test_merge_writes_the_summaries_beside_the_table(tmp_path):
    first, second = tmp_path / "a.csv", tmp_path / "b.csv"
    molecules = "per_mole_molecules"  # the basis the summaries show
    table.write_table(table.rows_to_frame([_row(system="a", basis=molecules)]), first,
                      {"cautions": ["c1"]})
    table.write_table(table.rows_to_frame([_row(system="b", basis=molecules)]), second,
                      {"cautions": ["c2"]})
    out = tmp_path / "all.csv"
    assert qcorr_main(["merge", str(first), str(second), "--output", str(out),
                       "--summary-markdown", str(tmp_path / "all.md"),
                       "--summary-html", str(tmp_path / "all.html")]) == 0
    assert len(table.read_table(out)) == 2
    assert table.schema_path(out).is_file()
    html_rows = re.findall(r"<tr><td>(\w+)</td>", (tmp_path / "all.html").read_text())
    assert html_rows == ["a", "b"]
    assert "c1" in (tmp_path / "all.md").read_text()
    # a summary may not overwrite an input
    code = qcorr_main(["merge", str(first), "--output", str(tmp_path / "x.csv"),
                       "--summary-html", str(first)])
    assert code != 0 and not (tmp_path / "x.csv").exists()
    assert np.isfinite(table.read_table(first)["quantum"]).all()
