"""The property table: tidy rows, CSV + JSON sidecar, a readable printout, merging.

One row per system x group x method x property x temperature x basis, with
the classical value, the quantum value, their difference (the quantum
correction), a standard error for each, the unit, and a note saying why a cell
is empty or how a value is to be read.  The layout is described in
``DEVELOPERS.md`` ("The property table").

The CSV is plain text (``,``-separated, ``.`` decimal, empty cell = not
defined); floats are written with full double precision, except that a value below
:data:`ROUNDING_NOISE` times the largest value of its row (double-precision rounding of
sums over many spectrum bins, e.g. a standard error that is zero in exact arithmetic)
is written as 0.  The ``unit`` column holds UDUNITS-2 strings (:mod:`qcorr.units`).
Beside it, the JSON sidecar ``<table>.json`` holds the provenance: what was read
(file name, size, SHA-256), the qcorr and library versions, the options, the cautions
that apply to every number in the table, and the CSV's own row count and SHA-256 (so
that a table cut short or edited afterwards is refused when read); and
``<table>.schema.json`` describes the columns, their types and units as a Frictionless
Table Schema (https://specs.frictionlessdata.io/table-schema/).  The files are written
atomically: either all appear complete, or none is touched.

In memory a table is a :class:`pandas.DataFrame` with exactly :data:`TABLE_COLUMNS`
and its provenance in ``DataFrame.attrs``: :func:`write_table` writes the attrs as the
sidecar, :func:`read_table` reads the sidecar back into them, :func:`merge_tables`
joins files or DataFrames.
"""

from __future__ import annotations

import hashlib
import json
import os
from collections.abc import Iterable, Sequence
from dataclasses import asdict, dataclass, fields
from pathlib import Path

import numpy as np
import pandas as pd

from qcorr import __version__, units
from qcorr.errors import ConfigError, QcorrError
from qcorr.safe_write import check_output, write_files_atomic

#: value of ``qcorr_file_kind`` in a table's JSON sidecar
FILE_KIND = "property_table"

#: the columns, in order, with their meaning (also written to the sidecar)
COLUMNS: dict[str, str] = {
    "system": "system identifier (--system; defaults to the spectrum file's stem)",
    "group": "atom group of the spectrum file (or a 2PT mixture of groups)",
    "method": "harmonic (Berens weighting functions), frozen_bond_addon (user-given "
    "wavenumbers of constrained bonds), 2pt (two-phase model), or corrected (a classical "
    "value measured from the runs plus the harmonic quantum correction: the observable to "
    "publish)",
    "property": "heat_capacity (C_V), energy (zero-point energy included), thermal_energy "
    "(excluded), zero_point_energy, entropy, helmholtz_free_energy, "
    "mean_square_displacement, mean_square_displacement_ratio; 2pt also entropy_translation, "
    "entropy_rotation, entropy_vibration, entropy_mixing (ideal mixing of a mixture), enthalpy and "
    "gibbs_free_energy (with an MD energy and pressure); for method corrected also "
    "isobaric_heat_capacity (C_P), enthalpy, gibbs_free_energy, vaporisation_enthalpy",
    "temperature_K": "temperature at which the property is evaluated, K",
    "basis": "per_mole_molecules, per_mole_atoms, per_system, or atom_mean (mass-weighted "
    "mean over the group's atoms)",
    "unit": "unit of classical, quantum, correction and their standard errors (UDUNITS-2): "
    "J mol-1 K-1 or kJ mol-1 per mole; J K-1 or kJ per system; angstrom2; 1",
    "classical": "classical value (see classical_source)",
    "quantum": "quantum value = classical + correction",
    "correction": "quantum correction (quantum - classical)",
    "classical_se": "standard error of classical (from the per-segment spectra)",
    "quantum_se": "standard error of quantum",
    "correction_se": "standard error of correction",
    "classical_source": "harmonic_model (classical harmonic oscillators on the spectrum), "
    "md_value (classical value supplied by the user from the MD run), "
    "constrained_in_md (a constrained bond: no classical contribution), "
    "kinetic_fluctuation (microcanonical heat capacity from the trajectory's kinetic-energy "
    "fluctuations), energy_file (the engine's energy output: mean energy or enthalpy, "
    "fluctuation heat capacity), temperature_series (slope of H(T) or E(T) over runs at "
    "several temperatures), user_value (typed in by the user), or empty",
    "note": "why a cell is empty, or how to read the row",
    "reference": "a reference value for quantum (experiment or a published value), supplied "
    "by the user; empty if none",
    "reference_se": "standard error of reference (empty if not given)",
    "reference_source": "where reference comes from, as the user gave it",
    "deviation": "quantum - reference",
    "deviation_se": "standard error of deviation: quantum_se and reference_se combined",
}
TABLE_COLUMNS: tuple[str, ...] = tuple(COLUMNS)
#: the reference-value columns, added after ``note`` in qcorr 0.1 (issue 13)
REFERENCE_COLUMNS: tuple[str, ...] = ("reference", "reference_se", "reference_source", "deviation",
                                      "deviation_se")
#: the columns of tables written before the reference columns existed; such tables are still
#: read (and merged), with the reference columns empty
LEGACY_TABLE_COLUMNS: tuple[str, ...] = tuple(c for c in TABLE_COLUMNS if c not in REFERENCE_COLUMNS)
#: the columns holding text; the others hold numbers (NaN = empty cell)
TEXT_COLUMNS: tuple[str, ...] = (
    "system", "group", "method", "property", "basis", "unit", "classical_source", "note",
    "reference_source",
)

#: the value bases of a table
BASES = ("per_mole_molecules", "per_mole_atoms", "per_system")
#: every basis a row may have (the value bases, and the mass-weighted atom mean)
ALL_BASES = (*BASES, "atom_mean")
#: the methods of a table's rows
METHODS = ("harmonic", "frozen_bond_addon", "2pt", "corrected")
#: the unit strings a table's ``unit`` column may hold (UDUNITS-2, :mod:`qcorr.units`)
TABLE_UNITS = (units.MOLAR_HEAT_CAPACITY, units.MOLAR_ENERGY, units.SYSTEM_HEAT_CAPACITY,
               units.SYSTEM_ENERGY, units.AREA, units.DIMENSIONLESS)
#: the columns holding a value or its standard error (in the row's unit)
VALUE_COLUMNS = ("classical", "quantum", "correction", "classical_se", "quantum_se",
                 "correction_se")
#: a value below this fraction of the largest value of its row is written as 0: sums
#: over n ~ 10^3-10^4 spectrum bins carry a relative rounding error of about n x 2.2e-16
#: (double precision; N. J. Higham, Accuracy and Stability of Numerical Algorithms, 2nd
#: ed. (2002), section 4.2), so nothing below 1e-12 of the row is resolved
ROUNDING_NOISE = 1e-12

@dataclass
class TableRow:
    """One row of the property table (see :data:`COLUMNS`); None = empty cell."""

    system: str
    group: str
    method: str
    property: str
    temperature_K: float
    basis: str
    unit: str
    classical: float | None = None
    quantum: float | None = None
    correction: float | None = None
    classical_se: float | None = None
    quantum_se: float | None = None
    correction_se: float | None = None
    classical_source: str = ""
    note: str = ""
    reference: float | None = None
    reference_se: float | None = None
    reference_source: str = ""
    deviation: float | None = None
    deviation_se: float | None = None


def rows_to_frame(rows: Iterable[TableRow]) -> pd.DataFrame:
    """Tidy DataFrame with exactly :data:`TABLE_COLUMNS` (None becomes NaN)."""
    records = [asdict(r) for r in rows]
    frame = pd.DataFrame.from_records(records, columns=[f.name for f in fields(TableRow)])
    for col in (*VALUE_COLUMNS, "reference", "reference_se", "deviation", "deviation_se"):
        frame[col] = pd.to_numeric(frame[col], errors="coerce").astype(float)
    frame["temperature_K"] = frame["temperature_K"].astype(float)
    return without_rounding_noise(frame[list(TABLE_COLUMNS)])


def without_rounding_noise(frame: pd.DataFrame) -> pd.DataFrame:
    """*frame* with every value or standard error below :data:`ROUNDING_NOISE` times the
    largest of its row's classical, quantum and correction values set to 0 (a copy).

    A standard error that is zero in exact arithmetic (e.g. a classical harmonic heat
    capacity, exactly the degrees of freedom in every segment) comes out as ~1e-16 of
    the value; it is written as 0, not as 2.3e-15.
    """
    out = frame.copy()
    scale = out[["classical", "quantum", "correction"]].abs().max(axis=1, skipna=True)
    limit = (ROUNDING_NOISE * scale).to_numpy()
    for column in VALUE_COLUMNS:
        values = out[column].to_numpy(dtype=float, copy=True)
        noise = np.isfinite(values) & np.isfinite(limit) & (np.abs(values) < limit)
        values[noise] = 0.0
        out[column] = values
    return out


def sidecar_path(table_path: str | os.PathLike[str]) -> Path:
    """The JSON sidecar of a table: ``TABLE.csv`` -> ``TABLE.json``."""
    return Path(table_path).with_suffix(".json")


def schema_path(table_path: str | os.PathLike[str]) -> Path:
    """The column schema of a table: ``TABLE.csv`` -> ``TABLE.schema.json``."""
    return Path(table_path).with_suffix(".schema.json")


def table_schema() -> dict[str, object]:
    """The table's columns as a Frictionless Table Schema (types, units, descriptions).

    Fixed units are given as ``"unit"`` (UDUNITS-2); the value columns take the unit of
    their row's ``unit`` column, listed as that field's ``constraints.enum``.
    """
    fields = []
    for name, description in COLUMNS.items():
        field: dict[str, object] = {"name": name, "description": description}
        if name in TEXT_COLUMNS:
            field["type"] = "string"
        else:
            field["type"] = "number"
        if name == "temperature_K":
            field["unit"] = units.TEMPERATURE
            field["constraints"] = {"required": True, "minimum": 0}
        elif name in VALUE_COLUMNS or (name in REFERENCE_COLUMNS and name not in TEXT_COLUMNS):
            field["description"] = f"{description}; in the unit of the row's 'unit' column"
        elif name == "unit":
            field["constraints"] = {"required": True, "enum": list(TABLE_UNITS)}
        elif name == "basis":
            field["constraints"] = {"required": True, "enum": list(ALL_BASES)}
        elif name == "method":
            field["constraints"] = {"required": True, "enum": list(METHODS)}
        elif name in ("system", "group", "property"):
            field["constraints"] = {"required": True}
        fields.append(field)
    return {
        "fields": fields,
        "missingValues": [""],
        "primaryKey": list(KEY_COLUMNS),
        "description": "qcorr property table: one row per system, atom group, method, "
        "property, temperature and basis; units in UDUNITS-2 syntax (CF conventions 1.11, "
        "section 3.1)",
    }


def file_record(path: str | os.PathLike[str]) -> dict[str, object]:
    """``{"name", "size_bytes", "sha256"}`` of an input file (read in 1 MiB blocks)."""
    path = Path(path)
    digest = hashlib.sha256()
    with path.open("rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return {"name": os.fspath(path), "size_bytes": path.stat().st_size, "sha256": digest.hexdigest()}


def library_versions() -> dict[str, str]:
    """Versions of qcorr and the numerical libraries that made a table."""
    import scipy
    import xarray

    return {
        "qcorr": __version__,
        "numpy": np.__version__,
        "scipy": scipy.__version__,
        "pandas": pd.__version__,
        "xarray": xarray.__version__,
    }


def check_output_path(
    output: str | os.PathLike[str], inputs: Sequence[str | os.PathLike[str]], option: str = "--output"
) -> Path:
    """Check, before any computation, the table, its sidecar and its schema as outputs.

    None of the three may be an input, and each must be writable as a regular file
    (:func:`qcorr.safe_write.check_output`).

    Raises
    ------
    ConfigError
        Naming the option and the input file, if the table or its JSON sidecar is an input,
        or if the name ends in ``.json``.
    OutputError
        If one of the three cannot be written there (a directory, symbolic link or other
        special file in its place, read-only, no space, ...).
    """
    output = Path(output)
    if output.suffix.lower() == ".json":
        raise ConfigError(
            f"{option} '{output}': the table must not end in .json (that name is used for its "
            "sidecar); use a .csv name"
        )
    targets = {output.resolve(), sidecar_path(output).resolve(), schema_path(output).resolve()}
    for item in inputs:
        if Path(item).resolve() in targets:
            raise ConfigError(
                f"{option} '{output}' would overwrite the input '{item}' (or write its sidecar "
                "over it); choose another output name"
            )
    for path, role in ((output, option), (sidecar_path(output), f"{option} (its sidecar)"),
                       (schema_path(output), f"{option} (its schema)")):
        check_output(path, role, inputs)
    return output


def _json_default(value: object) -> object:
    if isinstance(value, (np.floating, np.integer)):
        return value.item()
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, Path):
        return os.fspath(value)
    raise TypeError(f"not JSON serialisable: {type(value).__name__}")


def write_table(
    frame: pd.DataFrame, path: str | os.PathLike[str], provenance: dict | None = None
) -> Path:
    """Write the table CSV and its JSON sidecar atomically (both or neither).

    Parameters
    ----------
    frame : pandas.DataFrame
        Table with exactly :data:`TABLE_COLUMNS` (as made by
        :func:`qcorr.thermo.harmonic.harmonic_properties`,
        :func:`qcorr.thermo.twophase_table.two_phase_properties`, :func:`read_table` or
        :func:`merge_tables`).
    path : str or path-like
        Target CSV; the sidecar goes to :func:`sidecar_path`.
    provenance : dict, optional
        JSON-serialisable provenance (options, cautions, per-group diagnostics, ...);
        default ``frame.attrs``.  ``qcorr_file_kind``, ``table``, ``columns`` and
        ``versions`` are set by this write and come first.

    Returns
    -------
    pathlib.Path
        The CSV path.

    Raises
    ------
    QcorrError
        If the columns are not :data:`TABLE_COLUMNS`.
    TypeError, ValueError
        If the provenance is not JSON-serialisable (NaN included); nothing is written.
    OutputError
        If a file cannot be written (:func:`qcorr.safe_write.write_files_atomic`); none is.
    """
    if tuple(frame.columns) != TABLE_COLUMNS:
        raise QcorrError(
            f"the table's columns {tuple(frame.columns)} are not the property-table columns "
            f"{TABLE_COLUMNS}; build the table with qcorr's property functions"
        )
    provenance = dict(frame.attrs if provenance is None else provenance)
    header = {
        "qcorr_file_kind": FILE_KIND,
        "table": Path(path).name,
        "columns": COLUMNS,
        "versions": library_versions(),
    }
    provenance = {k: v for k, v in provenance.items() if k not in header and k not in _CSV_KEYS}
    csv_text = without_rounding_noise(frame).to_csv(index=False, na_rep="", lineterminator="\n")
    csv_bytes = csv_text.encode("utf-8")
    sidecar = {**header, "csv_rows": len(frame),
               "csv_sha256": hashlib.sha256(csv_bytes).hexdigest(), **provenance}
    text = json.dumps(sidecar, indent=2, sort_keys=False, default=_json_default, allow_nan=False)
    schema = json.dumps(table_schema(), indent=2)
    path = Path(path)
    write_files_atomic({path: csv_bytes, sidecar_path(path): (text + "\n").encode("utf-8"),
                        schema_path(path): (schema + "\n").encode("utf-8")})
    return path


#: sidecar keys that describe the CSV file itself (set by :func:`write_table`)
_CSV_KEYS = ("csv_rows", "csv_sha256")


def read_table(path: str | os.PathLike[str]) -> pd.DataFrame:
    """Read a table written by qcorr and its sidecar.

    Parameters
    ----------
    path : str or path-like
        Table CSV; its sidecar ``TABLE.json`` must sit beside it.

    Returns
    -------
    pandas.DataFrame
        Exactly :data:`TABLE_COLUMNS` (empty cells as NaN in the number columns, empty
        strings in the text columns; values in the units of the ``unit`` column); the
        sidecar's contents in ``attrs``.  A table written before the reference columns
        existed (:data:`LEGACY_TABLE_COLUMNS`) is read with them empty.

    Raises
    ------
    ConfigError
        Naming the file, if it is missing, is not CSV with exactly the table
        columns, or lacks its JSON sidecar.
    """
    path = Path(path)
    if not path.is_file():
        raise ConfigError(f"table '{path}' does not exist; check the path")
    try:
        frame = pd.read_csv(path, keep_default_na=False, na_values=[""], dtype={"note": str})
    except Exception as err:  # pandas raises ParserError, UnicodeDecodeError, EmptyDataError
        raise ConfigError(
            f"table '{path}' is not a readable CSV ({type(err).__name__}); give a table "
            "written by 'qcorr properties' or 'qcorr liquid'"
        ) from err
    legacy = tuple(frame.columns) == LEGACY_TABLE_COLUMNS
    if tuple(frame.columns) != TABLE_COLUMNS and not legacy:
        missing = [c for c in TABLE_COLUMNS if c not in frame.columns]
        extra = [c for c in frame.columns if c not in TABLE_COLUMNS]
        raise ConfigError(
            f"table '{path}' has columns that do not match a qcorr property table "
            f"(missing: {missing or 'none'}, unexpected: {extra or 'none'}, or out of order); "
            "give tables written by 'qcorr properties' or 'qcorr liquid' of this qcorr version"
        )
    side = sidecar_path(path)
    if not side.is_file():
        raise ConfigError(
            f"table '{path}' has no JSON sidecar '{side}' (its provenance); keep the two files "
            "together"
        )
    try:
        provenance = json.loads(side.read_text(encoding="utf-8"))
    except (json.JSONDecodeError, UnicodeDecodeError) as err:
        raise ConfigError(f"sidecar '{side}' of table '{path}' is not valid JSON") from err
    if not isinstance(provenance, dict) or provenance.get("qcorr_file_kind") != FILE_KIND:
        raise ConfigError(
            f"sidecar '{side}' of table '{path}' was not written by qcorr "
            f"(qcorr_file_kind is not {FILE_KIND!r})"
        )
    if "csv_sha256" in provenance:
        digest = hashlib.sha256(path.read_bytes()).hexdigest()
        if digest != provenance["csv_sha256"] or len(frame) != provenance.get("csv_rows"):
            raise ConfigError(
                f"table '{path}' is not the table its sidecar describes ({len(frame)} rows "
                f"read, {provenance.get('csv_rows')} written; SHA-256 differs): it was cut "
                "short or edited after qcorr wrote it; make it again"
            )
    if legacy:
        frame = with_reference_columns(frame)
    for col in TEXT_COLUMNS:
        # an all-empty text column is read as float NaN: as object first, so that filling
        # it with '' does not change a float column's dtype (pandas warns on that)
        frame[col] = frame[col].astype(object).fillna("").astype(str)
    frame.attrs = provenance
    return frame


def with_reference_columns(frame: pd.DataFrame) -> pd.DataFrame:
    """A table of :data:`LEGACY_TABLE_COLUMNS` (written before the reference columns existed)
    with empty reference columns added, so that it merges with current tables (a copy)."""
    out = frame.copy()
    for col in REFERENCE_COLUMNS:
        out[col] = "" if col in TEXT_COLUMNS else np.nan
    out.attrs = dict(frame.attrs)
    return out[list(TABLE_COLUMNS)]


#: the columns that identify a row; no two rows of a merged table may share them
KEY_COLUMNS = ("system", "group", "method", "property", "temperature_K", "basis")


def merge_tables(tables: Sequence[str | os.PathLike[str] | pd.DataFrame]) -> pd.DataFrame:
    """Concatenate several tables (e.g. one per system) into one.

    Parameters
    ----------
    tables : sequence of path-like or pandas.DataFrame
        Table files (CSV with the JSON sidecar beside it) or tables in memory (with
        their provenance in ``attrs``), in the order their rows should appear.

    Returns
    -------
    pandas.DataFrame
        The rows of all tables, :data:`TABLE_COLUMNS`; ``attrs`` holds
        ``merged_from`` (per input: ``table``, the file's name, size and SHA-256 or
        ``{"name": "table N (in memory)"}``, and ``provenance``, its sidecar or attrs)
        and ``cautions`` (every input's cautions, each once, in order).

    Raises
    ------
    ConfigError
        Naming the file, if a table is unreadable or has other columns, or if two
        tables hold the same row key (system, group, method, property, temperature,
        basis), e.g. because two runs were given the same ``--system``.
    """
    if not tables:
        raise ConfigError("qcorr merge: give at least one table")
    frames = []
    sources = []
    seen: dict[tuple, str] = {}
    for number, item in enumerate(tables, start=1):
        if isinstance(item, pd.DataFrame):
            label = f"table {number} (in memory)"
            where = label
            if tuple(item.columns) == LEGACY_TABLE_COLUMNS:
                item = with_reference_columns(item)
            if tuple(item.columns) != TABLE_COLUMNS:
                raise ConfigError(
                    f"{label} has columns that do not match a qcorr property table; give tables "
                    "made by qcorr's property functions"
                )
            frame, record, provenance = item, {"name": label}, dict(item.attrs)
        else:
            label = f"'{os.fspath(item)}'"
            where = f"table {label}"
            frame = read_table(item)
            record, provenance = file_record(item), frame.attrs
        for key in frame[list(KEY_COLUMNS)].itertuples(index=False, name=None):
            if key in seen:
                raise ConfigError(
                    f"{where} repeats the row (system={key[0]!r}, group={key[1]!r}, "
                    f"method={key[2]!r}, property={key[3]!r}, temperature_K={key[4]}, "
                    f"basis={key[5]!r}) already in {seen[key]}; give each run its own --system"
                )
            seen[key] = label
        frames.append(frame)
        sources.append({"table": record, "provenance": provenance})
    merged = pd.concat(frames, ignore_index=True)[list(TABLE_COLUMNS)]
    cautions: list[str] = []
    for src in sources:
        for c in src["provenance"].get("cautions", []):
            if c not in cautions:
                cautions.append(c)
    merged.attrs = {"merged_from": sources, "cautions": cautions}
    return merged
