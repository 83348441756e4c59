# Per-subject values: each subject's mean over every significant cluster or TFCE region,
# and over each planned region of the spec.
import json as _json_values


def subject_value_files(wildcards=None):
    files = [f"contrasts/{c.name}/{label}/subject_values.tsv"
             for c in PLAN.study.contrasts for label in PLAN.labels_with_cluster_table()]
    if PLAN.study.planned_regions:
        files += [f"contrasts/{c.name}/planned_values.tsv" for c in PLAN.study.contrasts]
    return files


def planned_settings(wildcards):
    settings = _json_values.loads(PLAN.contrast_settings(wildcards.contrast))
    settings["regions"] = [r.model_dump(mode="json") for r in PLAN.study.planned_regions]
    return _json_values.dumps(settings, sort_keys=True, separators=(",", ":"))


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
        "{PYTHON} -m famwise.subject_values clusters --settings {params.settings:q} --subjects {input.subjects} "
        "--result {input.result} --out {output.table} {input.maps} > {log} 2>&1"


rule planned_values:
    input:
        subjects="contrasts/{contrast}/subjects.npz",
        maps=contrast_map_files,
    output:
        table="contrasts/{contrast}/planned_values.tsv",
        sidecar="contrasts/{contrast}/planned_values.json",
    log:
        "logs/planned_values/{contrast}.log",
    params:
        settings=planned_settings,
    resources:
        mem_mb=contrast_data_mem_mb,
        runtime=group_job_runtime,
    shell:
        "{PYTHON} -m famwise.subject_values planned --settings {params.settings:q} --subjects {input.subjects} "
        "--out {output.table} {input.maps} > {log} 2>&1"
