# Spectrum file -> two figures per system: the spectrum with the quantum weighting
# functions over it, and the cumulative corrections against wavenumber.


rule plots:
    input:
        rules.spectrum.output[0],
    output:
        spectrum=report(
            f"<results>/plots/{{system}}_spectrum.{FIGURE_FORMAT}",
            caption="../report/spectrum_figure.rst",
            category="2. Spectra",
            subcategory="{system}",
            labels={
                "system": "{system}",
                "figure": "spectrum and weighting functions",
            },
        ),
        cumulative=report(
            f"<results>/plots/{{system}}_cumulative.{FIGURE_FORMAT}",
            caption="../report/cumulative_figure.rst",
            category="3. Where the corrections come from",
            subcategory="{system}",
            labels={"system": "{system}", "figure": "cumulative corrections"},
        ),
    log:
        "<logs>/plots/{system}.log",
    benchmark:
        "<benchmarks>/plots/{system}.tsv"
    threads: 1
    resources:
        mem_mb=get_table_mem_mb,
        runtime=10,
    params:
        temperature=get_temperature,
    shell:
        "qcorr plot {input:q} --temperature {params.temperature:q}"
        " --spectrum-figure {output.spectrum:q} --cumulative-figure {output.cumulative:q}"
        " > {log:q} 2>&1"
