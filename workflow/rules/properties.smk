# Spectrum file -> property tables (harmonic corrections for every system, 2PT for
# the systems the sheet marks as liquids) -> one merged table over all systems.


rule harmonic_properties:
    input:
        rules.spectrum.output[0],
    output:
        table="<results>/tables/{system}_harmonic.csv",
        sidecar="<results>/tables/{system}_harmonic.json",
    log:
        "<logs>/harmonic_properties/{system}.log",
    benchmark:
        "<benchmarks>/harmonic_properties/{system}.tsv"
    threads: 1
    resources:
        mem_mb=get_table_mem_mb,
        runtime=10,
    params:
        options=get_properties_options,
    shell:
        "qcorr properties {input:q} {params.options:q} --output {output.table:q} > {log:q} 2>&1"


rule liquid_properties:
    input:
        rules.spectrum.output[0],
    output:
        table="<results>/tables/{system}_2pt.csv",
        sidecar="<results>/tables/{system}_2pt.json",
    log:
        "<logs>/liquid_properties/{system}.log",
    benchmark:
        "<benchmarks>/liquid_properties/{system}.tsv"
    wildcard_constraints:
        system=alternatives(LIQUID_IDS),
    threads: 1
    resources:
        mem_mb=get_table_mem_mb,
        runtime=10,
    params:
        options=get_liquid_options,
    shell:
        "qcorr liquid {input:q} {params.options:q} --output {output.table:q} > {log:q} 2>&1"


rule merge_tables:
    input:
        get_tables,
    output:
        table=report(
            "<results>/corrected_properties.csv",
            caption="../report/merged_table.rst",
            category="1. Corrected properties",
            labels={"table": "all systems", "format": "CSV (full precision)"},
        ),
        sidecar="<results>/corrected_properties.json",
        schema="<results>/corrected_properties.schema.json",
        summary=report(
            "<results>/corrected_properties.html",
            caption="../report/summary_table.rst",
            category="1. Corrected properties",
            labels={"table": "all systems", "format": "table (rounded)"},
        ),
        summary_markdown="<results>/corrected_properties.md",
    log:
        "<logs>/merge_tables/merge.log",
    benchmark:
        "<benchmarks>/merge_tables/merge.tsv"
    localrule: True
    threads: 1
    resources:
        mem_mb=get_table_mem_mb,
        runtime=10,
    shell:
        "qcorr merge {input:q} --output {output.table:q}"
        " --summary-html {output.summary:q} --summary-markdown {output.summary_markdown:q}"
        " > {log:q} 2>&1"
