# Classical baselines measured from the runs + harmonic corrections = corrected
# observables (issue 13): one table per system that declares its ensemble, one per
# temperature series, one per liquid-gas pair.  All go into the merged table.


rule corrected_observables:
    input:
        unpack(get_corrected_inputs),
    output:
        table="<results>/tables/{system}_corrected.csv",
        sidecar="<results>/tables/{system}_corrected.json",
    log:
        "<logs>/corrected_observables/{system}.log",
    benchmark:
        "<benchmarks>/corrected_observables/{system}.tsv"
    wildcard_constraints:
        system=alternatives(CORRECTED_IDS),
    threads: 1
    resources:
        mem_mb=get_table_mem_mb,
        runtime=10,
    params:
        options=get_corrected_options,
    shell:
        "qcorr corrected {input.spectrum:q} {params.options:q} --output {output.table:q}"
        " > {log:q} 2>&1"


rule temperature_series:
    input:
        get_series_tables,
    output:
        table="<results>/series/{series}.csv",
        sidecar="<results>/series/{series}.json",
        figure=report(
            f"<results>/plots/series_{{series}}.{FIGURE_FORMAT}",
            caption="../report/series_figure.rst",
            category="1. Corrected properties",
            subcategory="temperature series",
            labels={
                "series": "{series}",
                "figure": "heat capacity against temperature",
            },
        ),
    log:
        "<logs>/temperature_series/{series}.log",
    benchmark:
        "<benchmarks>/temperature_series/{series}.tsv"
    wildcard_constraints:
        series=alternatives(SERIES_NAMES),
    threads: 1
    resources:
        mem_mb=get_table_mem_mb,
        runtime=10,
    params:
        name="{series}",
    shell:
        "qcorr series {input:q} --name {params.name:q} --output {output.table:q}"
        " --figure {output.figure:q} > {log:q} 2>&1"


rule vaporisation:
    input:
        unpack(get_pair_tables),
    output:
        table="<results>/vaporisation/{system}.csv",
        sidecar="<results>/vaporisation/{system}.json",
    log:
        "<logs>/vaporisation/{system}.log",
    benchmark:
        "<benchmarks>/vaporisation/{system}.tsv"
    wildcard_constraints:
        system=alternatives(PAIR_IDS),
    threads: 1
    resources:
        mem_mb=get_table_mem_mb,
        runtime=10,
    params:
        options=get_pair_options,
    shell:
        "qcorr vaporisation --liquid {input.liquid:q} --gas {input.gas:q}"
        " {params.options:q} --output {output.table:q} > {log:q} 2>&1"
