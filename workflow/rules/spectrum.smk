# Trajectory -> spectrum file (NetCDF): one job per system, or one job per frame
# block plus a combining job when the sheet asks for blocks > 1.


rule spectrum:
    input:
        topology=get_topology,
        trajectory=get_trajectories,
    output:
        "<results>/spectra/{system}.nc",
    log:
        "<logs>/spectrum/{system}.log",
    benchmark:
        "<benchmarks>/spectrum/{system}.tsv"
    wildcard_constraints:
        system=alternatives(SINGLE_IDS),
    threads: 2
    resources:
        mem_mb=get_spectrum_mem_mb,
        runtime=get_spectrum_runtime,
    params:
        options=get_spectrum_options,
    shell:
        "qcorr spectrum --topology {input.topology:q} --trajectory {input.trajectory:q}"
        " {params.options:q} --threads {threads}"
        " --output {output:q} > {log:q} 2>&1"


rule spectrum_block:
    input:
        topology=get_topology,
        trajectory=get_trajectories,
    output:
        temp(
            "<results>/spectrum_blocks/{system}/block-{block_index}-of-{block_count}.nc"
        ),
    log:
        "<logs>/spectrum_block/{system}/block-{block_index}-of-{block_count}.log",
    benchmark:
        "<benchmarks>/spectrum_block/{system}/block-{block_index}-of-{block_count}.tsv"
    wildcard_constraints:
        system=alternatives(BLOCKED_IDS),
    threads: 2
    resources:
        mem_mb=get_spectrum_mem_mb,
        runtime=get_spectrum_runtime,
    params:
        options=get_spectrum_options,
    shell:
        "qcorr spectrum --topology {input.topology:q} --trajectory {input.trajectory:q}"
        " {params.options:q} --block {wildcards.block_index}-of-{wildcards.block_count}"
        " --threads {threads} --output {output:q} > {log:q} 2>&1"


rule combine_blocks:
    input:
        get_block_spectra,
    output:
        "<results>/spectra/{system}.nc",
    log:
        "<logs>/combine_blocks/{system}.log",
    benchmark:
        "<benchmarks>/combine_blocks/{system}.tsv"
    wildcard_constraints:
        system=alternatives(BLOCKED_IDS),
    threads: 1
    resources:
        mem_mb=get_table_mem_mb,
        runtime=10,
    shell:
        "qcorr combine {input:q} --output {output:q} > {log:q} 2>&1"
