# Validation of the configuration and the systems sheet, and the input functions
# (get_*) the rules call.  Everything here runs when the workflow is loaded, so a
# bad sheet stops the run before any job starts, with one message that names the
# sheet row and column at fault (qcorr.systems_sheet reads the sheet with pandas and
# checks every row against ../schemas/systems.schema.yaml with Snakemake's validate).

import re

import pandas as pd
from snakemake.exceptions import WorkflowError
from snakemake.utils import validate

from qcorr.systems_sheet import SheetError, parse_pairs, read_systems_sheet, split_items

validate(config, schema="../schemas/config.schema.yaml")


def load_systems(path):
    """The systems sheet as a DataFrame indexed by system id (a WorkflowError if it is bad)."""
    try:
        return read_systems_sheet(
            path,
            workflow.source_path("../schemas/systems.schema.yaml"),
            validate,
            # topologies (selections) and, for blocks > 1, trajectories (block count
            # against segment count) are opened once, in the main process, not in every job
            check_selections=workflow.is_main_process
            and config["spectrum"]["check_selections"],
            check_blocks=workflow.is_main_process,
            overlap=float(config["spectrum"]["overlap"]),
            taper=config["spectrum"]["taper"],
        )
    except SheetError as err:
        raise WorkflowError(str(err)) from None


# the input functions of the classical-baseline rules (issue 13)
include: "baseline_sheet.smk"


systems = load_systems(config["systems"])
SYSTEM_IDS = list(systems.index)
BLOCKED_IDS = [sid for sid in SYSTEM_IDS if int(systems.loc[sid, "blocks"]) > 1]
SINGLE_IDS = [sid for sid in SYSTEM_IDS if int(systems.loc[sid, "blocks"]) == 1]
LIQUID_IDS = [sid for sid in SYSTEM_IDS if bool(systems.loc[sid, "liquid"])]
CORRECTED_IDS = [sid for sid in SYSTEM_IDS if systems.loc[sid, "ensemble"]]
SERIES_NAMES = sorted({name for name in systems["series"] if name})
PAIR_IDS = [sid for sid in SYSTEM_IDS if systems.loc[sid, "gas_system"]]
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


def _missing(value):
    """True for an empty optional cell (pandas NA)."""
    return bool(pd.isna(value))


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
    if not _missing(row["stop"]):
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
        ("position_precision_A", "--position-precision"),
        ("frame_spacing_ps", "--frame-spacing"),
    ):
        if not _missing(row[column]):
            options += [option, f"{float(row[column]):g}"]
    if bool(row["allow_temperature_mismatch"]):
        options.append("--allow-temperature-mismatch")
    for column, option in (
        ("groups", "--group"),
        ("constraints", "--constraints"),
        ("constraints_per_molecule", "--constraints-per-molecule"),
        ("reader_options", "--reader-option"),
        ("masses", "--mass"),
    ):
        for name, value in parse_pairs(row[column], column):
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
    for key, value in parse_pairs(row["md_values"], "md_values"):
        options += ["--md-value", f"{key}={value}"]
    for group, numbers in parse_pairs(
        row["frozen_bond_wavenumbers"], "frozen_bond_wavenumbers"
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
    tables += [f"<results>/tables/{sid}_corrected.csv" for sid in CORRECTED_IDS]
    tables += [f"<results>/series/{name}.csv" for name in SERIES_NAMES]
    tables += [f"<results>/vaporisation/{sid}.csv" for sid in PAIR_IDS]
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
    outputs += [f"<results>/plots/series_{name}.{figure}" for name in SERIES_NAMES]
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
