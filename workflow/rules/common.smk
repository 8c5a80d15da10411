# Validation of the configuration and the systems sheet, and the input functions
# (get_*) the rules call.  Everything here runs when the workflow is loaded, so a
# bad sheet stops the run before any job starts, with one message that names the
# sheet row and column at fault.

import io
import re
from pathlib import Path

import pandas as pd
import yaml
from snakemake.exceptions import WorkflowError
from snakemake.utils import validate

validate(config, schema="../schemas/config.schema.yaml")

# The schema of one sheet row, read once to know the columns and their types.
with open(workflow.source_path("../schemas/systems.schema.yaml")) as schema_file:
    SYSTEMS_SCHEMA = yaml.safe_load(schema_file)
SYSTEMS_COLUMNS = SYSTEMS_SCHEMA["properties"]

SAFE_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_-]*$")
TRUE_WORDS = {"true", "yes", "1"}
FALSE_WORDS = {"false", "no", "0"}


def sheet_error(where, column, message):
    """The one-line error for a bad sheet cell: names the sheet, the row and the column."""
    return WorkflowError(
        f"systems sheet {config['systems']!r}, {where}, column {column!r}: {message}"
    )


def read_sheet_text(path):
    """Return (text without comment lines, sheet line number of every data row)."""
    try:
        lines = Path(path).read_text(encoding="utf-8").splitlines()
    except FileNotFoundError:
        raise WorkflowError(
            f"config key 'systems': the systems sheet {path!r} does not exist "
            "(give a path relative to the working directory)"
        ) from None
    kept, line_numbers = [], []
    for number, line in enumerate(lines, start=1):
        if not line.strip() or line.lstrip().startswith("#"):
            continue
        kept.append(line)
        line_numbers.append(number)
    if not kept:
        raise WorkflowError(
            f"systems sheet {path!r} is empty: add a header line and one row per system"
        )
    return "".join(f"{line}\n" for line in kept), line_numbers[1:]


def convert_cell(text, column, where):
    """Convert one non-empty cell to the type the schema gives its column."""
    kind = SYSTEMS_COLUMNS[column].get("type", "string")
    try:
        if kind == "integer":
            value = float(text)
            if not value.is_integer():
                raise ValueError
            return int(value)
        if kind == "number":
            return float(text)
    except ValueError:
        raise sheet_error(
            where,
            column,
            f"{text!r} is not a{'n integer' if kind == 'integer' else ' number'}",
        ) from None
    if kind == "boolean":
        if text.lower() in TRUE_WORDS:
            return True
        if text.lower() in FALSE_WORDS:
            return False
        raise sheet_error(where, column, f"{text!r} is not true or false")
    return text


def validate_row(record, where):
    """Validate one row with the sheet schema (filling defaults); name the column at fault."""
    frame = pd.DataFrame([record])
    try:
        validate(frame, schema="../schemas/systems.schema.yaml")
    except WorkflowError as err:
        cause = err.__context__
        message = getattr(cause, "message", str(err))
        path = list(getattr(cause, "absolute_path", []) or [])
        column = path[0] if path else None
        if column is None:
            found = re.search(r"'([^']+)' is a required property", message)
            column = found.group(1) if found else "?"
        kind = getattr(cause, "validator", "")
        limit = getattr(cause, "validator_value", None)
        if kind == "required":
            message = "a value is required (the cell is empty or the column is missing)"
        elif kind in ("exclusiveMinimum", "minimum", "maximum"):
            relation = {"exclusiveMinimum": ">", "minimum": ">=", "maximum": "<="}[kind]
            message = f"{getattr(cause, 'instance', '?')!r} is out of range: it must be {relation} {limit}"
        elif kind == "enum":
            message = f"{getattr(cause, 'instance', '?')!r} is not one of {', '.join(map(repr, limit))}"
        if column == "system" and "does not match" in message:
            message = (
                f"{record.get('system')!r} is not a safe identifier: use letters, digits, "
                "'_' and '-' only (first a letter or digit, at most 80 characters)"
            )
        raise sheet_error(where, column, message) from None
    return frame.iloc[0].to_dict()


def split_items(cell):
    """Items of a list-valued cell, separated by ';' (empty items dropped)."""
    return [item.strip() for item in str(cell).split(";") if item.strip()]


def parse_pairs(cell, column, where, separator="="):
    """'NAME=VALUE; ...' -> list of (name, value) with non-empty name and value."""
    pairs = []
    for item in split_items(cell):
        name, sep, value = item.partition(separator)
        if not sep or not name.strip() or not value.strip():
            raise sheet_error(
                where, column, f"item {item!r} is not of the form NAME{separator}VALUE"
            )
        pairs.append((name.strip(), value.strip()))
    return pairs


def parse_positive_number(text, column, where, allow_zero=False):
    try:
        value = float(text)
    except ValueError:
        raise sheet_error(where, column, f"{text!r} is not a number") from None
    if (
        not (value >= 0 if allow_zero else value > 0)
        or value != value
        or value == float("inf")
    ):
        raise sheet_error(
            where, column, f"{text!r} must be {'>= 0' if allow_zero else '> 0'}"
        )
    return value


def check_cells(row, where):
    """Check the structure of the list-valued cells of one validated row."""
    groups = parse_pairs(row["groups"], "groups", where)
    names = [name for name, _ in groups]
    for name in names:
        if not SAFE_NAME.match(name):
            raise sheet_error(
                where,
                "groups",
                f"group name {name!r}: use letters, digits, '_' and '-' only",
            )
        if name == "total":
            raise sheet_error(
                where,
                "groups",
                "the group name 'total' is reserved (every atom with mass is always analysed as 'total')",
            )
    if len(set(names)) != len(names):
        raise sheet_error(where, "groups", "a group name appears twice")
    known = set(names) | {"total"}
    for column in ("constraints", "constraints_per_molecule"):
        for name, count in parse_pairs(row[column], column, where):
            if name not in known:
                raise sheet_error(
                    where,
                    column,
                    f"group {name!r} is not defined in column 'groups' (nor 'total')",
                )
            if not count.isdigit():
                raise sheet_error(
                    where,
                    column,
                    f"count {count!r} of group {name!r} is not a whole number >= 0",
                )
    parse_pairs(row["reader_options"], "reader_options", where)
    for atom_type, mass in parse_pairs(row["masses"], "masses", where):
        parse_positive_number(mass, "masses", where)
    for temperature in split_items(row["temperatures_K"]):
        parse_positive_number(temperature, "temperatures_K", where)
    for key, value in parse_pairs(row["md_values"], "md_values", where):
        group, colon, prop = key.partition(":")
        if not colon or group not in known or not prop:
            raise sheet_error(
                where,
                "md_values",
                f"item key {key!r} is not GROUP:PROPERTY with a defined group",
            )
        try:
            float(value)
        except ValueError:
            raise sheet_error(
                where, "md_values", f"value {value!r} of {key!r} is not a number"
            ) from None
    for group, numbers in parse_pairs(
        row["frozen_bond_wavenumbers"], "frozen_bond_wavenumbers", where
    ):
        if group not in known:
            raise sheet_error(
                where,
                "frozen_bond_wavenumbers",
                f"group {group!r} is not defined in column 'groups'",
            )
        for number in numbers.split(","):
            parse_positive_number(number.strip(), "frozen_bond_wavenumbers", where)
    if "stop" in row and pd.notna(row.get("stop")) and row["stop"] <= row["start"]:
        raise sheet_error(
            where,
            "stop",
            f"stop ({row['stop']}) must be larger than start ({row['start']})",
        )


def check_files(row, where):
    """The topology and every trajectory file must exist."""
    if not Path(row["topology"]).is_file():
        raise sheet_error(where, "topology", f"file {row['topology']!r} does not exist")
    trajectories = split_items(row["trajectory"])
    if not trajectories:
        raise sheet_error(where, "trajectory", "no trajectory file given")
    for path in trajectories:
        if not Path(path).is_file():
            raise sheet_error(where, "trajectory", f"file {path!r} does not exist")


def check_selections(row, where):
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
    except Exception as err:  # MDAnalysis raises many types for unreadable files
        raise sheet_error(
            where,
            "topology",
            f"MDAnalysis cannot read {row['topology']!r}: {err}".splitlines()[0],
        ) from None
    for name, selection in groups:
        try:
            count = universe.select_atoms(selection).n_atoms
        except MDAnalysis.exceptions.SelectionError as err:
            raise sheet_error(
                where,
                "groups",
                f"selection of group {name!r} is invalid: {err}".splitlines()[0],
            ) from None
        except Exception:
            # needs data the topology alone lacks (e.g. coordinates); 'qcorr spectrum' checks it
            continue
        if count == 0:
            raise sheet_error(
                where,
                "groups",
                f"selection {selection!r} of group {name!r} matches no atom of {row['topology']!r}",
            )


def load_systems(path):
    """Read, type, validate and check the systems sheet; return a DataFrame indexed by system."""
    text, line_numbers = read_sheet_text(path)
    raw = pd.read_csv(io.StringIO(text), sep="\t", dtype=str, keep_default_na=False)
    header = [column.strip() for column in raw.columns]
    for column in header:
        if column not in SYSTEMS_COLUMNS:
            raise sheet_error(
                "header row",
                column,
                f"unknown column; allowed columns: {', '.join(SYSTEMS_COLUMNS)}",
            )
    if len(set(header)) != len(header):
        raise sheet_error("header row", "?", "a column name appears twice")
    raw.columns = header
    if raw.empty:
        raise WorkflowError(f"systems sheet {path!r} has a header but no system rows")
    rows = []
    for index, (line_number, cells) in enumerate(
        zip(line_numbers, raw.to_dict("records"))
    ):
        label = str(cells.get("system", "")).strip()
        named = f", system {label!r}" if label else ""
        where = f"row {index + 1} (line {line_number}{named})"
        record = {}
        for column, cell in cells.items():
            text = str(cell).strip()
            if text:
                record[column] = convert_cell(text, column, where)
        row = validate_row(record, where)
        check_cells(row, where)
        check_files(row, where)
        row["_where"] = where
        rows.append(row)
    systems = pd.DataFrame(rows).set_index("system", drop=False)
    duplicated = systems.index[systems.index.duplicated()]
    if len(duplicated):
        where = systems.loc[duplicated[0], "_where"].iloc[-1]
        raise sheet_error(
            where, "system", f"the id {duplicated[0]!r} is used by more than one row"
        )
    if config["spectrum"]["check_selections"] and workflow.is_main_process:
        for _, row in systems.iterrows():
            check_selections(row, row["_where"])
    return systems


systems = load_systems(config["systems"])
SYSTEM_IDS = list(systems.index)
BLOCKED_IDS = [sid for sid in SYSTEM_IDS if int(systems.loc[sid, "blocks"]) > 1]
SINGLE_IDS = [sid for sid in SYSTEM_IDS if int(systems.loc[sid, "blocks"]) == 1]
LIQUID_IDS = [sid for sid in SYSTEM_IDS if bool(systems.loc[sid, "liquid"])]
FIGURE_FORMAT = config["plots"]["format"]
NO_MATCH = "(?!x)x"  # a regular expression that matches nothing


def alternatives(ids):
    """A wildcard constraint that matches exactly these system ids."""
    return "|".join(re.escape(sid) for sid in ids) if ids else NO_MATCH


wildcard_constraints:
    system=alternatives(SYSTEM_IDS),
    block_index=r"[0-9]+",
    block_count=r"[0-9]+",


# ---------------------------------------------------------------- input functions


def get_topology(wildcards):
    return systems.loc[wildcards.system, "topology"]


def get_trajectories(wildcards):
    return split_items(systems.loc[wildcards.system, "trajectory"])


def get_temperature(wildcards):
    return f"{float(systems.loc[wildcards.system, 'temperature_K']):g}"


def get_spectrum_options(wildcards):
    """Every 'qcorr spectrum' option from the sheet row, as separate tokens (quoted by the rule)."""
    row = systems.loc[wildcards.system]
    options = ["--temperature", f"{float(row['temperature_K']):g}"]
    options += ["--start", str(int(row["start"])), "--step", str(int(row["step"]))]
    if "stop" in row and pd.notna(row["stop"]):
        options += ["--stop", str(int(row["stop"]))]
    options += ["--segment-ps", f"{float(row['segment_ps']):g}"]
    options += ["--overlap", f"{float(config['spectrum']['overlap']):g}"]
    options += ["--taper", config["spectrum"]["taper"]]
    options += ["--velocities-from", row["velocities_from"]]
    for column, option in (
        ("topology_format", "--topology-format"),
        ("trajectory_format", "--trajectory-format"),
    ):
        if row[column]:
            options += [option, row[column]]
    if row["lammps_units"]:
        options += ["--lammps-units", row["lammps_units"]]
    for column, option in (
        ("groups", "--group"),
        ("constraints", "--constraints"),
        ("constraints_per_molecule", "--constraints-per-molecule"),
        ("reader_options", "--reader-option"),
        ("masses", "--mass"),
    ):
        for name, value in parse_pairs(row[column], column, row["_where"]):
            options += [option, f"{name}={value}"]
    if bool(row["exclude_massless"]):
        options.append("--exclude-massless")
    if bool(row["liquid"]):
        options.append("--molecular")
    return options


def get_block_count(wildcards):
    return int(systems.loc[wildcards.system, "blocks"])


def get_block_spectra(wildcards):
    count = get_block_count(wildcards)
    return [
        f"<results>/spectrum_blocks/{wildcards.system}/block-{index}-of-{count}.nc"
        for index in range(1, count + 1)
    ]


def get_properties_options(wildcards):
    row = systems.loc[wildcards.system]
    options = ["--system", wildcards.system]
    temperatures = [float(row["temperature_K"])] + [
        float(t) for t in split_items(row["temperatures_K"])
    ]
    options += ["--temperatures"] + [f"{t:g}" for t in dict.fromkeys(temperatures)]
    for key, value in parse_pairs(row["md_values"], "md_values", row["_where"]):
        options += ["--md-value", f"{key}={value}"]
    for group, numbers in parse_pairs(
        row["frozen_bond_wavenumbers"], "frozen_bond_wavenumbers", row["_where"]
    ):
        options += ["--frozen-bond-wavenumbers", f"{group}={numbers.replace(' ', '')}"]
    return options


def get_liquid_options(wildcards):
    row = systems.loc[wildcards.system]
    options = [
        "--system",
        wildcards.system,
        "--symmetry-number",
        str(int(row["symmetry_number"])),
        "--hard-sphere-entropy",
        str(row["hard_sphere_entropy"]),
        "--rotational-fluidicity",
        str(row["rotational_fluidicity"]),
        "--diffusion-from",
        str(row["diffusion_from"]),
        "--gas-volume",
        str(row["gas_volume"]),
    ]
    temperatures = [float(t) for t in split_items(row["temperatures_K"])]
    if temperatures:
        options += ["--temperatures"] + [f"{t:g}" for t in dict.fromkeys(temperatures)]
    for group, numbers in parse_pairs(
        row["frozen_bond_wavenumbers"], "frozen_bond_wavenumbers", row["_where"]
    ):
        options += ["--frozen-bond-wavenumbers", f"{group}={numbers.replace(' ', '')}"]
    return options


def get_tables(wildcards):
    """Every per-system table that goes into the merged table."""
    tables = [f"<results>/tables/{sid}_harmonic.csv" for sid in SYSTEM_IDS]
    tables += [f"<results>/tables/{sid}_2pt.csv" for sid in LIQUID_IDS]
    return tables


def get_final_output():
    figure = FIGURE_FORMAT
    outputs = [
        "<results>/corrected_properties.csv",
        "<results>/corrected_properties.json",
        "<results>/corrected_properties.html",
    ]
    for sid in SYSTEM_IDS:
        outputs += [
            f"<results>/plots/{sid}_spectrum.{figure}",
            f"<results>/plots/{sid}_cumulative.{figure}",
        ]
    return outputs


# ---------------------------------------------------------------- resources
# Sized from the input: the spectrum is computed in one streaming pass, so memory
# grows with one segment of frames (bounded here by the trajectory size) and run
# time with the amount of data read.  A retry (--retries) gets more of both.


def get_spectrum_mem_mb(wildcards, input, attempt):
    return int((1000 + min(2 * input.size_mb, 15000)) * attempt)


def get_spectrum_runtime(wildcards, input, attempt):
    blocks = get_block_count(wildcards)
    return int((10 + input.size_mb / (100 * blocks)) * attempt)


def get_table_mem_mb(wildcards, input, attempt):
    return int((1000 + 4 * input.size_mb) * attempt)
