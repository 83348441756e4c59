# Per-subject values: each subject's mean over every significant cluster or TFCE region.


def subject_value_files(wildcards=None):
    return [f"contrasts/{c.name}/{label}/subject_values.tsv"
            for c in PLAN.study.contrasts for label in PLAN.labels_with_cluster_table()]


rule subject_values:
    input:
        subjects="contrasts/{contrast}/subjects.npz",
        result="contrasts/{contrast}/{correction}/result.npz",
        table="contrasts/{contrast}/{correction}/clusters.tsv",
        maps=contrast_map_files,
    output:
        table="contrasts/{contrast}/{correction}/subject_values.tsv",
        sidecar="contrasts/{contrast}/{correction}/subject_values.json",
    log:
        "logs/subject_values/{contrast}-{correction}.log",
    params:
        settings=contrast_settings,
    wildcard_constraints:
        correction=_alternatives(PLAN.labels_with_cluster_table()),
    resources:
        mem_mb=contrast_data_mem_mb,
        runtime=group_job_runtime,
    shell:
        "{PYTHON} -m famwise.subject_values --settings {params.settings:q} --subjects {input.subjects} "
        "--result {input.result} --out {output.table} {input.maps} > {log} 2>&1"
