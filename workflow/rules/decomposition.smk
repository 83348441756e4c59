# Per-subject stage: subject input -> condition-wise time-frequency maps.


rule decompose:
    input:
        subject_input_files,
    output:
        maps=layout.tf_map("{subject}"),
        info=layout.tf_sidecar("{subject}"),
    log:
        layout.log("decompose", "{subject}"),
    benchmark:
        layout.job_benchmark("decompose", "{subject}"),
    params:
        settings=decompose_settings,
    resources:
        mem_mb=decompose_mem_mb,
        runtime=decompose_runtime,
    shell:
        "{JOB} decompose --subject {wildcards.subject} --settings {params.settings:q} "
        "--out {output.maps} > {log} 2>&1"


rule subjects_table:
    input:
        [layout.tf_sidecar(subject) for subject in PLAN.subjects],
    output:
        layout.SUBJECTS_TABLE,
    log:
        layout.log("subjects_table", "all"),
    benchmark:
        layout.job_benchmark("subjects_table", "all"),
    params:
        settings=subjects_table_settings,
    resources:
        mem_mb=small_job_mem_mb,
        runtime=small_job_runtime,
    shell:
        "{JOB} subjects-table --settings {params.settings:q} --out {output} {input} > {log} 2>&1"


rule channel_graph:
    input:
        first_subject_map,
        PLAN.graph_inputs(),
    output:
        layout.CHANNEL_GRAPH,
    log:
        layout.log("channel_graph", "all"),
    benchmark:
        layout.job_benchmark("channel_graph", "all"),
    params:
        settings=graph_settings,
    resources:
        mem_mb=small_job_mem_mb,
        runtime=small_job_runtime,
    shell:
        "{JOB} channel-graph --settings {params.settings:q} --maps {input[0]} --out {output} > {log} 2>&1"
