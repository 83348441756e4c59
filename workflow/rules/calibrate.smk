# Calibration stage (`famwise calibrate SPEC`): null datasets from the subjects' own maps
# -> empirical error rate of every correction. `rule all` does not ask for it.
# Sizes come from the command line: --config calibrate_datasets=N calibrate_permutations=M calibrate_chunks=K
from famwise.calibrate.settings import calibration_settings as _calibration_settings

CALIBRATE_DATASETS = int(config.get("calibrate_datasets", 100))
CALIBRATE_CHUNKS = int(config.get("calibrate_chunks", min(10, CALIBRATE_DATASETS)))
CALIBRATE_PERMUTATIONS = config.get("calibrate_permutations")  # None: the study's own number


def calibration_settings(wildcards):
    return to_json(_calibration_settings(PLAN, wildcards.contrast, datasets=CALIBRATE_DATASETS,
                                         permutations=None if CALIBRATE_PERMUTATIONS is None else int(CALIBRATE_PERMUTATIONS),
                                         chunks=CALIBRATE_CHUNKS))


def calibration_chunk_files(wildcards):
    return [layout.calibration_chunk(wildcards.contrast, k) for k in range(CALIBRATE_CHUNKS)]


rule calibrate_chunk:
    input:
        subjects=layout.contrast_data("{contrast}"),
        graph=graph_files,
    output:
        layout.calibration_chunk("{contrast}", "{chunk}"),
    log:
        layout.log("calibrate_chunk", "{contrast}-{chunk}"),
    benchmark:
        layout.job_benchmark("calibrate_chunk", "{contrast}-{chunk}"),
    params:
        settings=calibration_settings,
    wildcard_constraints:
        chunk="[0-9]+",
    threads: 1
    shell:
        "{JOB} calibrate-chunk --settings {params.settings:q} --chunk {wildcards.chunk} "
        "--subjects {input.subjects} --graph '{input.graph}' --out {output} > {log} 2>&1"


rule calibrate_table:
    input:
        chunks=calibration_chunk_files,
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
        "--out {output.table} {input.chunks} > {log} 2>&1"
