# Per-subject values: each subject's mean over every significant cluster or TFCE region,
# and over each planned region of the spec.


def subject_values_settings(wildcards):
    return to_json(PLAN.subject_values_settings(wildcards.contrast))


rule subject_values:
    input:
        subjects=layout.contrast_data("{contrast}"),
        result=layout.result("{contrast}", "{correction}"),
        table=layout.cluster_table("{contrast}", "{correction}"),
        maps=contrast_map_files,
    output:
        table=layout.subject_values("{contrast}", "{correction}"),
        sidecar=layout.sidecar_of(layout.subject_values("{contrast}", "{correction}")),
    log:
        layout.log("subject_values", "{contrast}-{correction}"),
    benchmark:
        layout.job_benchmark("subject_values", "{contrast}-{correction}"),
    params:
        settings=subject_values_settings,
    wildcard_constraints:
        correction=_alternatives(PLAN.labels_with_cluster_table()),
    resources:
        mem_mb=contrast_data_mem_mb,
        runtime=group_job_runtime,
    shell:
        "{JOB} subject-values --settings {params.settings:q} --subjects {input.subjects} "
        "--result {input.result} --out {output.table} {input.maps} > {log} 2>&1"


rule planned_values:
    input:
        subjects=layout.contrast_data("{contrast}"),
        maps=contrast_map_files,
    output:
        table=layout.planned_values("{contrast}"),
        sidecar=layout.sidecar_of(layout.planned_values("{contrast}")),
    log:
        layout.log("planned_values", "{contrast}"),
    benchmark:
        layout.job_benchmark("planned_values", "{contrast}"),
    params:
        settings=subject_values_settings,
    resources:
        mem_mb=contrast_data_mem_mb,
        runtime=group_job_runtime,
    shell:
        "{JOB} planned-values --settings {params.settings:q} --subjects {input.subjects} "
        "--out {output.table} {input.maps} > {log} 2>&1"
