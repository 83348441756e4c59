# Permutation stage: one job per shard of the permutation table.
# `famwise run` on this machine gives each shard job cores // shards threads (config null_threads),
# so that a study with fewer shards than cores still uses every core; the nulls do not depend on it.

NULL_THREADS = max(1, int(config.get("null_threads", 1)))
THREADED_JOB = "NUMBA_NUM_THREADS={threads} OMP_NUM_THREADS={threads} OPENBLAS_NUM_THREADS={threads} " + JOB


rule null_shard:
    input:
        subjects=layout.contrast_data("{contrast}"),
        observed=layout.observed("{contrast}"),
        graph=graph_files,
    output:
        layout.null_shard("{contrast}", "{shard}"),
    log:
        layout.log("null_shard", "{contrast}-{shard}"),
    benchmark:
        layout.job_benchmark("null_shard", "{contrast}-{shard}"),
    params:
        settings=null_settings,
    threads: NULL_THREADS
    resources:
        mem_mb=null_shard_mem_mb,
        runtime=null_shard_runtime,
    shell:
        THREADED_JOB + " null-shard --settings {params.settings:q} --shard {wildcards.shard} "
        "--subjects {input.subjects} --observed {input.observed} --graph '{input.graph}' "
        "--out {output} > {log} 2>&1"


rule null_info:
    input:
        layout.contrast_data("{contrast}"),
    output:
        layout.null_info("{contrast}"),
    log:
        layout.log("null_info", "{contrast}"),
    benchmark:
        layout.job_benchmark("null_info", "{contrast}"),
    params:
        settings=null_settings,
    resources:
        mem_mb=observed_mem_mb,
        runtime=group_job_runtime,
    shell:
        "{JOB} null-info --settings {params.settings:q} --subjects {input} --out {output} > {log} 2>&1"


rule family_stepdown_shard:
    input:
        unpack(family_shard_inputs),
    output:
        layout.family_shard("{correction}", "{shard}"),
    log:
        layout.log("family_stepdown_shard", "{correction}-{shard}"),
    benchmark:
        layout.job_benchmark("family_stepdown_shard", "{correction}-{shard}"),
    params:
        settings=null_settings,
    threads: 1
    wildcard_constraints:
        correction=_alternatives(PLAN.stepdown_labels()),
    shell:
        "{JOB} family-stepdown-shard --settings {params.settings:q} --shard {wildcards.shard} "
        "--key {wildcards.correction} --subjects '{input.subjects}' --observed '{input.observed}' --out {output} > {log} 2>&1"
