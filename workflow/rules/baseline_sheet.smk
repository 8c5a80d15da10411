# The input functions of the classical-baseline rules in baselines.smk (issue 13).  The
# baseline columns of the sheet are checked when it is read (qcorr.systems_sheet).
# Included by common.smk, whose 'systems' and parse_pairs these functions use.


def get_corrected_inputs(wildcards):
    """The spectrum, the energy file (if any) and the 2PT table (liquids) of a system."""
    row = systems.loc[wildcards.system]
    inputs = {"spectrum": f"<results>/spectra/{wildcards.system}.nc"}
    if row["energy_file"]:
        inputs["energy"] = row["energy_file"]
    if bool(row["liquid"]):
        inputs["two_phase"] = f"<results>/tables/{wildcards.system}_2pt.csv"
    return inputs


def get_corrected_options(wildcards, input):
    """'qcorr corrected' options from the sheet row, as separate tokens (quoted by the rule);
    the 2PT table's path is the rule's input (path variables resolved)."""
    row = systems.loc[wildcards.system]
    options = ["--system", wildcards.system, "--ensemble", row["ensemble"]]
    if row["energy_file"]:
        options += [
            "--energy-file",
            row["energy_file"],
            "--energy-format",
            row["energy_format"],
        ]
        options += ["--energy-start", f"{float(row['energy_start_ps']):g}"]
        if row["energy_format"] == "lammps-log" and row["lammps_units"]:
            options += ["--lammps-units", row["lammps_units"]]
    if "pressure_bar" in row and pd.notna(row["pressure_bar"]):
        options += ["--pressure", f"{float(row['pressure_bar']):g}"]
    if hasattr(input, "two_phase"):
        options += ["--two-phase-table", input.two_phase]
    for name, value in parse_pairs(row["classical_values"], "classical_values"):
        options += ["--classical-value", f"{name}={value}"]
    for name, value in parse_pairs(row["reference_values"], "reference_values"):
        options += ["--reference", f"{name}={value}"]
    return options


def get_series_tables(wildcards):
    members = systems[systems["series"] == wildcards.series].index
    return [f"<results>/tables/{sid}_corrected.csv" for sid in members]


def get_pair_tables(wildcards):
    gas = systems.loc[wildcards.system, "gas_system"]
    return {
        "liquid": f"<results>/tables/{wildcards.system}_corrected.csv",
        "gas": f"<results>/tables/{gas}_corrected.csv",
    }


def get_pair_options(wildcards):
    row = systems.loc[wildcards.system]
    options = ["--name", f"{wildcards.system}+{row['gas_system']}"]
    if row["vaporisation_reference"]:
        options += ["--reference", row["vaporisation_reference"]]
    return options
