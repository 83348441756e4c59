# Correction stage: observed statistics (+ null shards) -> one result per correction.


rule correct_points:
    input:
        correction_input_files,
    output:
        layout.result("{contrast}", "{correction}"),
    log:
        layout.log("correct", "{contrast}-{correction}"),
    benchmark:
        layout.job_benchmark("correct", "{contrast}-{correction}"),
    params:
        settings=correction_settings,
    wildcard_constraints:
        correction=_alternatives([c.label for c in PLAN.study.inference.corrections
                                  if c.label not in PLAN.labels_with_cluster_table()]),
    resources:
        mem_mb=correct_mem_mb,
        runtime=correct_runtime,
    shell:
        "{JOB} correct --settings {params.settings:q} --contrast {wildcards.contrast} "
        "--out {output} {input} > {log} 2>&1"


rule correct_clusters:
    input:
        correction_input_files,
    output:
        result=layout.result("{contrast}", "{correction}"),
        table=layout.cluster_table("{contrast}", "{correction}"),
        sidecar=layout.cluster_sidecar("{contrast}", "{correction}"),
    log:
        layout.log("correct", "{contrast}-{correction}"),
    benchmark:
        layout.job_benchmark("correct", "{contrast}-{correction}"),
    params:
        settings=correction_settings,
    wildcard_constraints:
        correction=_alternatives(PLAN.labels_with_cluster_table()),
    resources:
        mem_mb=correct_mem_mb,
        runtime=correct_runtime,
    shell:
        "{JOB} correct --settings {params.settings:q} --contrast {wildcards.contrast} "
        "--out {output.result} {input} > {log} 2>&1"
