# Correction stage: observed statistics (+ null shards) -> one result per correction.


rule correct_points:
    input:
        correction_input_files,
    output:
        "contrasts/{contrast}/{correction}/result.npz",
    log:
        "logs/correct/{contrast}-{correction}.log",
    benchmark:
        "logs/correct/{contrast}-{correction}.benchmark.tsv",
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
        result="contrasts/{contrast}/{correction}/result.npz",
        table="contrasts/{contrast}/{correction}/clusters.tsv",
    log:
        "logs/correct/{contrast}-{correction}.log",
    benchmark:
        "logs/correct/{contrast}-{correction}.benchmark.tsv",
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
