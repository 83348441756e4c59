# Calibration stage (`famwise calibrate SPEC`): null datasets from the subjects' own maps
# -> empirical error rate of every correction. `rule all` does not ask for it.
# Sizes come from the command line: --config calibrate_datasets=N calibrate_permutations=M calibrate_shards=K
from famwise.calibrate.settings import calibration_settings as _calibration_settings

CALIBRATE_DATASETS = int(config.get("calibrate_datasets", 100))
CALIBRATE_SHARDS = int(config.get("calibrate_shards", min(10, CALIBRATE_DATASETS)))
CALIBRATE_PERMUTATIONS = config.get("calibrate_permutations")  # None: the study's own number


def _calibration(wildcards):
    return _calibration_settings(PLAN, wildcards.contrast, datasets=CALIBRATE_DATASETS,
                                 permutations=None if CALIBRATE_PERMUTATIONS is None else int(CALIBRATE_PERMUTATIONS),
                                 shards=CALIBRATE_SHARDS)


def calibration_settings(wildcards):
    return to_json(_calibration(wildcards))


def calibrate_shard_mem_mb(wildcards, attempt):
    return sizing.calibrate_shard_mem_mb(PLAN, _calibration(wildcards)) * attempt


def calibrate_shard_runtime(wildcards, attempt):
    return sizing.calibrate_shard_runtime_min(PLAN, _calibration(wildcards)) * attempt


def calibration_shard_files(wildcards):
    return [layout.calibration_shard(wildcards.contrast, k) for k in range(CALIBRATE_SHARDS)]


rule calibrate_shard:
    input:
        subjects=layout.contrast_data("{contrast}"),
        graph=graph_files,
    output:
        layout.calibration_shard("{contrast}", "{shard}"),
    log:
        layout.log("calibrate_shard", "{contrast}-{shard}"),
    benchmark:
        layout.job_benchmark("calibrate_shard", "{contrast}-{shard}"),
    params:
        settings=calibration_settings,
    wildcard_constraints:
        shard="[0-9]+",
    threads: 1
    resources:
        mem_mb=calibrate_shard_mem_mb,
        runtime=calibrate_shard_runtime,
    shell:
        "{JOB} calibrate-shard --settings {params.settings:q} --shard {wildcards.shard} "
        "--subjects {input.subjects} --graph '{input.graph}' --out {output} > {log} 2>&1"


rule calibrate_table:
    input:
        shards=calibration_shard_files,
        subjects=layout.contrast_data("{contrast}"),
        observed=layout.observed("{contrast}"),
    output:
        **layout.calibration_files("{contrast}"),
    log:
        layout.log("calibrate_table", "{contrast}"),
    benchmark:
        layout.job_benchmark("calibrate_table", "{contrast}"),
    params:
        settings=calibration_settings,
    shell:
        "{JOB} calibrate-table --settings {params.settings:q} --subjects {input.subjects} --observed {input.observed} "
        "--out {output.table} {input.shards} > {log} 2>&1"
