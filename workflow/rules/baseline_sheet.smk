# The systems sheet's classical-baseline columns (issue 13): their checks, run when the
# sheet is loaded (check_baseline_cells per row, check_pairs_and_series across rows),
# and the input functions of the rules in baselines.smk.  Included by common.smk, whose
# helpers (sheet_error, parse_pairs, SAFE_NAME) and 'systems' these functions use.


BASELINE_PROPERTIES = (
    "heat_capacity",
    "isobaric_heat_capacity",
    "energy",
    "enthalpy",
    "helmholtz_free_energy",
    "gibbs_free_energy",
)


def check_reference(text, column, where, item):
    """'VALUE[,SE]:SOURCE' with numbers and a non-empty source."""
    number, colon, source = text.partition(":")
    if not colon or not source.strip():
        raise sheet_error(
            where,
            column,
            f"item {item!r} is not VALUE[,SE]:SOURCE (the source is required)",
        )
    for part in number.split(","):
        try:
            float(part)
        except ValueError:
            raise sheet_error(
                where, column, f"item {item!r}: {part.strip()!r} is not a number"
            ) from None


def check_baseline_cells(row, where):
    """The classical-baseline columns (issue 13) of one validated row."""
    if row["energy_file"] and not row["energy_format"]:
        raise sheet_error(where, "energy_format", "give the format of energy_file")
    if row["energy_format"] and not row["energy_file"]:
        raise sheet_error(
            where, "energy_file", "energy_format is set but no file is given"
        )
    needs = [
        c for c in ("energy_file", "series", "gas_system", "classical_values") if row[c]
    ]
    if needs and not row["ensemble"]:
        raise sheet_error(
            where,
            "ensemble",
            f"declare the ensemble the run sampled (needed by {needs[0]})",
        )
    if row["series"] and not SAFE_NAME.match(row["series"]):
        raise sheet_error(
            where, "series", f"{row['series']!r}: use letters, digits, '_' and '-' only"
        )
    for name, value in parse_pairs(row["classical_values"], "classical_values", where):
        if name not in BASELINE_PROPERTIES:
            raise sheet_error(
                where,
                "classical_values",
                f"{name!r} is not one of {', '.join(BASELINE_PROPERTIES)}",
            )
        parse_number(value, "classical_values", where)
    for name, value in parse_pairs(row["reference_values"], "reference_values", where):
        check_reference(value, "reference_values", where, f"{name}={value}")
    if row["vaporisation_reference"]:
        if not row["gas_system"]:
            raise sheet_error(
                where,
                "vaporisation_reference",
                "needs gas_system (the pair it refers to)",
            )
        check_reference(
            row["vaporisation_reference"],
            "vaporisation_reference",
            where,
            row["vaporisation_reference"],
        )


def parse_number(text, column, where):
    try:
        return float(text)
    except ValueError:
        raise sheet_error(where, column, f"{text!r} is not a number") from None


def check_pairs_and_series(systems):
    """Cross-row checks: a series has at least two runs and is named unlike any system; a
    gas_system names another row of the sheet with an energy file."""
    for name, members in systems[systems["series"] != ""].groupby("series"):
        where = members["_where"].iloc[0]
        if len(members) < 2:
            raise sheet_error(
                where, "series", f"series {name!r} has one run; give it two or more"
            )
        if name in systems.index:
            raise sheet_error(
                where, "series", f"series {name!r} has the name of a system; rename it"
            )
    for sid, row in systems[systems["gas_system"] != ""].iterrows():
        gas = row["gas_system"]
        if gas not in systems.index or gas == sid:
            raise sheet_error(
                row["_where"],
                "gas_system",
                f"{gas!r} is not the id of another system row",
            )
        if not systems.loc[gas, "ensemble"]:
            raise sheet_error(
                row["_where"], "gas_system", f"system {gas!r} has no ensemble declared"
            )


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
    for name, value in parse_pairs(
        row["classical_values"], "classical_values", row["_where"]
    ):
        options += ["--classical-value", f"{name}={value}"]
    for name, value in parse_pairs(
        row["reference_values"], "reference_values", row["_where"]
    ):
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
