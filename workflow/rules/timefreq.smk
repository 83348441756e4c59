# Per-subject stage: subject input -> condition-wise time-frequency maps.


rule decompose:
    input:
        subject_input_files,
    output:
        maps="tf/sub-{subject}.npz",
        info="tf/sub-{subject}.json",
    log:
        "logs/decompose/{subject}.log",
    benchmark:
        "logs/decompose/{subject}.benchmark.tsv",
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
        expand("tf/sub-{subject}.json", subject=PLAN.subjects),
    output:
        "subjects.tsv",
    log:
        "logs/subjects_table/all.log",
    benchmark:
        "logs/subjects_table/all.benchmark.tsv",
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
        "channels/graph.npz",
    log:
        "logs/channel_graph/all.log",
    benchmark:
        "logs/channel_graph/all.benchmark.tsv",
    params:
        settings=graph_settings,
    resources:
        mem_mb=small_job_mem_mb,
        runtime=small_job_runtime,
    shell:
        "{JOB} channel-graph --settings {params.settings:q} --maps {input[0]} --out {output} > {log} 2>&1"
