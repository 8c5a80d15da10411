"""The systems-sheet rows of the robustness catalogue (see tests/robustness_cases.py).

Each case writes a sheet (the dimer row of ``in/`` with some cells changed) and reads it
with :func:`qcorr.systems_sheet.read_systems_sheet`, as the workflow does when Snakemake
loads it (tests/test_workflow.py runs a few of them through Snakemake itself).
"""

from __future__ import annotations

from robustness_cases import Case, Paths

SHEET_CASES: list[Case] = []

SHEET_COLUMNS = ("system", "topology", "trajectory", "temperature_K", "segment_ps", "masses")


def sheet(p: Paths, rows: int = 1, extra_line: str = "", **cells) -> str:
    """A systems sheet of *rows* copies of the dimer row with *cells* changed (None: column left out)."""
    values = {"system": "dimers", "topology": p.i("dimers.gro"), "trajectory": p.i("dimers.trr"),
              "temperature_K": "300", "segment_ps": "0.4", "masses": "O=15.999"}
    values.update(cells)
    columns = [c for c in values if values[c] is not None]
    lines = ["\t".join(columns)]
    for k in range(rows):
        row = dict(values, system=f"{values['system']}{k or ''}") if values.get("system") else values
        lines.append("\t".join(str(row[c]) for c in columns))
    return "\n".join(lines) + "\n" + extra_line


def W(what: str, name: str, expect: tuple, **cells) -> Case:
    """A sheet case: the dimer row with *cells* changed."""
    return Case(f"sheet-{name}", what, lambda p: sheet(p, **cells), expect, sheet=True)


SHEET_CASES += [
    W("segment_ps = nan (was silently the default)", "segment-nan", ("row 1", "'segment_ps'", "'nan'", "not a finite number"),
      segment_ps="nan"),
    W("temperature_K = inf", "temperature-inf", ("row 1", "'temperature_K'", "not a finite number"), temperature_K="inf"),
    W("segment_ps = -inf", "segment-minus-inf", ("'segment_ps'", "not a finite number"), segment_ps="-inf"),
    W("temperature_K = 0", "temperature-zero", ("'temperature_K'", "> 0"), temperature_K="0"),
    W("temperature_K = warm", "temperature-text", ("'temperature_K'", "'warm' is not a number"), temperature_K="warm"),
    W("blocks = 20 for 9 segments", "blocks-more-than-segments", ("'blocks'", "20 blocks", "9 segments"), blocks="20"),
    W("blocks = 0", "blocks-zero", ("'blocks'", ">= 1"), blocks="0"),
    W("blocks = 1.5", "blocks-fraction", ("'blocks'", "not an integer"), blocks="1.5"),
    W("start = -5", "start-negative", ("'start'", ">= 0"), start="-5"),
    W("stop = 100 before start = 200", "stop-before-start", ("'stop'", "larger than start"), start="200", stop="100"),
    W("step = 0", "step-zero", ("'step'", ">= 1"), step="0"),
    W("segment_ps longer than the trajectory with blocks = 2", "segment-longer-than-run", ("'segment_ps'", "fewer frames"),
      segment_ps="10", blocks="2"),
    W("liquid = maybe", "boolean-text", ("'liquid'", "'maybe' is not true or false"), liquid="maybe"),
    W("lammps_units = si", "lammps-units-unknown", ("'lammps_units'", "'si'"), lammps_units="si"),
    W("system id with a space and a semicolon", "unsafe-id", ("'system'", "not a safe identifier"), system="cu; rm"),
    W("the topology file is missing", "topology-missing", ("'topology'", "does not exist"), topology="nowhere.gro"),
    W("an empty trajectory cell", "trajectory-empty", ("'trajectory'", "required"), trajectory=""),
    W("the temperature column left out", "temperature-column-missing", ("'temperature_K'", "required"), temperature_K=None),
    W("groups = 'water' (no selection)", "groups-malformed", ("'groups'", "NAME=VALUE"), groups="water"),
    W("a group named total", "groups-total", ("'groups'", "reserved"), groups="total=all"),
    W("a selection that matches no atom", "groups-match-nothing", ("'groups'", "matches no atom"), groups="ions=name NA"),
    W("constraints for a group not defined", "constraints-unknown-group", ("'constraints'", "'water'"), constraints="water=3"),
    W("masses = O=nan", "masses-nan", ("'masses'", "finite number > 0"), masses="O=nan"),
    W("masses = O=-16", "masses-negative", ("'masses'", "> 0"), masses="O=-16"),
    W("temperatures_K = 200; inf", "temperatures-inf", ("'temperatures_K'", "finite"), temperatures_K="200; inf"),
    W("md_values = total:heat_capacity=nan", "md-values-nan", ("'md_values'", "finite"), md_values="total:heat_capacity=nan"),
    W("frozen_bond_wavenumbers = total=3657,nan", "frozen-bonds-nan", ("'frozen_bond_wavenumbers'", "finite"),
      frozen_bond_wavenumbers="total=3657,nan"),
    W("reader_options = dtt=0.002 with blocks = 2 (checked when the trajectory is opened)", "reader-option-unknown",
      ("'trajectory'", "dtt"), reader_options="dtt=0.002", blocks="2"),
    W("an unknown column", "unknown-column", ("header row", "'colour'", "unknown column"), colour="blue"),
    Case("sheet-duplicated-column", "a column named twice in the header",
         lambda p: sheet(p).replace("\tmasses\n", "\tsegment_ps\n", 1).replace("O=15.999", "0.2"),
         ("header row", "'segment_ps'", "twice"), sheet=True),
    Case("sheet-trailing-tab", "a row ending in a tab (one cell too many)", lambda p: sheet(p).rstrip("\n") + "\t\n",
         ("row 1", "7 cells", "6 columns"), sheet=True),
    Case("sheet-extra-cell", "a row with an extra cell", lambda p: sheet(p).rstrip("\n") + "\t1\n",
         ("row 1", "7 cells", "6 columns"), sheet=True),
    Case("sheet-missing-cell", "a row with one cell too few (cells would shift)",
         lambda p: sheet(p).replace("\t0.4\t", "\t", 1), ("row 1", "5 cells", "6 columns"), sheet=True),
    Case("sheet-header-trailing-tab", "a header ending in a tab", lambda p: sheet(p).replace("masses\n", "masses\t\n", 1),
         ("header row", "empty column name"), sheet=True),
    Case("sheet-duplicated-id", "two rows with the same system id",
         lambda p: sheet(p, rows=1) + sheet(p, rows=1).splitlines()[1] + "\n", ("row 2", "'system'", "more than one row"),
         sheet=True),
    Case("sheet-empty", "an empty sheet", lambda p: "# only a comment\n", ("is empty",), sheet=True),
    Case("sheet-header-only", "a header and no rows", lambda p: sheet(p).splitlines()[0] + "\n", ("no system rows",),
         sheet=True),
    Case("sheet-not-utf8", "a sheet saved as Latin-1 with a non-ASCII character",
         lambda p: sheet(p, groups="caf\xe9=all").encode("latin-1"), ("line 2", "UTF-8"), sheet=True),
]
