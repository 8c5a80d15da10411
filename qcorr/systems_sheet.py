"""The systems sheet of the workflow: read, typed and checked before any job starts.

The sheet (``config/systems.tsv``, columns in ``workflow/schemas/systems.schema.yaml``) is
tab-separated text: a header line, then one row per simulated system; blank lines and
lines starting with ``#`` are comments.  :func:`read_systems_sheet` turns it into a
:class:`pandas.DataFrame` indexed by system id, or raises :class:`SheetError` with one
line naming the sheet, the row (and its line in the file) and the column at fault.

What is refused, and why:

* a header naming a column twice or an unknown column, a row with more or fewer cells
  than the header (a trailing tab, an extra or a missing cell would shift every later
  cell into the wrong column);
* a number cell that is not a finite number (``nan``, ``inf``: JSON Schema has no NaN,
  and a NaN cell would otherwise be taken as empty, i.e. silently given the default);
* whatever the schema refuses (types, ranges, choices, required cells), checked by the
  ``validate`` function given (the workflow passes ``snakemake.utils.validate``, which
  also fills the defaults);
* list cells (``NAME=VALUE; ...``) that do not parse, name undefined groups or hold
  numbers that are not finite and positive; missing input files; duplicated system ids;
* selections that match no atom (``check_selections``); for rows with ``blocks`` > 1
  (``check_blocks``) reader options MDAnalysis does not take and ``blocks`` larger than the
  number of segments of the frame window (the trajectory is opened and its window planned
  by the library, as ``qcorr spectrum`` does).
"""

from __future__ import annotations

import csv
import math
import os
import re
from collections.abc import Callable
from pathlib import Path

import pandas as pd
import yaml

from qcorr.errors import ConfigError, QcorrError

__all__ = ["SheetError", "parse_pairs", "read_systems_sheet", "split_items"]

#: group names: letters, digits, '_' and '-' (they become option values and table cells)
SAFE_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_-]*$")
TRUE_WORDS = frozenset({"true", "yes", "1"})
FALSE_WORDS = frozenset({"false", "no", "0"})


class SheetError(ConfigError):
    """A systems-sheet cell, row or header is wrong (names the sheet, row, line and column)."""


class _Where:
    """Names a place in the sheet for messages: the header, or a row with its line and id."""

    def __init__(self, sheet: str, row: int | None = None, line: int | None = None, system: str = ""):
        self.sheet, self.row, self.line, self.system = sheet, row, line, system

    def error(self, column: str, message: str) -> SheetError:
        if self.row is None:
            place = "header row" if self.line is None else f"header row (line {self.line})"
        else:
            named = f", system {self.system!r}" if self.system else ""
            place = f"row {self.row} (line {self.line}{named})"
        return SheetError(f"systems sheet {self.sheet!r}, {place}, column {column!r}: {message}")


def split_items(cell: object) -> list[str]:
    """Items of a list-valued cell, separated by ';' (empty items dropped)."""
    if cell is None or (isinstance(cell, float) and math.isnan(cell)):
        return []
    return [item.strip() for item in str(cell).split(";") if item.strip()]


def parse_pairs(cell: object, column: str, where: _Where | None = None, separator: str = "=") -> list[tuple[str, str]]:
    """``'NAME=VALUE; ...'`` -> ``[(name, value), ...]`` with non-empty names and values."""
    pairs = []
    for item in split_items(cell):
        name, sep, value = item.partition(separator)
        if not sep or not name.strip() or not value.strip():
            message = f"item {item!r} is not of the form NAME{separator}VALUE"
            raise (where.error(column, message) if where else SheetError(f"column {column!r}: {message}"))
        pairs.append((name.strip(), value.strip()))
    return pairs


def _positive(text: str, column: str, where: _Where) -> float:
    try:
        value = float(text)
    except ValueError:
        raise where.error(column, f"{text!r} is not a number") from None
    if not (math.isfinite(value) and value > 0):
        raise where.error(column, f"{text!r} must be a finite number > 0")
    return value


# ----------------------------------------------------------------------------- reading


def _sheet_lines(path: Path) -> list[tuple[int, str]]:
    """(line number, text) of the lines that are neither blank nor comments."""
    shown = os.fspath(path)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise SheetError(f"config key 'systems': the systems sheet {shown!r} does not exist (give a path "
                         "relative to the directory Snakemake runs in)") from None
    except OSError as err:
        raise SheetError(f"systems sheet {shown!r} cannot be read: {err.strerror or err}") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as err:
        line = raw[: err.start].count(b"\n") + 1
        raise SheetError(f"systems sheet {shown!r}, line {line}: not UTF-8 text (byte {raw[err.start]:#04x}); "
                         "save the sheet as UTF-8") from None
    kept = [(n, line) for n, line in enumerate(text.splitlines(), start=1)
            if line.strip() and not line.lstrip().startswith("#")]
    if not kept:
        raise SheetError(f"systems sheet {shown!r} is empty: add a header line and one row per system")
    return kept


def _cells(lines: list[tuple[int, str]]) -> list[list[str]]:
    """Tab-separated cells of each line (quotes as in pandas/Excel TSV), stripped."""
    rows = csv.reader([text for _, text in lines], delimiter="\t")
    return [[cell.strip() for cell in row] for row in rows]


def _frame(path: Path, columns: dict) -> tuple[pd.DataFrame, list[_Where]]:
    """The sheet as strings (one column per header cell) and where each row is."""
    shown = os.fspath(path)
    lines = _sheet_lines(path)
    rows = _cells(lines)
    header, header_line = rows[0], lines[0][0]
    where = _Where(shown, line=header_line)
    for index, name in enumerate(header):
        if not name:
            raise where.error(f"#{index + 1}", "empty column name (a stray or trailing tab?); remove it")
        if name not in columns:
            raise where.error(name, f"unknown column; allowed columns: {', '.join(columns)}")
        if header.count(name) > 1:
            raise where.error(name, "the column appears twice; keep one")
    places = []
    for number, ((line, _), cells) in enumerate(zip(lines[1:], rows[1:]), start=1):
        system = cells[header.index("system")] if "system" in header and len(cells) > header.index("system") else ""
        place = _Where(shown, number, line, system)
        if len(cells) != len(header):
            column = header[-1] if len(cells) > len(header) else header[min(len(cells), len(header) - 1)]
            raise place.error(
                column,
                f"the row has {len(cells)} cells but the header {len(header)} columns (a trailing tab, an "
                "extra or a missing cell shifts every later cell); give one cell per column, empty for "
                "the default")
        places.append(place)
    if not places:
        raise SheetError(f"systems sheet {shown!r} has a header but no system rows")
    return pd.DataFrame(rows[1:], columns=header, dtype=object), places


def _typed(frame: pd.DataFrame, columns: dict, places: list[_Where]) -> pd.DataFrame:
    """Cells converted to their schema types; empty cells become missing (they take defaults)."""
    out = frame.copy()
    for name in frame.columns:
        kind = columns[name].get("type", "string")
        values = []
        for text, place in zip(frame[name], places):
            values.append(None if text == "" else text if kind == "string" else _convert(text, kind, name, place))
        out[name] = pd.Series(values, index=frame.index, dtype=object)
    return out


def _convert(text: str, kind: str, column: str, where: _Where) -> object:
    if kind == "boolean":
        if text.lower() in TRUE_WORDS:
            return True
        if text.lower() in FALSE_WORDS:
            return False
        raise where.error(column, f"{text!r} is not true or false")
    try:
        value = float(text)
    except ValueError:
        raise where.error(column, f"{text!r} is not a{'n integer' if kind == 'integer' else ' number'}") from None
    if not math.isfinite(value):
        raise where.error(column, f"{text!r} is not a finite number; give a number or leave the cell empty "
                                  "for the default")
    if kind == "integer":
        if not value.is_integer():
            raise where.error(column, f"{text!r} is not an integer")
        return int(value)
    return value


def _validated(frame: pd.DataFrame, schema_path: str | os.PathLike[str], validate: Callable,
               places: list[_Where]) -> pd.DataFrame:
    """Validate every row with the schema (defaults filled); name the row and column at fault."""
    frame = frame.copy()
    try:
        validate(frame, schema=os.fspath(schema_path))
    except Exception as err:  # noqa: BLE001 -- snakemake's WorkflowError wraps jsonschema's error
        cause = err.__context__ or err
        found = re.search(r"row (\d+)", str(err))
        place = places[int(found.group(1))] if found else places[0]
        raise place.error(*_schema_message(cause)) from None
    return frame


def _schema_message(cause: BaseException) -> tuple[str, str]:
    """(column, message) of a jsonschema ValidationError, in the sheet's words."""
    message = getattr(cause, "message", str(cause))
    path = list(getattr(cause, "absolute_path", []) or [])
    column = str(path[0]) if path else None
    if column is None:
        found = re.search(r"'([^']+)' is a required property", message)
        column = found.group(1) if found else "?"
    kind = getattr(cause, "validator", "")
    limit = getattr(cause, "validator_value", None)
    value = getattr(cause, "instance", "?")
    if kind == "required":
        return column, "a value is required (the cell is empty or the column is missing)"
    if kind in ("exclusiveMinimum", "minimum", "maximum", "exclusiveMaximum"):
        relation = {"exclusiveMinimum": ">", "minimum": ">=", "maximum": "<=", "exclusiveMaximum": "<"}[kind]
        return column, f"{value!r} is out of range: it must be {relation} {limit}"
    if kind == "enum":
        return column, f"{value!r} is not one of {', '.join(map(repr, limit))}"
    if kind == "pattern" and column == "system":
        return column, (f"{value!r} is not a safe identifier: use letters, digits, '_' and '-' only (first "
                        "a letter or digit, at most 80 characters)")
    return column, message


# ----------------------------------------------------------------------------- row checks


def _check_groups(row: pd.Series, where: _Where) -> set[str]:
    """Check the 'groups' cell; return the defined group names (with 'total')."""
    names = [name for name, _ in parse_pairs(row["groups"], "groups", where)]
    for name in names:
        if not SAFE_NAME.match(name):
            raise where.error("groups", f"group name {name!r}: use letters, digits, '_' and '-' only")
        if name == "total":
            raise where.error("groups", "the group name 'total' is reserved (every atom with mass is "
                                        "always analysed as 'total')")
    if len(set(names)) != len(names):
        raise where.error("groups", "a group name appears twice")
    return {*names, "total"}


def _check_lists(row: pd.Series, where: _Where) -> None:
    """Check the list-valued cells of one validated row."""
    known = _check_groups(row, where)
    for column in ("constraints", "constraints_per_molecule"):
        for name, count in parse_pairs(row[column], column, where):
            if name not in known:
                raise where.error(column, f"group {name!r} is not defined in column 'groups' (nor 'total')")
            if not count.isdigit():
                raise where.error(column, f"count {count!r} of group {name!r} is not a whole number >= 0")
    for _, mass in parse_pairs(row["masses"], "masses", where):
        _positive(mass, "masses", where)
    for temperature in split_items(row["temperatures_K"]):
        _positive(temperature, "temperatures_K", where)
    for key, value in parse_pairs(row["md_values"], "md_values", where):
        group, colon, prop = key.partition(":")
        if not colon or group not in known or not prop:
            raise where.error("md_values", f"item key {key!r} is not GROUP:PROPERTY with a defined group")
        try:
            number = float(value)
        except ValueError:
            number = math.nan
        if not math.isfinite(number):
            raise where.error("md_values", f"value {value!r} of {key!r} is not a finite number")
    for group, numbers in parse_pairs(row["frozen_bond_wavenumbers"], "frozen_bond_wavenumbers", where):
        if group not in known:
            raise where.error("frozen_bond_wavenumbers", f"group {group!r} is not defined in column 'groups'")
        for number in numbers.split(","):
            _positive(number.strip(), "frozen_bond_wavenumbers", where)
    parse_pairs(row["reader_options"], "reader_options", where)
    if pd.notna(row.get("stop")) and row["stop"] <= row["start"]:
        raise where.error("stop", f"stop ({row['stop']}) must be larger than start ({row['start']})")


#: properties a ``classical_values`` item may name (issue 13)
BASELINE_PROPERTIES = ("heat_capacity", "isobaric_heat_capacity", "energy", "enthalpy",
                       "helmholtz_free_energy", "gibbs_free_energy")


def _check_reference(text: str, column: str, where: _Where, item: str) -> None:
    """``VALUE[,SE]:SOURCE`` with finite numbers and a non-empty source."""
    number, colon, source = text.partition(":")
    if not colon or not source.strip():
        raise where.error(column, f"item {item!r} is not VALUE[,SE]:SOURCE (the source is required)")
    for part in number.split(","):
        try:
            value = float(part)
        except ValueError:
            value = math.nan
        if not math.isfinite(value):
            raise where.error(column, f"item {item!r}: {part.strip()!r} is not a finite number")


def _check_baselines(row: pd.Series, where: _Where) -> None:
    """The classical-baseline columns (issue 13) and ``position_precision_A`` of one row."""
    if row["energy_file"] and not row["energy_format"]:
        raise where.error("energy_format", "give the format of energy_file")
    if row["energy_format"] and not row["energy_file"]:
        raise where.error("energy_file", "energy_format is set but no file is given")
    needs = [c for c in ("energy_file", "series", "gas_system", "classical_values") if row[c]]
    if needs and not row["ensemble"]:
        raise where.error("ensemble", f"declare the ensemble the run sampled (needed by {needs[0]})")
    if row["series"] and not SAFE_NAME.match(row["series"]):
        raise where.error("series", f"{row['series']!r}: use letters, digits, '_' and '-' only")
    for name, value in parse_pairs(row["classical_values"], "classical_values", where):
        if name not in BASELINE_PROPERTIES:
            raise where.error("classical_values", f"{name!r} is not one of {', '.join(BASELINE_PROPERTIES)}")
        try:
            number = float(value)
        except ValueError:
            number = math.nan
        if not math.isfinite(number):
            raise where.error("classical_values", f"{value!r} is not a finite number")
    for name, value in parse_pairs(row["reference_values"], "reference_values", where):
        _check_reference(value, "reference_values", where, f"{name}={value}")
    if row["vaporisation_reference"]:
        if not row["gas_system"]:
            raise where.error("vaporisation_reference", "needs gas_system (the pair it refers to)")
        _check_reference(row["vaporisation_reference"], "vaporisation_reference", where,
                         row["vaporisation_reference"])
    if pd.notna(row.get("position_precision_A")) and row["velocities_from"] != "positions":
        raise where.error("position_precision_A", "applies only with velocities_from 'positions'; "
                                                  "leave the cell empty")


def _check_pairs_and_series(frame: pd.DataFrame, places: list[_Where]) -> None:
    """Across rows: a series has two or more runs and is named unlike any system; a
    ``gas_system`` names another row that declares its ensemble."""
    ids = list(frame["system"])
    for index, where in enumerate(places):
        row = frame.iloc[index]
        series, gas = row["series"], row["gas_system"]
        if series:
            if int((frame["series"] == series).sum()) < 2:
                raise where.error("series", f"series {series!r} has one run; give it two or more")
            if series in ids:
                raise where.error("series", f"series {series!r} has the name of a system; rename it")
        if gas:
            if gas not in ids or gas == row["system"]:
                raise where.error("gas_system", f"{gas!r} is not the id of another system row")
            if not frame.loc[frame["system"] == gas, "ensemble"].iloc[0]:
                raise where.error("gas_system", f"system {gas!r} has no ensemble declared")


def _check_files(row: pd.Series, where: _Where) -> None:
    """The topology, every trajectory file and the energy file must exist."""
    if not Path(row["topology"]).is_file():
        raise where.error("topology", f"file {row['topology']!r} does not exist")
    trajectories = split_items(row["trajectory"])
    if not trajectories:
        raise where.error("trajectory", "no trajectory file given")
    for path in trajectories:
        if not Path(path).is_file():
            raise where.error("trajectory", f"file {path!r} does not exist")
    if row["energy_file"] and not Path(row["energy_file"]).is_file():
        raise where.error("energy_file", f"file {row['energy_file']!r} does not exist")


def _check_selections(row: pd.Series, where: _Where) -> None:
    """Open the topology with MDAnalysis and refuse selections that match no atom."""
    groups = parse_pairs(row["groups"], "groups", where)
    if not groups:
        return
    import warnings

    import MDAnalysis

    kwargs = {"format": row["topology_format"]} if row["topology_format"] else {}
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            universe = MDAnalysis.Universe(row["topology"], **kwargs)
    except Exception as err:  # noqa: BLE001 -- MDAnalysis raises many types for unreadable files
        raise where.error("topology", f"MDAnalysis cannot read {row['topology']!r}: {err}".splitlines()[0]) from None
    for name, selection in groups:
        try:
            count = universe.select_atoms(selection).n_atoms
        except MDAnalysis.exceptions.SelectionError as err:
            raise where.error("groups", f"selection of group {name!r} is invalid: {err}".splitlines()[0]) from None
        except Exception:  # noqa: BLE001 -- needs data the topology lacks; 'qcorr spectrum' checks it
            count = None
        if count == 0:
            raise where.error("groups", f"selection {selection!r} of group {name!r} matches no atom of "
                                        f"{row['topology']!r}")


def _check_blocks(row: pd.Series, where: _Where, overlap: float, taper: str) -> None:
    """Open the trajectory and plan the frame window as 'qcorr spectrum' does; ``blocks`` must not
    exceed its segment count."""
    from qcorr.reading.options import parse_option_value
    from qcorr.reading.universe import open_trajectory
    from qcorr.spectra.run_plan import plan_run

    options = {key: parse_option_value(value) for key, value in parse_pairs(row["reader_options"], "reader_options", where)}
    try:
        opened = open_trajectory(row["topology"], split_items(row["trajectory"]),
                                 topology_format=row["topology_format"] or None,
                                 trajectory_format=row["trajectory_format"] or None,
                                 reader_options=options, lammps_units=row["lammps_units"] or None)
    except QcorrError as err:
        raise where.error("trajectory", f"{err} (opened to check 'blocks')") from None
    stop = None if pd.isna(row.get("stop")) else int(row["stop"])
    try:
        plan = plan_run(opened, int(row["start"]), stop, int(row["step"]), segment_ps=float(row["segment_ps"]),
                        overlap=overlap, taper=taper, velocities_from=row["velocities_from"],
                        molecular=bool(row["liquid"]), block=(1, 1), pieces=1)
    except QcorrError as err:
        raise where.error("segment_ps", str(err)) from None
    if int(row["blocks"]) > plan.segment_count:
        raise where.error("blocks", f"{int(row['blocks'])} blocks but the frame window holds only "
                                    f"{plan.segment_count} segments of {float(row['segment_ps']):g} ps; "
                                    "use at most that many blocks, or a shorter segment_ps")


# ----------------------------------------------------------------------------- the sheet


def read_systems_sheet(
    path: str | os.PathLike[str],
    schema_path: str | os.PathLike[str],
    validate: Callable,
    *,
    check_selections: bool = True,
    check_blocks: bool = True,
    overlap: float = 0.5,
    taper: str = "hann",
) -> pd.DataFrame:
    """Read, type, validate and check the systems sheet.

    Parameters
    ----------
    path : path
        The sheet (tab-separated UTF-8 text).
    schema_path : path
        ``workflow/schemas/systems.schema.yaml`` (JSON Schema of one row).
    validate : callable
        ``validate(frame, schema=path)`` that checks every row against the schema and
        fills the defaults in place (``snakemake.utils.validate``).
    check_selections : bool
        Open every topology that has groups and refuse selections that match no atom.
    check_blocks : bool
        Open the trajectory of every row with ``blocks`` > 1 and refuse more blocks than
        segments (the workflow does both in its main process only).
    overlap, taper :
        The workflow's spectrum settings (``config.yaml``), for planning the frame window.

    Returns
    -------
    pandas.DataFrame
        One row per system, indexed by ``system``, every schema column present (missing
        optional cells as NA, integer columns as pandas' nullable ``Int64``).

    Raises
    ------
    SheetError
        One line naming the sheet, the row (its line in the file and its system id) and
        the column at fault, and what is wrong.
    """
    path = Path(path)
    with open(schema_path, encoding="utf-8") as handle:
        columns = yaml.safe_load(handle)["properties"]
    strings, places = _frame(path, columns)
    frame = _validated(_typed(strings, columns, places), schema_path, validate, places)
    for name, spec in columns.items():
        if name not in frame.columns:
            frame[name] = pd.NA
        if spec.get("type") == "integer":
            frame[name] = frame[name].astype("Int64")
        elif spec.get("type") == "number":  # NA (an empty optional cell) becomes NaN
            frame[name] = pd.to_numeric(frame[name]).astype(float)
    for index, where in enumerate(places):
        row = frame.iloc[index]
        _check_lists(row, where)
        _check_baselines(row, where)
        _check_files(row, where)
    duplicated = frame["system"].duplicated()
    if duplicated.any():
        index = int(duplicated.to_numpy().nonzero()[0][0])
        raise places[index].error("system", f"the id {frame['system'].iloc[index]!r} is used by more than one row")
    _check_pairs_and_series(frame, places)
    for index, where in enumerate(places):
        row = frame.iloc[index]
        if check_selections:
            _check_selections(row, where)
        if check_blocks and int(row["blocks"]) > 1:
            _check_blocks(row, where, overlap, taper)
    frame["_where"] = [f"row {w.row} (line {w.line})" for w in places]
    return frame.set_index("system", drop=False)
